"""Right-of-way edges in cross-section assessments: request member, report block, plot, contract.

The edge values are checked against the engine called directly at the same offsets
(so they are computed there, not interpolated from the profile) and, for one
conductor, against Ampère's law in closed form.
"""

from __future__ import annotations

import json
import math
import re
from html.parser import HTMLParser

import numpy as np
import pytest
import scipy.constants
import yaml

from models.cross_section import evaluate_cross_section
from service.schema_fields import to_plain
from service.schemas import RightOfWaySchema, load_assessment_request

from .test_api import DEMO, PROBLEM, small_body, stored_count
from .test_openapi import SPEC_PATH, check_response

ROW = {"left_m": -7.3, "right_m": 12.9}  # off the 10 m profile grid of small_body on purpose


def with_row(**changes) -> dict:
    return small_body(right_of_way=dict(ROW), **changes)


def as_points(body: dict, points: list[dict]) -> dict:
    del body["profile"]
    body["points"] = points
    return body


# --------------------------------------------------------------------------- accepted, echoed, stored, verified


def test_right_of_way_is_echoed_and_round_trips(client):
    body = client.post("/v1/assessments", json=with_row()).get_json()
    assert body["input"]["right_of_way"] == ROW
    again = load_assessment_request(body["input"], max_points=20_001, max_conductors=64)
    assert to_plain(again) == body["input"]
    block = body["right_of_way"]
    assert (block["left_m"], block["right_m"]) == (ROW["left_m"], ROW["right_m"])
    assert [e["edge"] for e in block["edges"]] == ["left", "right"]
    assert [e["offset_m"] for e in block["edges"]] == [ROW["left_m"], ROW["right_m"]]


def test_without_right_of_way_there_is_no_block(client):
    body = client.post("/v1/evaluate", json=small_body()).get_json()
    assert "right_of_way" not in body and "right_of_way" not in body["input"]


def test_verify_matches_for_a_record_with_right_of_way(client):
    created = client.post("/v1/assessments", json=with_row())
    verdict = client.post(created.headers["Location"] + "/verify").get_json()
    assert verdict["verdict"] == "match", verdict


# --------------------------------------------------------------------------- values at the edges


def test_edge_values_equal_the_engine_at_exactly_those_offsets(client):
    body = with_row()
    report = client.post("/v1/evaluate", json=body).get_json()
    request = load_assessment_request(body, max_points=20_001, max_conductors=64)
    direct = evaluate_cross_section(request.cross_section, np.array([ROW["left_m"], ROW["right_m"]]), 1.0, 50.0)
    block = report["right_of_way"]
    assert block["height_m"] == 1.0 and block["height_basis"] == "profile"
    for k, edge in enumerate(block["edges"]):
        assert edge["height_m"] == 1.0
        assert edge["e_kv_m"] == pytest.approx(direct.e_rms_v_per_m[k] / 1e3, rel=1e-12)
        assert edge["b_ut"] == pytest.approx(direct.b_rms_t[k] * 1e6, rel=1e-12)
    # The edges are not profile points, so these values cannot have been read off the profile.
    assert all(p["offset_m"] not in (ROW["left_m"], ROW["right_m"]) for p in report["points"])


def test_edge_exposure_index_is_edge_value_over_limit(client):
    body = with_row(custom_limits=[{"id": "plan", "quantity": "B", "value": 0.4, "unit": "µT"}])
    report = client.post("/v1/evaluate", json=body).get_json()
    limits = {(c["level_id"], c["quantity"]): c.get("limit_kv_m", c.get("limit_ut")) for c in report["compliance"]}
    for edge in report["right_of_way"]["edges"]:
        assert {(x["level_id"], x["quantity"]) for x in edge["exposure"]} == set(limits)
        for x in edge["exposure"]:
            value = edge["e_kv_m"] if x["quantity"] == "E" else edge["b_ut"]
            assert x["exposure_index"] == pytest.approx(value / limits[(x["level_id"], x["quantity"])], rel=1e-12)
            assert x["passes"] is (x["exposure_index"] <= 1.0)


def test_edge_b_matches_amperes_law_for_one_conductor(client):
    # Ampère's law for an infinite straight conductor: B = mu0 I / (2 pi r); mu0 from scipy.constants (CODATA).
    body = with_row()
    c = body["cross_section"]["circuits"][0]
    c.update(voltage_kv=0, current_a=1000, conductors=[{"phase": "L1", "offset_m": 0, "height_m": 10}])
    block = client.post("/v1/evaluate", json=body).get_json()["right_of_way"]
    for edge in block["edges"]:
        r = math.hypot(edge["offset_m"], 10.0 - 1.0)
        assert edge["b_ut"] == pytest.approx(scipy.constants.mu_0 * 1000 / (2 * math.pi * r) * 1e6, rel=1e-9)
        assert edge["e_kv_m"] == 0.0  # no voltage, no charge


@pytest.mark.parametrize("heights, expected, basis", [((1.5, 1.5), 1.5, "points"), ((1.0, 2.0), 1.0, "default"),
                                                       ((0.5, 2.0), 1.0, "default")])
def test_edge_height_for_explicit_points(client, heights, expected, basis):
    body = as_points(with_row(), [{"offset_m": 0.0, "height_m": h} for h in heights])
    block = client.post("/v1/evaluate", json=body).get_json()["right_of_way"]
    assert block["height_m"] == expected and block["height_basis"] == basis
    assert all(e["height_m"] == expected for e in block["edges"])
    request = load_assessment_request(body, max_points=20_001, max_conductors=64)
    direct = evaluate_cross_section(request.cross_section, [ROW["left_m"], ROW["right_m"]], expected, 50.0)
    assert [e["b_ut"] for e in block["edges"]] == pytest.approx(direct.b_rms_t * 1e6, rel=1e-12)


# --------------------------------------------------------------------------- bad input


@pytest.mark.parametrize("row, pointer", [
    pytest.param({"left_m": 10, "right_m": -10}, "/right_of_way/right_m", id="left-greater-than-right"),
    pytest.param({"left_m": 5, "right_m": 5}, "/right_of_way/right_m", id="left-equals-right"),
    pytest.param({"left_m": -30}, "/right_of_way/right_m", id="missing-right"),
    pytest.param({"right_m": 30}, "/right_of_way/left_m", id="missing-left"),
    pytest.param({"left_m": "-30", "right_m": 30}, "/right_of_way/left_m", id="string-for-number"),
    pytest.param({"left_m": -30, "right_m": True}, "/right_of_way/right_m", id="bool-for-number"),
    pytest.param({"left_m": -30, "right_m": 30, "width_m": 60}, "/right_of_way/width_m", id="unknown-member"),
])
@pytest.mark.parametrize("route", ["/v1/assessments", "/v1/evaluate"])
def test_bad_right_of_way_is_422_naming_the_field(app, client, route, row, pointer):
    response = client.post(route, json=small_body(right_of_way=row))
    assert response.status_code == 422 and response.mimetype == PROBLEM, response.get_data(as_text=True)
    assert pointer in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


@pytest.mark.parametrize("value", [[-30, 30], 30, "30 m"])
def test_right_of_way_of_wrong_type_is_422(app, client, value):
    response = client.post("/v1/assessments", json=small_body(right_of_way=value))
    assert response.status_code == 422 and response.mimetype == PROBLEM
    assert any(e["pointer"].startswith("/right_of_way") for e in response.get_json()["errors"])
    assert stored_count(app) == 0


@pytest.mark.parametrize("key, token", [("left_m", "NaN"), ("right_m", "Infinity"), ("left_m", "-Infinity")])
def test_non_finite_edge_is_422(app, client, key, token):
    check_non_finite_member(app, client, small_body(right_of_way={"left_m": -30, "right_m": 30}), key, token)


def check_non_finite_member(app, client, body: dict, key: str, token: str) -> None:
    """POST ``body`` with ``right_of_way[key]`` written as the bare JSON token (NaN, Infinity): 422, nothing stored."""
    body["right_of_way"][key] = "__TOKEN__"
    raw = json.dumps(body).replace('"__TOKEN__"', token)
    response = client.post("/v1/assessments", data=raw, content_type="application/json")
    assert response.status_code == 422 and response.mimetype == PROBLEM
    assert f"/right_of_way/{key}" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


def test_edge_inside_a_conductor_names_the_edge(app, client):
    body = as_points(small_body(right_of_way={"left_m": -30, "right_m": 4}),
                     [{"offset_m": 0, "height_m": 1}, {"offset_m": 20, "height_m": 12}])  # two heights -> edges at 1 m
    body["cross_section"]["circuits"][0]["conductors"][2]["height_m"] = 1.0  # L3 at (4, 1): the right edge point
    response = client.post("/v1/assessments", json=body)
    assert response.status_code == 422, response.get_data(as_text=True)
    assert "/right_of_way/right_m" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


# --------------------------------------------------------------------------- HTML plot and contract

# plots._profile_panel draws each edge as a vertical line with dash pattern (4, 1, 1, 1) at
# linewidth 0.9; matplotlib scales the pattern by the linewidth in the SVG stroke-dasharray.
EDGE_DASHES = "stroke-dasharray: 3.6,0.9,0.9,0.9;"


def _profile_svg(client, body: dict) -> str:
    created = client.post("/v1/assessments", json=body).get_json()
    page = client.get(f"/v1/assessments/{created['id']}/report?format=html").get_data(as_text=True)
    start = page.index('<figure id="plot-profile">')
    return page[start:page.index("</figure>", start)]


def test_profile_svg_marks_the_edges_only_when_given(client):
    with_edges, without = _profile_svg(client, with_row()), _profile_svg(client, small_body())
    assert with_edges.count(EDGE_DASHES) == 4  # two edges in each of the E and B panels
    assert EDGE_DASHES not in without
    assert len(re.findall(r"<svg\b", with_edges)) == 1


@pytest.fixture(scope="module")
def spec() -> dict:
    return yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))


def test_responses_with_right_of_way_match_the_document(client, spec):
    demo = json.loads(DEMO.read_text(encoding="utf-8"))
    assert "right_of_way" in demo  # the demo shows the edges
    created = client.post("/v1/assessments", json=demo)
    assert created.status_code == 201 and created.get_json()["right_of_way"]["edges"]
    check_response(spec, created)
    check_response(spec, client.get(created.headers["Location"]))
    check_response(spec, client.post("/v1/evaluate", json=as_points(with_row(), [{"offset_m": 0, "height_m": 1},
                                                                                 {"offset_m": 9, "height_m": 2}])))
    check_response(spec, client.post("/v1/evaluate", json=small_body(right_of_way={"left_m": 1, "right_m": 0})))


def test_right_of_way_schema_names_match_the_document(spec):
    doc = spec["components"]["schemas"]["RightOfWay"]
    fields = RightOfWaySchema().fields
    assert set(doc["properties"]) == set(fields)
    assert set(doc["required"]) == {k for k, f in fields.items() if f.required}
    assert "right_of_way" in spec["components"]["schemas"]["AssessmentRequest"]["properties"]


class EdgeTable(HTMLParser):
    """Rows of the page's right-of-way edge table (``table#right-of-way-edges``), cell texts stripped."""

    def __init__(self):
        super().__init__()
        self.inside, self.rows, self.cell = False, [], None

    def handle_starttag(self, tag, attrs):
        if tag == "table" and ("id", "right-of-way-edges") in attrs:
            self.inside = True
        elif self.inside and tag == "tr":
            self.rows.append([])
        elif self.inside and tag in ("td", "th"):
            self.cell = ""

    def handle_endtag(self, tag):
        if tag == "table":
            self.inside = False
        elif self.inside and tag in ("td", "th") and self.cell is not None:
            self.rows[-1].append(self.cell.strip())
            self.cell = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell += data


def test_html_report_tabulates_the_edge_values(client):
    # The printed page must carry the edge values themselves, not only the plot lines:
    # the numbers in the table are the JSON report's (4 significant digits, as in the page).
    from service.reports import format_number

    created = client.post("/v1/assessments", json=with_row()).get_json()
    page = client.get(f"/v1/assessments/{created['id']}/report?format=html").get_data(as_text=True)

    parser = EdgeTable()
    parser.feed(page)
    header, *rows = parser.rows
    assert header[:5] == ["Edge", "Offset (m)", "Height (m)", "E (kV/m)", "B (µT)"]
    edges = created["right_of_way"]["edges"]
    assert [r[0] for r in rows] == ["left", "right"]
    for row, edge in zip(rows, edges):
        assert float(row[1]) == pytest.approx(edge["offset_m"], abs=0.05)
        assert row[3] == format_number(edge["e_kv_m"]) and row[4] == format_number(edge["b_ut"])
        for x in edge["exposure"]:
            assert f"{x['level_id']} {x['quantity']}: {format_number(x['exposure_index'], 3)}" in row[5]


def test_html_report_has_no_edge_table_without_right_of_way(client):
    created = client.post("/v1/assessments", json=small_body()).get_json()
    page = client.get(f"/v1/assessments/{created['id']}/report?format=html").get_data(as_text=True)
    assert 'id="right-of-way-edges"' not in page
