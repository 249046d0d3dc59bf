"""Levels that apply at the edge of the right-of-way are judged on the edge values.

A single conductor 10 m above ground carrying 1000 A, 60 Hz, with the right-of-way
edges 30 m either side: under the line (1 m above ground) B = mu0 I / (2 pi 9 m)
= 22.2 µT, above the 15 µT edge value of the Florida row; at the edges
B = mu0 I / (2 pi sqrt(30^2 + 9^2)) = 6.4 µT, below it (Ampère's law for a long
straight conductor; mu0 from scipy.constants, CODATA).  Judged at every point the
line fails that row, judged at the edges (as the row says) it passes.
"""

from __future__ import annotations

import json
import math

import pytest
import scipy.constants

from models import catalogue
from models.catalogue import CatalogueFileError

from .test_api import small_body, stored_count
from .test_openapi import check_response, spec  # noqa: F401 (fixture)
from .test_route_api import small_route_body

EDGE_LEVEL = "us-fl-62-814-230kv-row-edge"
ROW = {"left_m": -30.0, "right_m": 30.0}


def one_conductor_body(**changes) -> dict:
    body = small_body(frequency_hz=60, reference_levels=[EDGE_LEVEL, "icnirp-2010-public"],
                      profile={"from_m": -40, "to_m": 40, "step_m": 1, "height_m": 1}, **changes)
    c = body["cross_section"]["circuits"][0]
    c.update(voltage_kv=0, current_a=1000, conductors=[{"phase": "L1", "offset_m": 0, "height_m": 10}])
    return body


def ampere_ut(r_m: float, current_a: float = 1000.0) -> float:
    return scipy.constants.mu_0 * current_a / (2 * math.pi * r_m) * 1e6


def rows(report: dict, level_id: str) -> dict[str, dict]:
    return {c["quantity"]: c for c in report["compliance"] if c["level_id"] == level_id}


def test_edge_level_with_right_of_way_uses_the_edge_values(client, spec):
    response = client.post("/v1/evaluate", json=one_conductor_body(right_of_way=ROW))
    check_response(spec, response)
    report = response.get_json()
    b = rows(report, EDGE_LEVEL)["B"]
    assert b["applies_at"] == "right_of_way_edge" and b["basis"] == "right_of_way_edges"
    assert "edge" in b["basis_note"]
    edge_b = [e["b_ut"] for e in report["right_of_way"]["edges"]]
    assert b["max_ut"] == pytest.approx(max(edge_b), rel=1e-12)
    assert b["max_ut"] == pytest.approx(ampere_ut(math.hypot(30.0, 9.0)), rel=1e-6)  # Ampère, independent
    assert abs(b["max_offset_m"]) == 30.0 and b["max_height_m"] == 1.0
    assert b["exposure_index"] == pytest.approx(b["max_ut"] / 15.0, rel=1e-12)
    assert b["passes"] is True
    # the profile maximum is still reported (maxima) and still fails the edge value
    assert report["maxima"]["b"]["value_ut"] == pytest.approx(ampere_ut(9.0), rel=1e-6) and ampere_ut(9.0) > 15.0
    # a level that applies everywhere is judged on every point, as before
    icnirp = rows(report, "icnirp-2010-public")["B"]
    assert icnirp["basis"] == "all_points" and icnirp["applies_at"] == "any_point"
    assert icnirp["max_ut"] == pytest.approx(report["maxima"]["b"]["value_ut"], rel=1e-12)
    assert report["outcome"] == "pass"


def test_edge_level_keeps_the_profile_compliance_distances(client):
    with_row = client.post("/v1/evaluate", json=one_conductor_body(right_of_way=ROW)).get_json()
    without = client.post("/v1/evaluate", json=one_conductor_body()).get_json()
    a, b = rows(with_row, EDGE_LEVEL)["B"], rows(without, EDGE_LEVEL)["B"]
    assert (a["distance_left_m"], a["distance_right_m"]) == (b["distance_left_m"], b["distance_right_m"])
    # 15 µT is reached where r = mu0 I / (2 pi 15 µT): offset sqrt(r^2 - 9^2) (Ampère)
    r = scipy.constants.mu_0 * 1000 / (2 * math.pi * 15e-6)
    assert a["distance_right_m"] == pytest.approx(math.sqrt(r * r - 81.0), abs=0.05)


def test_edge_level_without_right_of_way_is_judged_conservatively(client, spec):
    response = client.post("/v1/evaluate", json=one_conductor_body())
    check_response(spec, response)
    report = response.get_json()
    b = rows(report, EDGE_LEVEL)["B"]
    assert b["basis"] == "all_points_conservative" and "right_of_way" in b["basis_note"]
    assert b["max_ut"] == pytest.approx(ampere_ut(9.0), rel=1e-6)
    assert b["passes"] is False and report["outcome"] == "fail"


def test_stored_report_with_edge_basis_verifies(app, client):
    before = stored_count(app)
    created = client.post("/v1/assessments", json=one_conductor_body(right_of_way=ROW))
    assert created.status_code == 201 and stored_count(app) == before + 1
    verdict = client.post(created.headers["Location"] + "/verify").get_json()
    assert verdict["verdict"] == "match", verdict


def test_route_report_marks_edge_levels_conservative(client, spec):
    response = client.post("/v1/evaluate", json=small_route_body(frequency_hz=60, reference_levels=[EDGE_LEVEL]))
    check_response(spec, response)
    for c in response.get_json()["compliance"]:
        assert c["applies_at"] == "right_of_way_edge" and c["basis"] == "all_points_conservative"


def test_html_report_states_the_basis(client):
    created = client.post("/v1/assessments", json=one_conductor_body(right_of_way=ROW))
    html = client.get(created.headers["Location"] + "/report?format=html").get_data(as_text=True)
    assert "value at the right-of-way edge (the level applies there)" in html


def test_catalogue_marks_exactly_the_edge_rows():
    edge = {lv.id for lv in catalogue.load_catalogue().levels if lv.applies_at == "right_of_way_edge"}
    assert edge == {"us-fl-62-814-230kv-row-edge", "us-fl-62-814-500kv-row-edge", "us-ny-psc-row-edge"}
    for lv in catalogue.load_catalogue().levels:  # the scope text says the same thing in words
        assert (lv.applies_at == "right_of_way_edge") == lv.scope.startswith("Applies at the edge of the right-of-way")


def test_reference_levels_listing_carries_applies_at(client):
    body = client.get("/v1/reference-levels?frequency_hz=60").get_json()
    by_id = {t["level_id"]: t["applies_at"] for t in body["thresholds"]}
    assert by_id[EDGE_LEVEL] == "right_of_way_edge" and by_id["icnirp-2010-public"] == "any_point"


def test_bad_applies_at_in_a_catalogue_file_names_the_field(tmp_path):
    data = json.loads(catalogue.resources.files("models").joinpath("data", "reference_levels.json")
                      .read_text(encoding="utf-8"))
    data["levels"][2]["applies_at"] = "somewhere"
    path = tmp_path / "levels.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    with pytest.raises(CatalogueFileError) as info:
        catalogue.load_catalogue(path)
    assert info.value.path == "levels[2].applies_at"
