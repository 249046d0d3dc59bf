"""Route assessments through the HTTP API (POST /v1/assessments and /v1/evaluate with "route").

Independent references:
* RFC 7946 (GeoJSON): closed rings of >= 4 positions, exterior counter-clockwise and
  holes clockwise (shoelace formula written out here), lon/lat in range;
  shapely/GEOS validity of the returned zone geometry;
* pyproj.Geod: the geodesic length of the lon/lat footpath equals the last
  ``distance_m`` of the path results (the path is sampled in metres);
* the projected and lon/lat demo requests describe one invented line (converted
  with pyproj), so their receptor fields must agree;
* RFC 9457 problem details for bad input, naming the field by JSON Pointer, with
  nothing stored.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import shape

from service import storage
from service.route_schemas import load_route_request, route_request_to_plain

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"
PROBLEM = "application/problem+json"


def demo(name: str = "demo_route.json") -> dict:
    return json.loads((EXAMPLES / name).read_text(encoding="utf-8"))


def stored_count(app) -> int:
    with storage.storage_of(app).sessionmaker() as session:
        return storage.count_assessments(session)


def small_route_body(**changes) -> dict:
    """Two short spans, one circuit, two receptors and a lateral profile: quick to compute."""
    body = {
        "title": "Small test route", "reference": "R-1", "frequency_hz": 50,
        "route": {
            "supports": [{"id": "A", "x": 0.0, "y": 0.0}, {"id": "B", "x": 200.0, "y": 0.0},
                         {"id": "C", "x": 380.0, "y": 60.0}],
            "circuits": [{"id": "c1", "kind": "overhead", "voltage_kv": 132, "current_a": 500,
                          "conductors": [{"phase": "L1", "offset_m": -4, "height_m": 15, "sag_m": 3},
                                         {"phase": "L2", "offset_m": 0, "height_m": 15, "sag_m": 3},
                                         {"phase": "L3", "offset_m": 4, "height_m": 15, "sag_m": 3}],
                          "bundle": {"subconductor_diameter_m": 0.03}}],
            "earth_wires": [{"offset_m": 0, "height_m": 20, "diameter_m": 0.012, "sag_m": 2}],
        },
        "receptors": {"type": "FeatureCollection", "features": [
            {"type": "Feature", "geometry": {"type": "Point", "coordinates": [100.0, 30.0]},
             "properties": {"id": "h1", "name": "house 1", "height_m": 1.5, "parcel": "invented 7/2"}},
            {"type": "Feature", "geometry": {"type": "Point", "coordinates": [300.0, -25.0]},
             "properties": {"id": "h2", "name": "house 2", "height_m": 4.0}}]},
        "lateral_profile": {"chainage_m": 100.0, "from_m": -30, "to_m": 30, "step_m": 10, "height_m": 1},
        "reference_levels": ["icnirp-2010-public"],
    }
    body.update(changes)
    return body


def _shoelace(ring) -> float:
    xy = np.asarray(ring, dtype=float)
    return 0.5 * float(np.sum(xy[:-1, 0] * xy[1:, 1] - xy[1:, 0] * xy[:-1, 1]))


def _check_zones(zones: dict, *, lon_lat: bool) -> int:
    """RFC 7946 checks on the zones FeatureCollection; returns the number of non-empty zones."""
    assert zones["type"] == "FeatureCollection"
    non_empty = 0
    for feat in zones["features"]:
        assert feat["type"] == "Feature" and feat["geometry"]["type"] == "MultiPolygon"
        for polygon in feat["geometry"]["coordinates"]:
            for k, ring in enumerate(polygon):
                assert len(ring) >= 4 and ring[0] == ring[-1]
                assert (_shoelace(ring) > 0) == (k == 0)           # exterior CCW, holes CW
                if lon_lat:
                    arr = np.asarray(ring)
                    assert np.all(np.abs(arr[:, 0]) <= 180) and np.all(np.abs(arr[:, 1]) <= 90)
        geom = shape(feat["geometry"])
        assert geom.is_valid
        non_empty += not geom.is_empty
    return non_empty


# --------------------------------------------------------------------------- schema level


@pytest.mark.parametrize("name", ["demo_route.json", "demo_route_lonlat.json"])
def test_demo_loads_and_normalised_input_loads_again_equal(name):
    req = load_route_request(demo(name), max_route_points=200_000, max_conductors=64)
    assert len(req.route.supports) == 4 and len(req.route.circuits) == 2 and len(req.route.earth_wires) == 1
    assert len(req.evaluation.receptors) == 5 and req.evaluation.grid is not None
    again = load_route_request(route_request_to_plain(req), max_route_points=200_000, max_conductors=64)
    assert again == req


# --------------------------------------------------------------------------- HTTP: the done-when demo


@pytest.mark.slow
def test_demo_route_projected_and_lon_lat_through_the_api(app, client):
    reports = {}
    for name, lon_lat in (("demo_route.json", False), ("demo_route_lonlat.json", True)):
        body = demo(name)
        created = client.post("/v1/assessments", json=body)
        assert created.status_code == 201, created.get_data(as_text=True)
        report = created.get_json()
        assert report["kind"] == "route" and report["crs"]["working"] == "EPSG:32632"
        assert report["crs"]["geographic"] is lon_lat
        res = report["results"]
        # path: both ends included, distances in metres along the path
        path = res["path"]
        first, last = body["path"]["geometry"]["coordinates"][0], body["path"]["geometry"]["coordinates"][-1]
        assert path[0]["x"] == pytest.approx(first[0]) and path[-1]["y"] == pytest.approx(last[1])
        assert path[0]["distance_m"] == 0.0
        if lon_lat:
            coords = body["path"]["geometry"]["coordinates"]
            geod_len = sum(Geod(ellps="WGS84").inv(a[0], a[1], b[0], b[1])[2] for a, b in zip(coords, coords[1:]))
            # UTM point scale within 0.04 % (Snyder 1987): plane length ~ geodesic length
            assert path[-1]["distance_m"] == pytest.approx(geod_len, rel=5e-4)
        for row in path:
            assert row["e_kv_m"] >= 0 and row["b_ut"] > 0 and set(row["components"]) >= {"b_x_ut", "b_z_ut", "e_z_kv_m"}
        # the footpath crosses under the line: its largest B is well above its ends'
        b_path = [r["b_ut"] for r in path]
        assert max(b_path) > 5 * max(b_path[0], b_path[-1])
        # receptors: five, by id and name, with their heights
        rec = res["receptors"]
        assert [r["id"] for r in rec] == [f["properties"]["id"] for f in body["receptors"]["features"]]
        assert rec[0]["name"] == "house 12" and rec[1]["height_m"] == 4.0
        assert len(res["lateral_profile"]) == 121 and res["grid"]["nx"] * res["grid"]["ny"] > 10_000
        # zones: valid RFC 7946 geometry; the 0.4 µT and 1 µT zones exist and are nested
        assert _check_zones(report["zones"], lon_lat=lon_lat) >= 2
        z = {f["id"]: f for f in report["zones"]["features"]}
        z04, z1 = shape(z["policy-0.4ut/B"]["geometry"]), shape(z["policy-1ut/B"]["geometry"])
        assert z04.buffer(1e-9).contains(z1) and z04.area > z1.area
        assert z["policy-0.4ut/B"]["properties"]["limit_ut"] == pytest.approx(0.4)
        assert len(z["policy-0.4ut/B"]["properties"]["spans"]) == 3
        # maxima and compliance over all evaluated points
        assert report["maxima"]["b"]["set"] in res
        assert {c["level_id"] for c in report["compliance"]} == {"icnirp-2010-public", "policy-0.4ut-check"}
        assert report["outcome"] == "fail"      # the invented 0.4 µT check fails near the line
        fetched = client.get(created.headers["Location"])
        assert fetched.status_code == 200 and fetched.get_json() == report
        reports[lon_lat] = report
    # projected and lon/lat twins: same line, same receptor fields (the lon/lat file is rounded to
    # 1e-8 deg, about 1 mm: relative field differences ~ 2 mm / distance stay below 2e-4)
    for a, b in zip(reports[False]["results"]["receptors"], reports[True]["results"]["receptors"]):
        assert b["b_ut"] == pytest.approx(a["b_ut"], rel=2e-4) and b["e_kv_m"] == pytest.approx(a["e_kv_m"], rel=2e-4)
    # the demo's right-of-way edges: same largest values in both (edges 20 m from the centre line)
    for a, b in zip(reports[False]["right_of_way"]["edges"], reports[True]["right_of_way"]["edges"]):
        assert a["edge"] == b["edge"] and a["n_points"] == b["n_points"]
        assert b["b_ut"] == pytest.approx(a["b_ut"], rel=2e-4) and b["e_kv_m"] == pytest.approx(a["e_kv_m"], rel=2e-4)
    assert stored_count(app) == 2


def test_evaluate_route_stores_nothing(app, client):
    response = client.post("/v1/evaluate", json=small_route_body())
    assert response.status_code == 200, response.get_data(as_text=True)
    body = response.get_json()
    assert body["id"] is None and body["kind"] == "route"
    assert [r["name"] for r in body["results"]["receptors"]] == ["house 1", "house 2"]
    lp = body["results"]["lateral_profile"]
    assert [r["offset_m"] for r in lp] == [-30, -20, -10, 0, 10, 20, 30]
    # compliance distances come from the lateral profile
    assert all(c["distance_note"].startswith("from the lateral profile") for c in body["compliance"])
    assert body["zones"] is None
    assert stored_count(app) == 0


# --------------------------------------------------------------------------- HTTP: bad input


def _mutate(path: str, value):
    def apply(body: dict) -> None:
        parts = path.split(".")
        target = body
        for p in parts[:-1]:
            target = target[int(p)] if isinstance(target, list) else target[p]
        last = parts[-1]
        if isinstance(target, list):
            last = int(last)
        if value is ...:
            del target[last]
        else:
            target[last] = value
    return apply


PATH = {"geometry": {"type": "LineString", "coordinates": [[50.0, -40.0], [60.0, 40.0]]}, "step_m": 5.0,
        "height_m": 1.0}

BAD_ROUTE_BODIES = [
    pytest.param(_mutate("route.crs", "EPSG:99999"), "/route/crs", id="unknown-crs"),
    pytest.param(_mutate("route.crs", "EPSG:2229"), "/route/crs", id="crs-in-feet"),
    pytest.param(_mutate("path", {**PATH, "geometry": {"type": "LineString", "coordinates": [[50.0, -40.0]]}}),
                 "/path/geometry/coordinates", id="linestring-one-position"),
    pytest.param(_mutate("path", {**PATH, "geometry": {"type": "Point", "coordinates": [50.0, -40.0]}}),
                 "/path/geometry/type", id="path-not-a-linestring"),
    pytest.param(_mutate("route.supports.1.x", "__NaN__"), "/route/supports/1/x", id="nan-support"),
    pytest.param(_mutate("receptors.features.0.geometry.coordinates", [100.0, "__NaN__"]),
                 "/receptors/features/0/geometry/coordinates/1", id="nan-receptor"),
    pytest.param(_mutate("path", {**PATH, "geometry": {"type": "LineString",
                                                         "coordinates": [[50.0, -40.0], ["__Infinity__", 40.0]]}}),
                 "/path/geometry/coordinates/1/0", id="infinite-path-position"),
    pytest.param(_mutate("route.supports", [{"id": "A", "x": 0.0, "y": 0.0}]), "/route/supports", id="one-support"),
    pytest.param(_mutate("receptors.features.1.properties.id", "h1"), "/receptors/features/1/properties/id",
                 id="duplicate-receptor-id"),
    pytest.param(_mutate("receptors.features.0.properties.height_m", -1), "/receptors/features/0/properties/height_m",
                 id="receptor-below-ground"),
    pytest.param(_mutate("lateral_profile.chainage_m", 5000.0), "/lateral_profile/chainage_m",
                 id="chainage-beyond-route"),
    pytest.param(_mutate("zones", {"thresholds": [{"id": "p", "value": 0.4, "unit": "µT"}]}), "/zones",
                 id="zones-without-grid"),
    pytest.param(_mutate("grid", {"bbox": [0, -50, 400, 100], "resolution_m": 0.05, "height_m": 1}),
                 "/grid/resolution_m", id="grid-too-many-points"),
    pytest.param(_mutate("grid", {"bbox": [400, -50, 0, 100], "resolution_m": 5, "height_m": 1}), "/grid/bbox",
                 id="grid-bbox-inverted"),
    pytest.param(_mutate("cross_section", {"circuits": []}), "/route", id="both-route-and-cross-section"),
    pytest.param(_mutate("route", ...), "/cross_section", id="neither-route-nor-cross-section"),
    pytest.param(_mutate("profile", {"from_m": -10, "to_m": 10, "step_m": 1, "height_m": 1}), "/profile",
                 id="cross-section-profile-with-route"),
    pytest.param(_mutate("route.circuits.0.conductors.0.attachments", [{"offset_m": -4, "height_m": 15}]),
                 "/route/circuits/0/conductors/0/attachments", id="attachments-not-one-per-support"),
    pytest.param(_mutate("receptors.features.0", {"type": "Feature", "geometry": {"type": "Point", "coordinates": [0.0, -4.0]},
                                                  "properties": {"id": "on-wire", "height_m": 15.0}}),
                 "/receptors/features/0", id="receptor-inside-conductor"),
]


@pytest.mark.parametrize("route", ["/v1/assessments", "/v1/evaluate"])
@pytest.mark.parametrize("mutate, pointer", BAD_ROUTE_BODIES)
def test_bad_route_body_is_422_problem_naming_field_and_nothing_stored(app, client, route, mutate, pointer):
    body = small_route_body()
    mutate(body)
    raw = json.dumps(body).replace('"__NaN__"', "NaN").replace('"__Infinity__"', "Infinity")
    response = client.post(route, data=raw, content_type="application/json")
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    problem = response.get_json()
    assert problem["status"] == 422
    assert pointer in [e["pointer"] for e in problem["errors"]], problem
    assert stored_count(app) == 0


def test_lon_lat_out_of_range_named(app, client):
    body = small_route_body()
    body["route"]["crs"] = "EPSG:4326"
    body["route"]["supports"] = [{"id": "A", "x": 10.0, "y": 46.0}, {"id": "B", "x": 10.003, "y": 46.0},
                                 {"id": "C", "x": 10.006, "y": 46.001}]
    body["receptors"]["features"][0]["geometry"]["coordinates"] = [10.001, 46.0004]
    body["receptors"]["features"][1]["geometry"]["coordinates"] = [190.0, 46.0]
    response = client.post("/v1/evaluate", json=body)
    assert response.status_code == 422
    assert "/receptors/features/1/geometry/coordinates" in [e["pointer"] for e in response.get_json()["errors"]]
    body["route"]["supports"][2]["y"] = 91.0
    response = client.post("/v1/assessments", json=copy.deepcopy(body))
    assert response.status_code == 422
    assert "/route/supports/2/y" in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


# --------------------------------------------------------------------------- OpenAPI


def test_route_request_schemas_match_the_openapi_document():
    # Drift between openapi/openapi.yaml and the marshmallow route schemas (names and required sets)
    import yaml

    from service import route_schemas as rs

    from .test_openapi import SPEC_PATH, schema_validator

    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    pairs = {
        "RouteAssessmentRequest": rs.RouteAssessmentSchema, "Route": rs.RouteSchema, "RouteSupport": rs.SupportSchema,
        "RouteAttachment": rs.AttachmentSchema, "RouteConductor": rs.RouteConductorSchema,
        "RouteCircuit": rs.RouteCircuitSchema, "RouteEarthWire": rs.RouteEarthWireSchema, "PathSet": rs.PathSchema,
        "LateralProfileSet": rs.LateralProfileSchema, "GridSet": rs.GridSchema, "ZoneSet": rs.ZonesSchema,
    }
    for name, schema_cls in pairs.items():
        doc = spec["components"]["schemas"][name]
        fields = schema_cls().fields
        assert set(doc["properties"]) == set(fields), name
        assert set(doc.get("required", ())) == {k for k, f in fields.items() if f.required}, name
    for name in ("demo_route.json", "demo_route_lonlat.json"):
        schema_validator(spec, {"$ref": "#/components/schemas/RouteAssessmentRequest"}).validate(demo(name))


def test_route_responses_match_the_openapi_document(client):
    import yaml

    from .test_openapi import SPEC_PATH, check_response

    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    body = small_route_body()
    body["grid"] = {"bbox": [-20, -60, 420, 120], "resolution_m": 10, "height_m": 1}
    body["zones"] = {"thresholds": [{"id": "p04", "value": 0.4, "unit": "µT"}, "icnirp-2010-public"]}
    body["path"] = PATH
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201, created.get_data(as_text=True)
    check_response(spec, created)
    check_response(spec, client.get(created.headers["Location"]))
    check_response(spec, client.post("/v1/evaluate", json=body))
    bad = copy.deepcopy(body)
    bad["route"]["crs"] = "EPSG:99999"
    check_response(spec, client.post("/v1/evaluate", json=bad))


def test_soil_resistivity_adds_earth_return_to_route_b_only(client):
    # A balanced circuit over 100 ohm m soil: the earth-return images (models.route.earth_return3d,
    # tested against the 2-D Deri image) change B slightly; E is unaffected (perfect conductor for E).
    plain = client.post("/v1/evaluate", json=small_route_body()).get_json()
    response = client.post("/v1/evaluate", json=small_route_body(soil_resistivity_ohm_m=100.0))
    assert response.status_code == 200, response.get_data(as_text=True)
    soil = response.get_json()
    assert soil["input"]["soil_resistivity_ohm_m"] == 100.0
    for a, b in zip(plain["results"]["receptors"], soil["results"]["receptors"]):
        assert a["e_kv_m"] == b["e_kv_m"]
        assert 0 < abs(a["b_ut"] - b["b_ut"]) < 0.01 * a["b_ut"]
    assert any("Deri" in a and "100 ohm m" in a for a in soil["assumptions"])
    assert not any("Deri" in a for a in plain["assumptions"])


def test_route_point_cap_by_config():
    from service import create_app

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_ROUTE_POINTS": 10})
    client = app.test_client()
    body = small_route_body()                                   # 7 profile points + 2 receptors
    assert client.post("/v1/evaluate", json=body).status_code == 200
    body["path"] = PATH                                         # ~80 m every 5 m: 18 points > 10
    problem = client.post("/v1/assessments", json=body).get_json()
    assert problem["status"] == 422 and "/path/step_m" in [e["pointer"] for e in problem["errors"]]
    body["path"] = {**PATH, "geometry": {"type": "LineString", "coordinates": [[50.0, -40.0], [50.0, -30.0]]}}
    problem = client.post("/v1/assessments", json=body).get_json()   # 7 + 2 + 3 = 12 > 10 in all
    assert problem["status"] == 422 and "/lateral_profile" in [e["pointer"] for e in problem["errors"]]
    assert stored_count(app) == 0
