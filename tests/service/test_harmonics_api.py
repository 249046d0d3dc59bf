"""Harmonics through the service (the circuits' ``harmonics`` request member and the ``harmonics`` report member).

References: the ICNIRP 2010 multiple-frequency rule sum_j X_j / X_R,j <= 1 (ICNIRP 2010,
Health Phys. 99(6):818-836, from memory) with reference levels typed from ICNIRP 2010
Table 4, general public (E 5 kV/m at 50 Hz and 250/f kV/m above; B 200 µT from 25 Hz to
400 Hz; table number from memory); a separate request of the harmonic loading (the
same line at 150 Hz with the currents scaled and zero-sequence phases) for the fields;
the OpenAPI document for the response shape; RFC 9457 problems naming the field by
JSON Pointer, with nothing stored.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

from .test_api import PROBLEM, small_body, stored_count
from .test_openapi import check_response, spec  # noqa: F401 (fixture)
from .test_route_api import small_route_body

HARMONICS = [{"order": 3, "current_fraction": 0.2, "voltage_fraction": 0.05},
             {"order": 5, "current_fraction": 0.1, "voltage_fraction": 0.02}]


def with_harmonics(body: dict, harmonics=None, member: str = "cross_section") -> dict:
    body = copy.deepcopy(body)
    body[member]["circuits"][0]["harmonics"] = copy.deepcopy(HARMONICS if harmonics is None else harmonics)
    return body


def test_harmonics_are_stored_retrievable_verify_and_sum_as_the_standard_says(app, client, spec):
    created = client.post("/v1/assessments", json=with_harmonics(small_body()))
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    report = created.get_json()
    block = report["harmonics"]
    assert report["input"]["cross_section"]["circuits"][0]["harmonics"] == [
        {"order": 3, "current_fraction": 0.2, "voltage_fraction": 0.05},
        {"order": 5, "current_fraction": 0.1, "voltage_fraction": 0.02}]
    assert block["orders"] == [3, 5] and block["frequencies_hz"] == [150.0, 250.0]
    fetched = client.get(created.headers["Location"])
    assert fetched.get_json() == report
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"

    # the 3rd harmonic on its own: the same line at 150 Hz, 100 A in every phase, all at 0 deg (zero sequence)
    third = small_body(frequency_hz=150)
    for k in third["cross_section"]["circuits"][0]["conductors"]:
        k["current"] = {"magnitude_a": 100.0, "angle_deg": 0.0}
        k["voltage_to_ground"] = {"magnitude_kv": 0.05 * 132 / 3 ** 0.5, "angle_deg": 0.0}
    points_150 = client.post("/v1/evaluate", json=third).get_json()["points"]
    fundamental = report["points"]
    rows = {r["quantity"]: r for r in block["compliance"]}
    b = rows["B"]
    i = b["location"]["point_index"]
    assert b["components"][1]["value_ut"] == pytest.approx(points_150[i]["b_ut"], rel=1e-9)
    # by hand, ICNIRP 2010 Table 4: B_R = 200 µT at 50, 150 and 250 Hz
    by_hand = sum(c["value_ut"] / 200.0 for c in b["components"])
    assert b["summed_index"] == pytest.approx(by_hand, rel=1e-9)
    assert b["fundamental_index"] == pytest.approx(max(p["b_ut"] for p in fundamental) / 200.0, rel=1e-9)
    e = rows["E"]
    assert [c["limit_kv_m"] for c in e["components"]] == pytest.approx([5.0, 250 / 150, 250 / 250], rel=1e-12)
    assert e["summed_index"] == pytest.approx(sum(c["value_kv_m"] / c["limit_kv_m"] for c in e["components"]),
                                              rel=1e-12)
    assert e["rule"] == "icnirp-2010-sum" and e["passes"] == (e["summed_index"] <= 1)


def test_a_request_without_harmonics_has_no_harmonics_member(client):
    report = client.post("/v1/evaluate", json=small_body()).get_json()
    assert "harmonics" not in report and "harmonics" not in report["input"]["cross_section"]["circuits"][0]


def test_harmonic_failure_fails_the_report_and_load_cases_name_the_governing_case(client, spec):
    body = with_harmonics(small_body(reference_levels=["icnirp-2010-public", "de-26-bimschv-2013"],
                                     load_cases=[{"id": "peak", "current_scale": 3.0}]),
                          [{"order": 3, "current_fraction": 1.0, "voltage_fraction": 1.0}])
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    report = created.get_json()
    block = report["harmonics"]
    assert [c["id"] for c in block["load_cases"]] == ["base", "peak"]
    b = next(g for g in block["governing"] if g["level_id"] == "icnirp-2010-public" and g["quantity"] == "B")
    assert b["case_id"] == "peak"
    base_b = next(r for r in block["compliance"] if r["level_id"] == "icnirp-2010-public" and r["quantity"] == "B")
    assert b["summed_index"] == pytest.approx(3 * base_b["summed_index"], rel=1e-9)   # B linear in the currents
    german = [r for r in block["compliance"] if r["level_id"] == "de-26-bimschv-2013"]
    assert all(r["rule"] == "not-assessed" and r["summed_index"] is None for r in german)
    # a 100 % zero-sequence 3rd-harmonic voltage: every fundamental check passes, the sum rule for E fails
    e = next(r for r in block["compliance"] if r["quantity"] == "E" and r["level_id"] == "icnirp-2010-public")
    assert all(r["passes"] for r in report["compliance"]) and e["passes"] is False
    assert block["outcome"] == "fail" and report["outcome"] == "fail"
    # E does not change with current_scale: a tie, the first case (base) governs
    assert next(g for g in block["governing"] if g["quantity"] == "E")["case_id"] == "base"
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"


def test_route_harmonics_are_reported_and_verify(client, spec):
    created = client.post("/v1/assessments", json=with_harmonics(small_route_body(), member="route"))
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    report = created.get_json()
    rows = report["harmonics"]["compliance"]
    assert [r["quantity"] for r in rows] == ["E", "B"] and all(r["summed_index"] > r["fundamental_index"] for r in rows)
    assert "set" in rows[1]["location"]
    assert report["input"]["route"]["circuits"][0]["harmonics"][0]["order"] == 3
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"


@pytest.mark.parametrize("harmonics, pointer", [
    ([{"order": 1, "current_fraction": 0.1}], "/cross_section/circuits/0/harmonics/0/order"),
    ([{"order": 51, "current_fraction": 0.1}], "/cross_section/circuits/0/harmonics/0/order"),
    ([{"order": "3", "current_fraction": 0.1}], "/cross_section/circuits/0/harmonics/0/order"),
    ([{"order": 3.5, "current_fraction": 0.1}], "/cross_section/circuits/0/harmonics/0/order"),
    ([{"current_fraction": 0.1}], "/cross_section/circuits/0/harmonics/0/order"),
    ([{"order": 3, "current_fraction": 1.5}], "/cross_section/circuits/0/harmonics/0/current_fraction"),
    ([{"order": 3, "voltage_fraction": -0.1}], "/cross_section/circuits/0/harmonics/0/voltage_fraction"),
    ([{"order": 3, "phase_deg": 10}], "/cross_section/circuits/0/harmonics/0/phase_deg"),
    ([{"order": 3}, {"order": 5}, {"order": 3}], "/cross_section/circuits/0/harmonics/2/order"),
    ([], "/cross_section/circuits/0/harmonics"),
])
def test_bad_harmonics_are_422_naming_the_field_and_nothing_is_stored(app, client, harmonics, pointer):
    r = client.post("/v1/assessments", json=with_harmonics(small_body(), harmonics))
    assert r.status_code == 422 and r.mimetype == PROBLEM, r.get_data(as_text=True)
    assert pointer in [e["pointer"] for e in r.get_json()["errors"]]
    assert stored_count(app) == 0


def test_a_harmonic_above_3_khz_is_422_naming_the_order(app, client):
    body = with_harmonics(small_body(frequency_hz=100), [{"order": 40, "current_fraction": 0.01}])
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 422 and r.mimetype == PROBLEM
    assert [e["pointer"] for e in r.get_json()["errors"]] == ["/cross_section/circuits/0/harmonics/0/order"]
    assert stored_count(app) == 0


def test_too_many_harmonic_evaluations_are_refused_before_computing(app, client):
    body = with_harmonics(small_body(profile={"from_m": -100, "to_m": 100, "step_m": 0.05, "height_m": 1}),
                          [{"order": n, "current_fraction": 0.01} for n in range(2, 51)])
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 422 and r.mimetype == PROBLEM
    assert [e["pointer"] for e in r.get_json()["errors"]] == ["/cross_section/circuits/0/harmonics"]
    assert stored_count(app) == 0


def test_the_documented_example_is_answered_with_a_harmonics_member(client, spec):
    body = json.loads((Path(__file__).resolve().parents[2] / "docs" / "examples" / "harmonics_cross_section.json")
                      .read_text(encoding="utf-8"))
    r = client.post("/v1/evaluate", json=body)
    assert r.status_code == 200, r.get_data(as_text=True)
    check_response(spec, r)
    block = r.get_json()["harmonics"]
    assert block["orders"] == [3, 5, 7] and [g["case_id"] for g in block["governing"]] == ["base", "peak"] * 2
