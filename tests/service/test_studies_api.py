"""Engineering studies through the service (the ``study`` request and report members).

References: the plain engine (models.cross_section.evaluate_cross_section) on the
raised line for the clearance's binding point, and the service's own evaluation of
the relabelled demo line (a separate request, no study) for the phase ranking; the
OpenAPI document for the response shape and the request schema's field names;
RFC 9457 problem details naming the field by JSON Pointer, with nothing stored.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest

from models.cross_section import evaluate_cross_section
from models.studies.clearance import raise_section
from service import reports
from service.schema_fields import ClearanceStudySchema, PhaseArrangementStudySchema
from service.schemas import load_assessment_request

from .test_api import PROBLEM, small_body, stored_count
from .test_openapi import check_response, spec  # noqa: F401 (fixture)

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"
CLEARANCE = {"kind": "clearance", "threshold": "planning-0.4ut", "beyond_offset_m": 30.0,
             "min_clearance_m": 8.0, "max_clearance_m": 80.0, "tolerance_m": 0.01}
PHASE = {"kind": "phase_arrangement", "rank_by": "b_max"}


def demo(**changes) -> dict:
    body = json.loads((EXAMPLES / "demo_cross_section.json").read_text(encoding="utf-8"))
    body.update(changes)
    return body


def test_the_demo_line_has_two_circuits():
    assert len(demo()["cross_section"]["circuits"]) == 2


def test_clearance_study_is_stored_retrievable_and_verifies(app, client, spec):
    created = client.post("/v1/assessments", json=demo(study=CLEARANCE))
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    report = created.get_json()
    study = report["study"]
    assert list(report)[-2:] == ["study", "digest"]
    assert report["input"]["study"] == {k: v for k, v in CLEARANCE.items()}
    assert [c["id"] for c in study["cases"]] == ["base", "winter-peak", "east-out", "annual-mean"]
    fetched = client.get(created.headers["Location"])
    assert fetched.get_json() == report
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"

    # the binding point, re-checked with the plain engine for every case that found a height
    request = load_assessment_request(demo(), max_points=20_001, max_conductors=64)
    loading = {"base": 1.0, "winter-peak": 1.8, "annual-mean": 0.4}
    offsets = np.array([c["binding_offset_m"] for c in study["cases"] if c["achieved"]])
    assert np.all(np.abs(offsets) == 30.0)
    for case in study["cases"]:
        if case["id"] not in loading or not case["achieved"]:
            continue
        line = request.cross_section
        line = type(line)(tuple(type(c)(**{**c.__dict__, "current_a": c.current_a * loading[case["id"]]})
                                for c in line.circuits), line.earth_wires)
        xs = np.concatenate([np.arange(-100.0, -29.9, 0.5), np.arange(30.0, 100.1, 0.5)])

        def b_ut(h):
            return evaluate_cross_section(raise_section(line, h - 12.5), xs, 1.0, 50.0).b_rms_t.max() * 1e6
        assert b_ut(case["clearance_m"]) <= 0.4 and b_ut(case["clearance_m"]) == pytest.approx(0.4, rel=2e-3)
        assert b_ut(case["clearance_m"] - 0.1) > 0.4
    # the governing case is the one needing the largest clearance, or the first with none in the range
    failing = [c["id"] for c in study["cases"] if not c["achieved"]]
    expected = failing[0] if failing else max(study["cases"], key=lambda c: c["clearance_m"])["id"]
    assert study["governing_case"] == expected and study["achieved"] == (not failing)


def test_phase_arrangement_study_matches_a_separate_request_of_the_best_arrangement(app, client, spec):
    created = client.post("/v1/assessments", json=demo(study={"kind": "phase_arrangement", "rank_by": "b_max"}))
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    study = created.get_json()["study"]
    base = study["cases"][0]
    assert base["arrangements_evaluated"] == 36 and len(base["ranking"]) == 10
    assert base["given"]["arrangement"] == {"west": ["L1", "L2", "L3"], "east": ["L3", "L2", "L1"]}
    values = [r["value_ut"] for r in base["ranking"]]
    assert values == sorted(values) and base["best"]["value_ut"] == values[0]
    for name in ("given", "best"):
        body = demo()
        del body["load_cases"]
        for circuit in body["cross_section"]["circuits"]:
            for conductor, label in zip(circuit["conductors"], base[name]["arrangement"][circuit["id"]]):
                conductor["phase"] = label
        points = client.post("/v1/evaluate", json=body).get_json()["points"]
        inside = max(p["b_ut"] for p in points if -30.0 <= p["offset_m"] <= 30.0)
        assert base[name]["value_ut"] == pytest.approx(inside, rel=1e-9)
    assert base["reduction_percent"] == pytest.approx(
        100 * (1 - base["best"]["value_ut"] / base["given"]["value_ut"]), abs=1e-9)
    governing = max(study["cases"], key=lambda c: c["best"]["value_ut"])["id"]
    assert study["governing_case"] == governing
    assert client.post(created.headers["Location"] + "/verify").get_json()["verdict"] == "match"


def test_e_ranking_reports_kv_per_m(client, spec):
    r = client.post("/v1/evaluate", json=demo(study={"kind": "phase_arrangement", "rank_by": "e_max"}))
    check_response(spec, r)
    study = r.get_json()["study"]
    assert study["quantity"] == "E" and "value_kv_m" in study["cases"][0]["best"]
    e_max = r.get_json()["maxima"]["e"]["value_kv_m"]
    assert study["cases"][0]["given"]["value_kv_m"] == pytest.approx(e_max, rel=1e-9)


def test_without_a_study_input_and_report_have_no_study_member(client):
    report = client.post("/v1/evaluate", json=small_body()).get_json()
    assert "study" not in report and "study" not in report["input"]


def clearance(**changes) -> dict:
    return {**CLEARANCE, **changes}


@pytest.mark.parametrize("body, pointer", [
    (demo(study="clearance"), "/study"),
    (demo(study={"kind": "nope"}), "/study/kind"),
    (demo(study={"rank_by": "b_max"}), "/study/kind"),
    (demo(study=clearance(threshold="not-in-request")), "/study/threshold"),
    (demo(study=clearance(max_clearance_m=5.0)), "/study/max_clearance_m"),
    (demo(study={k: v for k, v in CLEARANCE.items() if k != "min_clearance_m"}), "/study/min_clearance_m"),
    (demo(study=clearance(tolerance_m=0)), "/study/tolerance_m"),
    (demo(study=clearance(tolerance_m="0.1")), "/study/tolerance_m"),
    (demo(study=clearance(beyond_offset_m=-1)), "/study/beyond_offset_m"),
    (demo(study=clearance(extra=1)), "/study/extra"),
    (demo(study=clearance(threshold="icnirp-2010-public")), "/study/quantity"),
    (demo(study=clearance(height_m=9.0)), "/study/min_clearance_m"),
    (demo(study={"kind": "phase_arrangement", "rank_by": "b_mean"}), "/study/rank_by"),
    (demo(study={"kind": "phase_arrangement", "rank_by": "b_receptors"}), "/study/rank_by"),
    (small_body(study={"kind": "phase_arrangement"}), "/study/kind"),
])
def test_bad_study_input_is_422_naming_the_field_and_stores_nothing(app, client, body, pointer):
    before = stored_count(app)
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 422 and r.mimetype == PROBLEM, r.get_data(as_text=True)
    pointers = [e["pointer"] for e in r.get_json()["errors"]]
    assert pointer in pointers, pointers
    assert stored_count(app) == before


def test_a_route_with_a_study_is_422_naming_the_kind(app, client):
    body = json.loads((EXAMPLES / "demo_route.json").read_text(encoding="utf-8"))
    before = stored_count(app)
    for study in (CLEARANCE | {"threshold": body["reference_levels"][0], "quantity": "B"},
                  {"kind": "phase_arrangement"}):
        r = client.post("/v1/assessments", json={**copy.deepcopy(body), "study": study})
        assert r.status_code == 422, r.get_data(as_text=True)
        assert [e["pointer"] for e in r.get_json()["errors"]] == ["/study/kind"]
    assert stored_count(app) == before


@pytest.mark.parametrize("name, schema", [("ClearanceStudy", ClearanceStudySchema),
                                          ("PhaseArrangementStudy", PhaseArrangementStudySchema)])
def test_study_schemas_match_the_document(spec, name, schema):
    doc = spec["components"]["schemas"][name]
    fields = schema().fields
    assert set(doc["properties"]) == set(fields)
    assert set(doc["required"]) == {k for k, f in fields.items() if f.required}
    assert "study" in spec["components"]["schemas"]["AssessmentRequest"]["properties"]
    assert "study" in spec["components"]["schemas"]["RouteAssessmentRequest"]["properties"]


@pytest.mark.parametrize("study", [CLEARANCE, {"kind": "phase_arrangement", "rank_by": "b_edge"},
                                   clearance(beyond_offset_m=None, quantity="B", height_m=1.5)])
def test_normalised_input_with_a_study_loads_to_an_equal_request(client, study):
    body = demo(study=study)
    report = client.post("/v1/evaluate", json=body).get_json()
    assert "beyond_offset_m" not in report["input"]["study"] or study.get("beyond_offset_m") is not None
    again = load_assessment_request(report["input"], max_points=20_001, max_conductors=64)
    assert again == load_assessment_request(body, max_points=20_001, max_conductors=64)
    assert again.study is not None and again.study.kind == study["kind"]


@pytest.mark.parametrize("study", ["clearance", "phase"])
def test_the_printable_report_shows_the_study_per_case(client, study):
    body = demo(study=CLEARANCE if study == "clearance" else PHASE)
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201
    report = created.get_json()
    page = client.get(created.headers["Location"] + "/report?format=html").get_data(as_text=True)
    section = page[page.index('<section id="study">'):page.index('<section id="assumptions">')]
    assert section.count("<tr>") == 1 + len(report["study"]["cases"])  # header row + one per case
    for case in report["study"]["cases"]:
        assert f"<td>{case['label']}</td>" in section
    if study == "clearance":
        governing = next(c for c in report["study"]["cases"] if c["id"] == report["study"]["governing_case"])
        found = governing["clearance_m"]
        assert (f"{reports.format_number(found)} m" if found is not None else "NOT achieved") in section
    else:
        best = report["study"]["cases"][0]["best"]["arrangement"]
        assert " / ".join(map(str, best)) in section
    no_study = client.post("/v1/assessments", json=demo())
    assert '<section id="study">' not in client.get(no_study.headers["Location"] + "/report?format=html").get_data(as_text=True)
