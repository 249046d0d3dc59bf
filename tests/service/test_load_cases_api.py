"""Load cases in cross-section requests: what-if loading judged in one report.

Routes also take sag load cases (conductor temperature): the level-span catenary
(lowest point one sag below the attachments; common practice, any statics text) and
consistency with a separate request built with the cool sags.

References: superposition (B linear in the currents, E in the voltages) checked
against separate requests built with the changed values; Ampère's law for one
long straight conductor (mu0 from scipy.constants, CODATA); the OpenAPI document
for the response shape.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
import scipy.constants

from .test_api import PROBLEM, small_body, stored_count
from .test_openapi import check_response, spec  # noqa: F401 (fixture)

CASES = [{"id": "peak", "label": "Winter peak rating", "currents_a": {"c1": 1500}},
         {"id": "uprate", "label": "Uprated voltage", "voltages_kv": {"c1": 150}, "current_scale": 0.5}]


def with_cases(cases=None, **changes) -> dict:
    return small_body(load_cases=CASES if cases is None else cases, **changes)


def test_each_case_equals_a_separate_request_with_that_loading(client, spec):
    response = client.post("/v1/evaluate", json=with_cases())
    check_response(spec, response)
    report = response.get_json()
    cases = {c["id"]: c for c in report["load_cases"]}
    assert list(cases) == ["base", "peak", "uprate"]
    for case_id, changes in (("peak", {"current_a": 1500}), ("uprate", {"voltage_kv": 150, "current_a": 250})):
        body = small_body()
        body["cross_section"]["circuits"][0].update(changes)
        separate = client.post("/v1/evaluate", json=body).get_json()
        case = cases[case_id]
        assert case["maxima"]["b"]["value_ut"] == pytest.approx(separate["maxima"]["b"]["value_ut"], rel=1e-12)
        assert case["maxima"]["e"]["value_kv_m"] == pytest.approx(separate["maxima"]["e"]["value_kv_m"], rel=1e-12)
        for a, b in zip(case["points"], separate["points"]):
            assert (a["offset_m"], a["height_m"]) == (b["offset_m"], b["height_m"])
            assert a["b_ut"] == pytest.approx(b["b_ut"], rel=1e-12) and a["e_kv_m"] == pytest.approx(b["e_kv_m"], rel=1e-12)
        assert [c["exposure_index"] for c in case["compliance"]] == pytest.approx(
            [c["exposure_index"] for c in separate["compliance"]], rel=1e-12)
        assert case["outcome"] == separate["outcome"]
    base = cases["base"]
    assert base["label"] == "As requested" and base["maxima"] == report["maxima"]
    assert base["loading"] == {"current_scale": 1.0, "currents_a": {"c1": 500.0}, "voltages_kv": {"c1": 132.0}}
    assert cases["uprate"]["loading"]["currents_a"] == {"c1": 250.0}
    # B scales with the current (superposition): 1500 A is three times the base 500 A
    assert cases["peak"]["maxima"]["b"]["value_ut"] == pytest.approx(3 * base["maxima"]["b"]["value_ut"], rel=1e-12)


def test_summary_names_the_governing_case_and_the_overall_outcome(client):
    # Ampère: one conductor 10 m up, 1 m above ground: B = mu0 I / (2 pi 9 m); a 30 µT custom
    # limit passes at 1000 A (22.2 µT) and fails at 1500 A (33.3 µT).
    body = small_body(custom_limits=[{"id": "plan", "quantity": "B", "value": 30, "unit": "µT"}],
                      load_cases=[{"id": "peak", "currents_a": {"c1": 1500}}, {"id": "low", "current_scale": 0.2}])
    c = body["cross_section"]["circuits"][0]
    c.update(voltage_kv=0, current_a=1000, conductors=[{"phase": "L1", "offset_m": 0, "height_m": 10}])
    report = client.post("/v1/evaluate", json=body).get_json()
    assert report["outcome"] == "pass"  # the request as given
    summary = report["load_case_summary"]
    assert summary["outcome"] == "fail" and summary["failing_cases"] == ["peak"] and summary["cases"] == 3
    plan = next(g for g in summary["governing"] if g["level_id"] == "plan")
    expected = scipy.constants.mu_0 * 1500 / (2 * math.pi * 9.0) * 1e6 / 30.0
    assert plan["case_id"] == "peak" and plan["exposure_index"] == pytest.approx(expected, rel=1e-6)
    assert plan["passes"] is False


def test_without_load_cases_the_report_and_input_are_unchanged(client):
    report = client.post("/v1/evaluate", json=small_body()).get_json()
    assert "load_cases" not in report and "load_case_summary" not in report
    assert "load_cases" not in report["input"]


def test_stored_assessment_with_load_cases_round_trips_and_verifies(app, client):
    created = client.post("/v1/assessments", json=with_cases())
    assert created.status_code == 201
    body = created.get_json()
    assert [c["id"] for c in body["input"]["load_cases"]] == ["peak", "uprate"]
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"
    html = client.get(created.headers["Location"] + "/report?format=html").get_data(as_text=True)
    assert 'id="load-cases"' in html and "Winter peak rating" in html


@pytest.mark.parametrize("cases, pointer", [
    ([{"id": "x", "currents_a": {"nope": 10}}], "/load_cases/0/currents_a/nope"),
    ([{"id": "x", "voltages_kv": {"c1": -1}}], "/load_cases/0/voltages_kv/c1/value"),
    ([{"id": "x", "current_scale": -2}], "/load_cases/0/current_scale"),
    ([{"id": "x"}], "/load_cases/0/current_scale"),
    ([{"id": "base", "current_scale": 2}], "/load_cases/0/id"),
    ([{"id": "x", "current_scale": 2}, {"id": "x", "current_scale": 3}], "/load_cases/1/id"),
    ([], "/load_cases"),
    ([{"id": f"c{k}", "current_scale": 2} for k in range(17)], "/load_cases"),
    ([{"currents_a": {"c1": 10}}], "/load_cases/0/id"),
])
def test_bad_load_cases_are_422_naming_the_field_and_store_nothing(app, client, cases, pointer):
    before = stored_count(app)
    r = client.post("/v1/assessments", json=with_cases(cases))
    assert r.status_code == 422 and r.mimetype == PROBLEM, r.get_data(as_text=True)
    pointers = [e["pointer"] for e in r.get_json()["errors"]]
    assert pointer in pointers, pointers
    assert stored_count(app) == before


def test_too_many_case_points_is_422(client):
    body = with_cases([{"id": f"c{k}", "current_scale": 2} for k in range(16)],
                      profile={"from_m": -100, "to_m": 100, "step_m": 0.03, "height_m": 1})
    r = client.post("/v1/evaluate", json=body)
    assert r.status_code == 422
    assert "/load_cases" in [e["pointer"] for e in r.get_json()["errors"]]


# --------------------------------------------------------------------------- routes


def test_route_load_cases_match_separate_route_requests(client, spec):
    from .test_route_api import small_route_body

    body = small_route_body(load_cases=[{"id": "peak", "label": "Peak", "currents_a": {"c1": 1500}}])
    response = client.post("/v1/evaluate", json=body)
    check_response(spec, response)
    report = response.get_json()
    base, peak = report["load_cases"]
    assert base["id"] == "base" and base["maxima"] == report["maxima"]
    separate_body = small_route_body()
    separate_body["route"]["circuits"][0]["current_a"] = 1500
    separate = client.post("/v1/evaluate", json=separate_body).get_json()
    assert peak["maxima"]["b"]["value_ut"] == pytest.approx(separate["maxima"]["b"]["value_ut"], rel=1e-12)
    assert peak["maxima"]["e"]["value_kv_m"] == pytest.approx(separate["maxima"]["e"]["value_kv_m"], rel=1e-12)
    assert [r["b_ut"] for r in peak["receptors"]] == pytest.approx(
        [r["b_ut"] for r in separate["results"]["receptors"]], rel=1e-12)
    # superposition: three times the current, three times B at every receptor (the earth wire carries none)
    assert [r["b_ut"] for r in peak["receptors"]] == pytest.approx([3 * r["b_ut"] for r in base["receptors"]],
                                                                   rel=1e-9)
    assert report["load_case_summary"]["cases"] == 2
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201
    assert [c["id"] for c in created.get_json()["input"]["load_cases"]] == ["peak"]
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"


def test_route_load_case_with_unknown_circuit_is_422(app, client):
    from .test_route_api import small_route_body

    before = stored_count(app)
    r = client.post("/v1/assessments", json=small_route_body(load_cases=[{"id": "x", "currents_a": {"zz": 1}}]))
    assert r.status_code == 422
    assert "/load_cases/0/currents_a/zz" in [e["pointer"] for e in r.get_json()["errors"]]
    assert stored_count(app) == before


# --------------------------------------------------------------------------- routes: conductor temperature and sag
# The route as given is the maximum design temperature case (largest sag, lowest clearance); a
# load case gives the sags of a cooler case (from the user's own sag-tension calculation).

COOL = {"id": "cool", "label": "cool", "sag_m": {"c1": 1.0}, "earth_wire_sag_m": [0.5]}


def _route_with_sag(conductor_sag_m: float, earth_wire_sag_m: float, **changes) -> dict:
    from .test_route_api import small_route_body

    body = small_route_body(**changes)
    for k in body["route"]["circuits"][0]["conductors"]:
        k["sag_m"] = conductor_sag_m
    body["route"]["earth_wires"][0]["sag_m"] = earth_wire_sag_m
    return body


def test_cool_sag_case_equals_a_separate_request_with_the_cool_geometry(client, spec):
    response = client.post("/v1/evaluate", json=_route_with_sag(3.0, 2.0, load_cases=[COOL]))
    check_response(spec, response)
    report = response.get_json()
    hot, cool = report["load_cases"]
    separate = client.post("/v1/evaluate", json=_route_with_sag(1.0, 0.5)).get_json()
    # same engine on the same geometry: equal to the last bit
    assert cool["maxima"] == separate["maxima"]
    assert cool["receptors"] == [{k: r[k] for k in ("id", "name", "e_kv_m", "b_ut")}
                                 for r in separate["results"]["receptors"]]
    assert [c["exposure_index"] for c in cool["compliance"]] == [c["exposure_index"] for c in separate["compliance"]]
    assert hot["maxima"] == report["maxima"]
    # both cases state their sags and the lowest phase conductor: level spans 15 m high, so one sag
    # below the attachments (catenary, level span; common practice)
    assert hot["loading"]["sag_m"] == {"c1": 3.0} and hot["loading"]["earth_wire_sag_m"] == [2.0]
    assert cool["loading"]["sag_m"] == {"c1": 1.0} and cool["loading"]["earth_wire_sag_m"] == [0.5]
    assert hot["loading"]["lowest_conductor"]["height_m"] == pytest.approx(15.0 - 3.0, abs=1e-9)
    assert cool["loading"]["lowest_conductor"]["height_m"] == pytest.approx(15.0 - 1.0, abs=1e-9)
    # the conductors are farther from the receptors when cool: B lower at each
    assert all(c["b_ut"] < h["b_ut"] for c, h in zip(cool["receptors"], hot["receptors"]))


def test_hot_case_governs_b_and_its_failure_is_named(client):
    # B at h1 (100 m along the first span, 30 m aside) is larger hot than cool; a custom limit between
    # the two cases fails the base (hot) case only.
    body = _route_with_sag(3.0, 2.0, load_cases=[COOL])
    first = client.post("/v1/evaluate", json=body).get_json()
    hot_b, cool_b = (c["maxima"]["b"]["value_ut"] for c in first["load_cases"])
    assert cool_b < hot_b
    body["custom_limits"] = [{"id": "plan", "quantity": "B", "value": (hot_b + cool_b) / 2, "unit": "µT"}]
    report = client.post("/v1/evaluate", json=body).get_json()
    summary = report["load_case_summary"]
    assert report["outcome"] == "fail" and summary["failing_cases"] == ["base"]
    plan = next(g for g in summary["governing"] if g["level_id"] == "plan")
    assert plan["case_id"] == "base" and plan["passes"] is False
    assert [c["outcome"] for c in report["load_cases"]] == ["fail", "pass"]


def test_sag_case_is_stored_retrievable_and_verifies(client):
    created = client.post("/v1/assessments", json=_route_with_sag(3.0, 2.0, load_cases=[COOL]))
    assert created.status_code == 201, created.get_data(as_text=True)
    stored = created.get_json()
    assert stored["input"]["load_cases"] == [{**COOL, "current_scale": 1.0, "sag_m": {"c1": 1.0}}]
    fetched = client.get(created.headers["Location"]).get_json()
    assert fetched["load_cases"] == stored["load_cases"]
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"
    html = client.get(created.headers["Location"] + "/report?format=html").get_data(as_text=True)
    assert "Lowest conductor (m)" in html


def test_loading_without_sag_cases_has_no_sag_members(client):
    report = client.post("/v1/evaluate", json=_route_with_sag(3.0, 2.0, load_cases=[
        {"id": "peak", "current_scale": 2}])).get_json()
    assert set(report["load_cases"][1]["loading"]) == {"current_scale", "currents_a", "voltages_kv"}


@pytest.mark.parametrize("case, pointer", [
    ({"id": "x", "sag_m": {"zz": 1}}, "/load_cases/0/sag_m/zz"),
    ({"id": "x", "sag_m": {"c1": -1}}, "/load_cases/0/sag_m/c1/value"),
    ({"id": "x", "sag_m": {"c1": "2"}}, "/load_cases/0/sag_m/c1/value"),
    ({"id": "x", "sag_m": {"c1": 16}}, "/load_cases/0/sag_m/c1"),          # below the ground in span 0
    ({"id": "x", "sag_m": {}}, "/load_cases/0/sag_m"),
    ({"id": "x", "earth_wire_sag_m": [1, 2]}, "/load_cases/0/earth_wire_sag_m"),
    ({"id": "x", "earth_wire_sag_m": [25]}, "/load_cases/0/earth_wire_sag_m/0"),
])
def test_bad_route_sag_cases_are_422_naming_the_field_and_store_nothing(app, client, case, pointer):
    before = stored_count(app)
    r = client.post("/v1/assessments", json=_route_with_sag(3.0, 2.0, load_cases=[case]))
    assert r.status_code == 422 and r.mimetype == PROBLEM, r.get_data(as_text=True)
    assert pointer in [e["pointer"] for e in r.get_json()["errors"]], r.get_json()["errors"]
    assert stored_count(app) == before


def test_underground_circuit_sag_case_is_422(client):
    body = _route_with_sag(3.0, 2.0, load_cases=[{"id": "x", "sag_m": {"u1": 0.5}}])
    body["route"]["circuits"].append({"id": "u1", "kind": "underground", "voltage_kv": 132, "current_a": 300,
                                      "conductors": [{"phase": p, "offset_m": 12 + o, "height_m": -1.2}
                                                     for p, o in (("L1", -0.3), ("L2", 0.0), ("L3", 0.3))],
                                      "bundle": {"subconductor_diameter_m": 0.05}})
    r = client.post("/v1/evaluate", json=body)
    assert r.status_code == 422
    assert "/load_cases/0/sag_m/u1" in [e["pointer"] for e in r.get_json()["errors"]]


@pytest.mark.parametrize("member", [{"sag_m": {"c1": 1.0}}, {"earth_wire_sag_m": [1.0]}])
def test_cross_section_sag_case_is_422_naming_the_member(app, client, member):
    before = stored_count(app)
    r = client.post("/v1/assessments", json=with_cases([{"id": "cool", **member}]))
    assert r.status_code == 422
    errors = r.get_json()["errors"]
    name = next(iter(member))
    assert any(e["pointer"] == f"/load_cases/0/{name}" and "no spans" in e["detail"] for e in errors), errors
    assert stored_count(app) == before


def test_the_documented_sag_example_gives_what_the_docs_say(client):
    # docs/routes.md: lowest conductor 10.5 m hot and 12.8 m cool (18 m attachments, level spans,
    # sags 7.5 m and 5.2 m); the hot (base) case governs both thresholds.
    root = Path(__file__).resolve().parents[2]
    body = json.loads((root / "docs" / "examples" / "route_sag_cases.json").read_text(encoding="utf-8"))
    report = client.post("/v1/evaluate", json=body).get_json()
    hot, cool = report["load_cases"]
    assert hot["loading"]["lowest_conductor"]["height_m"] == pytest.approx(18.0 - 7.5, abs=1e-9)
    assert cool["loading"]["lowest_conductor"]["height_m"] == pytest.approx(18.0 - 5.2, abs=1e-9)
    assert {g["case_id"] for g in report["load_case_summary"]["governing"]} == {"base"}
    text = (root / "docs" / "routes.md").read_text(encoding="utf-8")
    assert '"lowest_conductor": {"height_m": 10.5' in text and "12.8 m" in text
