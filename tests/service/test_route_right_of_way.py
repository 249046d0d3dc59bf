"""Right-of-way edges of route assessments: request member, report, compliance basis, exports, contract.

Independent references:
* Ampère's law, B = mu0 I / (2 pi r) for a long straight conductor (mu0 from
  scipy.constants, CODATA), and the closed-form Biot–Savart field of a finite straight
  wire, B = mu0 I / (4 pi r) (sin a1 + sin a2) (any electromagnetism textbook);
* the 2-D cross-section engine (models.cross_section.evaluate_cross_section), exact for
  infinitely long straight conductors: at mid-route of a long straight route the edge
  values must agree with it at the same offsets, to the tolerance of the existing
  route/cross-section agreement test (tests/models/route/test_evaluate.py);
* pyproj (Transformer) for the lon/lat twin of a projected request;
* shapely/GEOS (offset_curve, distance) for the edge positions;
* RFC 9457 problems naming the field by JSON Pointer, nothing stored;
* openapi/openapi.yaml (check_response), the verify endpoint, the HTML page parsed.
"""

from __future__ import annotations

import copy
import csv
import io
import math

import numpy as np
import pytest
import scipy.constants
from pyproj import Transformer
from shapely.geometry import LineString, Point

from models.cross_section import evaluate_cross_section
from models.geometry import Bundle, Circuit, Conductor, CrossSection
from service import plots
from service.reports import format_number

from .test_api import small_body
from .test_openapi import check_response, spec  # noqa: F401 (fixture)
from .test_right_of_way import EdgeTable, check_non_finite_member
from .test_route_api import PROBLEM, small_route_body, stored_count

EDGE_LEVEL = "us-fl-62-814-230kv-row-edge"  # Florida edge-of-right-of-way row: 15 µT at 60 Hz
MU0 = scipy.constants.mu_0


def single_conductor_route(length_m: float, *, x0: float = 500.0, y0: float = 1000.0, current_a: float = 1000.0,
                           height_m: float = 10.0, **changes) -> dict:
    """A straight level route heading north with one conductor, no voltage, no sag (local metres)."""
    body = {
        "title": "Single conductor route", "reference": "ROW-1", "frequency_hz": 60,
        "route": {"supports": [{"id": "A", "x": x0, "y": y0}, {"id": "B", "x": x0, "y": y0 + length_m}],
                  "circuits": [{"id": "c1", "kind": "overhead", "voltage_kv": 0, "current_a": current_a,
                                "conductors": [{"phase": "L1", "offset_m": 0, "height_m": height_m, "sag_m": 0}],
                                "bundle": {"subconductor_diameter_m": 0.03}}]},
        "reference_levels": [EDGE_LEVEL, "icnirp-2010-public"],
    }
    body.update(changes)
    return body


def finite_wire_ut(r_m: float, half_length_m: float, current_a: float = 1000.0) -> float:
    """Biot–Savart for a straight wire of length 2 h seen from its perpendicular bisector at distance r [µT]."""
    return MU0 * current_a / (4 * math.pi * r_m) * 2 * half_length_m / math.hypot(half_length_m, r_m) * 1e6


def edge_rows(report: dict, edge: str) -> list[dict]:
    return report["results"]["right_of_way"][edge]


def at_chainage(rows: list[dict], chainage_m: float) -> dict:
    (row,) = [r for r in rows if abs(r["chainage_m"] - chainage_m) < 1e-6]
    return row


def levels(report: dict, level_id: str) -> dict[str, dict]:
    return {c["quantity"]: c for c in report["compliance"] if c["level_id"] == level_id}


# --------------------------------------------------------------------------- request, echo, positions


def test_defaults_are_filled_in_and_positions_are_on_the_edges(client, spec):
    body = small_route_body(right_of_way={"left_m": -25, "right_m": 20})
    response = client.post("/v1/evaluate", json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    check_response(spec, response)
    report = response.get_json()
    assert report["input"]["right_of_way"] == {"left_m": -25.0, "right_m": 20.0, "step_m": 5.0, "height_m": 1.0}
    xy = [(s["x"], s["y"]) for s in body["route"]["supports"]]
    centre = LineString(xy)
    block = report["right_of_way"]
    for edge, offset in (("left", -25.0), ("right", 20.0)):
        rows = edge_rows(report, edge)
        (info,) = [e for e in block["edges"] if e["edge"] == edge]
        # the mitred parallel of GEOS (shapely: + distance = left side)
        ref = centre.offset_curve(-offset, join_style="mitre", mitre_limit=10.0)
        np.testing.assert_allclose(info["geometry"]["coordinates"], np.asarray(ref.coords), atol=1e-9)
        line = LineString(info["geometry"]["coordinates"])
        assert info["n_points"] == len(rows) and info["length_m"] == pytest.approx(line.length, rel=1e-12)
        assert (rows[0]["x"], rows[0]["y"]) == pytest.approx(ref.coords[0], abs=1e-9)
        assert (rows[-1]["x"], rows[-1]["y"]) == pytest.approx(ref.coords[-1], abs=1e-9)
        d = [line.project(Point(r["x"], r["y"])) for r in rows]
        np.testing.assert_allclose(np.diff(d)[:-1], 5.0, atol=1e-9)
        for r in rows:
            assert r["edge"] == edge and r["offset_m"] == offset and r["height_m"] == 1.0
            assert line.distance(Point(r["x"], r["y"])) < 1e-9
            assert r["chainage_m"] == pytest.approx(centre.project(Point(r["x"], r["y"])), abs=1e-9)


def test_right_of_way_alone_is_an_evaluation_set_and_verifies(app, client, spec):
    body = small_route_body(right_of_way={"left_m": -30, "right_m": 30, "step_m": 40, "height_m": 1.5})
    for key in ("receptors", "lateral_profile"):
        del body[key]
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    check_response(spec, client.get(created.headers["Location"]))
    report = created.get_json()
    assert set(report["results"]) == {"right_of_way"}
    assert report["maxima"]["b"]["set"] == "right_of_way"
    verdict = client.post(created.headers["Location"] + "/verify").get_json()
    assert verdict["verdict"] == "match", verdict


# --------------------------------------------------------------------------- physics


def test_edge_b_of_one_long_conductor_follows_amperes_law(client):
    # 2 km straight conductor, 10 m high; at mid-route the finite length lowers B by
    # r^2 / (2 (L/2)^2) = 5e-4 at the edges (r = 31.3 m), inside the 1e-3 tolerance
    body = single_conductor_route(2000.0, right_of_way={"left_m": -30, "right_m": 30, "step_m": 100})
    report = client.post("/v1/evaluate", json=body).get_json()
    r = math.hypot(30.0, 10.0 - 1.0)
    for edge, x in (("left", 500.0 - 30.0), ("right", 500.0 + 30.0)):  # heading north: right = east
        row = at_chainage(edge_rows(report, edge), 1000.0)
        assert row["x"] == pytest.approx(x, abs=1e-9) and row["y"] == pytest.approx(2000.0, abs=1e-9)
        assert row["b_ut"] == pytest.approx(MU0 * 1000.0 / (2 * math.pi * r) * 1e6, rel=1e-3)
        assert row["e_kv_m"] == 0.0  # no voltage, no charge


def test_mid_route_edge_values_agree_with_the_2d_engine(client):
    # The three-phase line of tests/models/route/test_evaluate.py (nearly no sag, 2 km)
    phases = (("L1", -8.0, 14.0), ("L2", 0.0, 14.0), ("L3", 8.0, 14.0))
    sag = 0.01
    body = single_conductor_route(2000.0, right_of_way={"left_m": -25, "right_m": 31, "step_m": 100},
                                  frequency_hz=50, reference_levels=["icnirp-2010-public"])
    body["route"]["circuits"] = [{"id": "c1", "kind": "overhead", "voltage_kv": 220, "current_a": 600,
                                  "conductors": [{"phase": p, "offset_m": o, "height_m": h, "sag_m": sag}
                                                 for p, o, h in phases],
                                  "bundle": {"subconductor_diameter_m": 0.03, "count": 2, "spacing_m": 0.4}}]
    report = client.post("/v1/evaluate", json=body).get_json()
    section = CrossSection((Circuit("c1", "overhead", 220.0, 600.0,
                                    tuple(Conductor(p, o, h - sag) for p, o, h in phases), Bundle(0.03, 2, 0.4)),))
    ref = evaluate_cross_section(section, np.array([-25.0, 31.0]), 1.0, 50.0)
    for k, edge in enumerate(("left", "right")):
        row = at_chainage(edge_rows(report, edge), 1000.0)
        # tolerances of test_lateral_profile_at_mid_span_of_long_straight_span_matches_2d
        assert row["b_ut"] == pytest.approx(ref.b_rms_t[k] * 1e6, rel=1e-3)
        assert row["e_kv_m"] == pytest.approx(ref.e_rms_v_per_m[k] / 1e3, rel=5e-3)


# --------------------------------------------------------------------------- compliance basis


def _basis_body(**changes) -> dict:
    # 400 m line, lateral profile across mid-route: under the line at 1 m, B = 22.2 µT > 15 µT
    return single_conductor_route(400.0, lateral_profile={"chainage_m": 200, "from_m": -40, "to_m": 40,
                                                          "step_m": 2, "height_m": 1}, **changes)


def test_edge_level_passes_on_the_edges_and_fails_without_them(client, spec):
    with_row = client.post("/v1/evaluate", json=_basis_body(
        right_of_way={"left_m": -30, "right_m": 30, "step_m": 20}))
    without = client.post("/v1/evaluate", json=_basis_body())
    check_response(spec, with_row)
    check_response(spec, without)
    a, b = with_row.get_json(), without.get_json()
    under = finite_wire_ut(9.0, 200.0)
    assert under > 15.0 and a["maxima"]["b"]["value_ut"] == pytest.approx(under, rel=1e-6)

    edge = levels(a, EDGE_LEVEL)["B"]
    assert edge["applies_at"] == "right_of_way_edge" and edge["basis"] == "right_of_way_edges"
    assert "route" in edge["basis_note"] and "edge" in edge["basis_note"]
    # largest along the edges: at mid-route, by the finite-wire Biot–Savart closed form
    assert edge["max_ut"] == pytest.approx(finite_wire_ut(math.hypot(30.0, 9.0), 200.0), rel=1e-6)
    all_edge_b = [r["b_ut"] for e in ("left", "right") for r in edge_rows(a, e)]
    assert edge["max_ut"] == max(all_edge_b)
    loc = edge["max_location"]
    assert loc["set"] == "right_of_way" and loc["chainage_m"] == pytest.approx(200.0)
    assert edge_rows(a, loc["edge"])[loc["index"]]["b_ut"] == edge["max_ut"]
    assert edge["exposure_index"] == pytest.approx(edge["max_ut"] / 15.0, rel=1e-12) and edge["passes"] is True
    # compliance distances still from the lateral profile
    assert edge["distance_note"].startswith("from the lateral profile")

    conservative = levels(b, EDGE_LEVEL)["B"]
    assert conservative["basis"] == "all_points_conservative" and "right_of_way" in conservative["basis_note"]
    assert conservative["max_ut"] == pytest.approx(under, rel=1e-6) and conservative["passes"] is False
    assert b["outcome"] == "fail"

    # a level that applies everywhere: over every point, as before
    for report in (a, b):
        icnirp = levels(report, "icnirp-2010-public")["B"]
        assert icnirp["basis"] == "all_points" and icnirp["max_ut"] == report["maxima"]["b"]["value_ut"]


def test_levels_that_apply_everywhere_include_the_edge_points(client):
    # only a far receptor besides the edges: the all-points maximum is an edge sample
    body = single_conductor_route(400.0, right_of_way={"left_m": -10, "right_m": 12, "step_m": 20},
                                  receptors={"type": "FeatureCollection", "features": [
                                      {"type": "Feature", "geometry": {"type": "Point", "coordinates": [800.0, 1200.0]},
                                       "properties": {"id": "far", "height_m": 1.0}}]})
    report = client.post("/v1/evaluate", json=body).get_json()
    icnirp = levels(report, "icnirp-2010-public")["B"]
    assert icnirp["basis"] == "all_points" and icnirp["max_location"]["set"] == "right_of_way"
    assert icnirp["max_ut"] == max(r["b_ut"] for e in ("left", "right") for r in edge_rows(report, e))
    assert icnirp["max_ut"] > report["results"]["receptors"][0]["b_ut"]
    block = {e["edge"]: e for e in report["right_of_way"]["edges"]}
    assert block["left"]["b_ut"] > block["right"]["b_ut"]  # nearer edge, larger field
    for e in block.values():
        rows = edge_rows(report, e["edge"])
        assert e["b_ut"] == max(r["b_ut"] for r in rows) and rows[e["b_location"]["index"]]["b_ut"] == e["b_ut"]
        for x in e["exposure"]:
            value = e["b_ut"] if x["quantity"] == "B" else e["e_kv_m"]
            limit = levels(report, x["level_id"])[x["quantity"]]
            assert x["exposure_index"] == pytest.approx(value / limit.get("limit_ut", limit.get("limit_kv_m")),
                                                        rel=1e-12)


# --------------------------------------------------------------------------- lon/lat


@pytest.mark.slow
def test_lon_lat_request_gives_the_projected_values_in_lon_lat(client, spec):
    east0, north0 = 531_250.0, 5_102_400.0  # invented line in UTM 32N
    to_ll = Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True)
    to_utm = Transformer.from_crs("EPSG:4326", "EPSG:32632", always_xy=True)
    projected = small_route_body(right_of_way={"left_m": -20, "right_m": 25, "step_m": 30})
    for s in projected["route"]["supports"]:
        s["x"] += east0
        s["y"] += north0
    del projected["receptors"], projected["lateral_profile"]
    projected["route"]["crs"] = "EPSG:32632"
    lon_lat = copy.deepcopy(projected)
    lon_lat["route"]["crs"] = "EPSG:4326"
    for s in lon_lat["route"]["supports"]:
        s["x"], s["y"] = to_ll.transform(s["x"], s["y"])
    a = client.post("/v1/evaluate", json=projected)
    b = client.post("/v1/evaluate", json=lon_lat)
    check_response(spec, b)
    a, b = a.get_json(), b.get_json()
    assert b["crs"]["geographic"] and b["crs"]["working"] == "EPSG:32632"
    for edge in ("left", "right"):
        ra, rb = edge_rows(a, edge), edge_rows(b, edge)
        assert len(ra) == len(rb)
        np.testing.assert_allclose([r["b_ut"] for r in rb], [r["b_ut"] for r in ra], rtol=1e-6)
        np.testing.assert_allclose([r["e_kv_m"] for r in rb], [r["e_kv_m"] for r in ra], rtol=1e-6)
        np.testing.assert_allclose([r["chainage_m"] for r in rb], [r["chainage_m"] for r in ra], atol=1e-6)
        lon = np.array([r["x"] for r in rb])
        lat = np.array([r["y"] for r in rb])
        assert np.all(np.abs(lon - 9.4) < 0.5) and np.all(np.abs(lat - 46.06) < 0.5)  # degrees, not metres
        x, y = to_utm.transform(lon, lat)
        np.testing.assert_allclose(x, [r["x"] for r in ra], atol=1e-3)
        np.testing.assert_allclose(y, [r["y"] for r in ra], atol=1e-3)
    for ea, eb in zip(a["right_of_way"]["edges"], b["right_of_way"]["edges"]):
        x, y = to_utm.transform(*np.array(eb["geometry"]["coordinates"]).T)
        np.testing.assert_allclose(np.column_stack([x, y]), ea["geometry"]["coordinates"], atol=1e-3)
        assert eb["b_ut"] == pytest.approx(ea["b_ut"], rel=1e-6)


# --------------------------------------------------------------------------- bad input


@pytest.mark.parametrize("row, pointer", [
    pytest.param({"left_m": 10, "right_m": -10}, "/right_of_way/right_m", id="right-left-of-left"),
    pytest.param({"left_m": 5, "right_m": 5}, "/right_of_way/right_m", id="right-equals-left"),
    pytest.param({"left_m": -5, "right_m": 5, "step_m": 0}, "/right_of_way/step_m", id="zero-step"),
    pytest.param({"left_m": -5, "right_m": 5, "step_m": -2}, "/right_of_way/step_m", id="negative-step"),
    pytest.param({"left_m": -5, "right_m": 5, "height_m": -1}, "/right_of_way/height_m", id="negative-height"),
    pytest.param({"left_m": -5, "right_m": 5, "step_m": 0.001}, "/right_of_way/step_m", id="too-many-points"),
    pytest.param({"left_m": -5}, "/right_of_way/right_m", id="missing-right"),
    pytest.param({"left_m": -5, "right_m": 5, "width_m": 10}, "/right_of_way/width_m", id="unknown-member"),
    pytest.param({"left_m": -5, "right_m": "5"}, "/right_of_way/right_m", id="string-for-number"),
])
def test_bad_route_right_of_way_is_422_naming_the_field(app, client, row, pointer):
    response = client.post("/v1/assessments", json=small_route_body(right_of_way=row))
    assert response.status_code == 422 and response.mimetype == PROBLEM, response.get_data(as_text=True)
    assert pointer in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


@pytest.mark.parametrize("key, token", [("left_m", "NaN"), ("right_m", "Infinity"), ("step_m", "NaN"),
                                        ("height_m", "-Infinity")])
def test_non_finite_route_right_of_way_is_422(app, client, key, token):
    body = small_route_body(right_of_way={"left_m": -30, "right_m": 30, "step_m": 10, "height_m": 1})
    check_non_finite_member(app, client, body, key, token)


def test_too_many_points_with_a_lower_cap_names_the_step(client):
    from service import create_app

    small = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_ROUTE_POINTS": 100})
    try:
        body = small_route_body(right_of_way={"left_m": -30, "right_m": 30, "step_m": 5})  # ~2 x 80 points
        del body["receptors"], body["lateral_profile"]
        response = small.test_client().post("/v1/evaluate", json=body)
        assert response.status_code == 422
        assert "/right_of_way/step_m" in [e["pointer"] for e in response.get_json()["errors"]]
    finally:
        small.extensions["emf_storage"].engine.dispose()


def test_edge_inside_a_conductor_names_the_edge(app, client):
    body = single_conductor_route(300.0, height_m=1.0, right_of_way={"left_m": -20, "right_m": 0, "height_m": 1.0})
    response = client.post("/v1/assessments", json=body)
    assert response.status_code == 422, response.get_data(as_text=True)
    assert "/right_of_way/right_m" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


def test_edge_folding_back_at_an_angle_names_the_offset(app, client):
    # 18.4 deg left turn at B: 1500 m to the left, the mitre (1500 tan 9.2 deg = 243 m) overruns the 200 m span
    body = small_route_body(right_of_way={"left_m": -1500, "right_m": 20, "step_m": 50})
    response = client.post("/v1/assessments", json=body)
    assert response.status_code == 422, response.get_data(as_text=True)
    assert "/right_of_way/left_m" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


def test_cross_section_right_of_way_still_takes_only_the_offsets(app, client):
    # decision: step_m/height_m are route members; a cross-section edge is a point of the section
    response = client.post("/v1/assessments", json=small_body(right_of_way={"left_m": -30, "right_m": 30,
                                                                             "step_m": 5}))
    assert response.status_code == 422
    assert "/right_of_way/step_m" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


def test_schema_members_match_the_document(spec):
    from service.route_schemas import RouteAssessmentSchema, RouteRightOfWaySchema
    from service.schemas import RightOfWaySchema

    schemas = spec["components"]["schemas"]
    doc = schemas["RouteRightOfWay"]
    assert set(doc["properties"]) == set(RouteRightOfWaySchema().fields)
    assert set(doc["required"]) == {k for k, f in RouteRightOfWaySchema().fields.items() if f.required}
    assert set(schemas["RightOfWay"]["properties"]) == set(RightOfWaySchema().fields) == {"left_m", "right_m"}
    assert "right_of_way" in RouteAssessmentSchema().fields
    assert schemas["RouteAssessmentRequest"]["properties"]["right_of_way"] == {"$ref": "#/components/schemas/RouteRightOfWay"}


# --------------------------------------------------------------------------- exports and the page


def test_html_geojson_and_csv_carry_the_edges(client, spec):
    body = small_route_body(right_of_way={"left_m": -25, "right_m": 20, "step_m": 20}, frequency_hz=60,
                            reference_levels=[EDGE_LEVEL])
    created = client.post("/v1/assessments", json=body)
    report = created.get_json()
    base = created.headers["Location"]
    page = client.get(base + "/report?format=html").get_data(as_text=True)
    parser = EdgeTable()
    parser.feed(page)
    header, *rows = parser.rows
    assert header == ["Edge", "Offset (m)", "Height (m)", "E (kV/m)", "B (µT)", "Exposure index per threshold",
                      "Where the largest values are"]
    for row, edge in zip(rows, report["right_of_way"]["edges"]):
        assert row[0] == edge["edge"] and float(row[1]) == pytest.approx(edge["offset_m"], abs=0.05)
        assert row[3] == format_number(edge["e_kv_m"]) and row[4] == format_number(edge["b_ut"])
        assert f"B at chainage {edge['b_location']['chainage_m']:.1f} m" in row[6]
        for x in edge["exposure"]:
            assert f"{x['level_id']} {x['quantity']}: {format_number(x['exposure_index'], 3)}" in row[5]
    assert "value at the right-of-way edge (the level applies there)" in page

    geo = client.get(base + "/geojson")
    check_response(spec, geo)
    lines = [f for f in geo.get_json()["features"] if f["properties"]["kind"] == "right_of_way_edge"]
    assert [f["properties"]["edge"] for f in lines] == ["left", "right"]
    for f, edge in zip(lines, report["right_of_way"]["edges"]):
        assert f["geometry"] == edge["geometry"] and f["properties"]["b_ut"] == edge["b_ut"]
    points = [f for f in geo.get_json()["features"] if f["properties"]["kind"] == "right_of_way"]
    assert len(points) == sum(e["n_points"] for e in report["right_of_way"]["edges"])

    table = list(csv.DictReader(io.StringIO(client.get(base + "/report?format=csv").get_data(as_text=True))))
    edge_lines = [r for r in table if r["set"] == "right_of_way"]
    assert len(edge_lines) == len(points)
    first = edge_rows(report, "left")[0]
    assert edge_lines[0]["edge"] == "left" and float(edge_lines[0]["b_ut"]) == first["b_ut"]
    assert float(edge_lines[0]["chainage_m"]) == first["chainage_m"]


def test_plan_view_draws_both_edge_lines(client):
    report = client.post("/v1/evaluate", json=small_route_body(
        right_of_way={"left_m": -25, "right_m": 20, "step_m": 40})).get_json()
    edges = [e["geometry"]["coordinates"] for e in report["right_of_way"]["edges"]]
    fig = plots.route_plan_figure(report["input"]["route"]["supports"], edges=edges)
    (ax,) = fig.axes
    lines = [np.column_stack([ln.get_xdata(), ln.get_ydata()]) for ln in ax.get_lines()]
    for coords in edges:
        assert sum(ln.shape == np.shape(coords) and np.allclose(ln, coords) for ln in lines) == 1
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels.count("right-of-way edge") == 1
    # and the page's plan view is drawn with them (the report passes the block's geometry)
    without = plots.route_plan_figure(report["input"]["route"]["supports"])
    assert len(without.axes[0].get_lines()) == len(lines) - 2
