"""GIS round trip: GeoJSON, GeoPackage and GeoTIFF exports read back by GDAL (pyogrio, rasterio).

Independent references:
* RFC 7946 (GeoJSON, 2016): WGS 84 lon/lat (section 4), right-hand rule (3.1.6),
  checked with geojson-pydantic (a maintained GeoJSON model) and GDAL's GeoJSON driver;
* OGC GeoPackage 1.3 (OGC 12-128r18, 2021): read back with GDAL's GPKG driver (pyogrio),
  CRS compared with pyproj;
* GeoTIFF (OGC 19-008r4, 2019): read back with rasterio/GDAL, pixel centres through the
  file's own geotransform;
* the projected and lon/lat demo routes describe one invented line (the lon/lat one given
  to 8 decimals, about 1 mm), so their supports must coincide after transformation:
  geodesic distance with pyproj.Geod;
* shapely/GEOS for polygon validity, orientation and containment.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pyogrio
import pyogrio.raw
import pytest
import rasterio
import shapely
import yaml
from geojson_pydantic import FeatureCollection
from pyproj import CRS, Geod
from rasterio.io import MemoryFile
from shapely.geometry import Point, shape

from service import export_geopackage, export_geotiff, reports
from service.json_text import plain
from service.report import build_report
from service.route_schemas import load_route_request

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"


def demo_report(name: str) -> dict:
    body = json.loads((EXAMPLES / f"{name}.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 10.0  # coarser than the demo, for speed
    rep = plain(build_report(load_route_request(body, max_route_points=200_000, max_conductors=64)))
    return {"id": "00000000-0000-4000-8000-000000000007", "created_at": "2026-12-01T00:00:00.000000Z", **rep}


@pytest.fixture(scope="module")
def utm() -> dict:
    return demo_report("demo_route")


@pytest.fixture(scope="module")
def lonlat() -> dict:
    return demo_report("demo_route_lonlat")


@pytest.fixture(scope="module", params=["demo_route", "demo_route_lonlat"])
def any_route(request, utm, lonlat) -> dict:
    return utm if request.param == "demo_route" else lonlat


def gdal_read_geojson(collection: dict, tmp_path: Path):
    path = tmp_path / "export.geojson"
    path.write_text(json.dumps(collection), encoding="utf-8")
    return pyogrio.raw.read(path)


def test_geojson_validates_and_gdal_reads_it_in_lonlat(any_route, tmp_path):
    fc = reports.render_geojson(any_route)
    FeatureCollection.model_validate(fc)
    ids = [f["id"] for f in fc["features"]]
    assert len(ids) == len(set(ids)) and all(isinstance(i, str) and i for i in ids)
    meta, _, geometry, _ = gdal_read_geojson(fc, tmp_path)
    assert CRS.from_user_input(meta["crs"]).equals(CRS.from_epsg(4326), ignore_axis_order=True)
    xs, ys = shapely.get_coordinates(shapely.from_wkb(geometry)).T
    assert np.all(np.abs(xs) <= 180) and np.all(np.abs(ys) <= 90)
    for f in fc["features"]:
        if f["properties"]["kind"] == "receptor":
            assert f["properties"]["verdict"] in {"pass", "fail"} and f["id"] == f"receptor:{f['properties']['id']}"
        if f["properties"]["kind"] == "zone":
            props = f["properties"]
            assert {"threshold_id", "quantity", "value", "unit"} <= set(props) and props["value"] > 0


def test_utm_and_lonlat_demo_supports_coincide_to_1_mm(utm, lonlat, tmp_path):
    geod = Geod(ellps="WGS84")
    positions = []
    for rep in (utm, lonlat):
        fc = reports.render_geojson(rep)
        supports = [f for f in fc["features"] if f["properties"]["kind"] == "support"]
        positions.append({f["id"]: f["geometry"]["coordinates"] for f in supports})
    assert positions[0].keys() == positions[1].keys() and len(positions[0]) >= 2
    for fid, (lon_a, lat_a) in positions[0].items():
        lon_b, lat_b = positions[1][fid]
        _, _, distance_m = geod.inv(lon_a, lat_a, lon_b, lat_b)
        assert distance_m < 1e-3, (fid, distance_m)


def test_native_option_keeps_the_request_coordinates(utm):
    native = reports.render_geojson(utm, native=True)
    route = next(f for f in native["features"] if f["id"] == "route")
    assert route["geometry"]["coordinates"] == [[s["x"], s["y"]] for s in utm["input"]["route"]["supports"]]
    assert "EPSG:32632" in native["coordinate_reference"]


def zone_features(rep: dict) -> list[dict]:
    return [f for f in (rep.get("zones") or {}).get("features", ()) if f.get("geometry")]


def test_zones_are_valid_closed_ccw_and_bound_the_grid_exceedances(utm):
    """Zone polygons against the grid nodes, in the grid's plane (UTM request: same CRS)."""
    grid = utm["results"]["grid"]
    x, y = np.meshgrid(grid["x_m"], grid["y_m"])
    cell_m = grid["x_m"][1] - grid["x_m"][0]
    nodes = shapely.points(x.ravel(), y.ravel())
    zones = [f for f in reports.render_geojson(utm, native=True)["features"] if f["properties"]["kind"] == "zone"]
    assert zones
    for f in zones:
        geom = shape(f["geometry"])
        assert geom.is_valid
        for poly in getattr(geom, "geoms", [geom]):
            ring = list(poly.exterior.coords)
            assert ring[0] == ring[-1] and poly.exterior.is_ccw
        props = f["properties"]
        values = np.asarray(grid["e_kv_m"] if props["quantity"] == "E" else grid["b_ut"], dtype=float).ravel()
        limit = props["value"]
        inside = shapely.covers(shapely.buffer(geom, 1e-6), nodes)
        assert np.all(inside[values > limit * (1 + 1e-9)]), props["threshold_id"]
        below_inside = np.flatnonzero(inside & (values < limit))
        if below_inside.size:  # a node below the limit inside a zone is within one cell of its edge
            assert shapely.distance(geom.boundary, nodes[below_inside]).max() <= cell_m * (1 + 1e-9)


def test_geopackage_layers_crs_and_counts(any_route, tmp_path):
    path = tmp_path / "export.gpkg"
    path.write_bytes(export_geopackage.render_geopackage(any_route))
    layers = dict(pyogrio.list_layers(path))
    results = any_route["results"]
    expected = {
        "route": 1,
        "supports": len(any_route["input"]["route"]["supports"]),
        "right_of_way_edges": len(any_route["right_of_way"]["edges"]),
        "evaluated_points": sum(len(rows) for name, rows in reports.point_sets(any_route) if name != "receptors"),
        "receptors": len(results["receptors"]),
        "exposure_zones": len(zone_features(any_route)),
    }
    assert set(layers) == set(expected)
    request_crs = CRS.from_user_input(any_route["input"]["route"]["crs"])
    for layer, count in expected.items():
        info = pyogrio.read_info(path, layer=layer)
        assert info["features"] == count, layer
        assert CRS.from_user_input(info["crs"]).equals(request_crs, ignore_axis_order=True), layer
    meta, _, geometry, field_data = pyogrio.raw.read(path, layer="supports")
    xy = shapely.get_coordinates(shapely.from_wkb(geometry))
    supports = any_route["input"]["route"]["supports"]
    np.testing.assert_allclose(xy, [[s["x"], s["y"]] for s in supports], rtol=0, atol=1e-9)
    meta, _, _, field_data = pyogrio.raw.read(path, layer="receptors")
    columns = dict(zip(meta["fields"], field_data))
    np.testing.assert_allclose(columns["b_ut"], [r["b_ut"] for r in results["receptors"]], rtol=1e-12)
    assert set(columns["verdict"]) <= {"pass", "fail"}


def test_geotiff_values_and_geotransform_match_the_report(any_route):
    grid = any_route["results"]["grid"]
    with MemoryFile(export_geotiff.render_geotiff(any_route)) as memfile, memfile.open() as tif:
        assert tif.count == 2 and tif.descriptions == ("E resultant (kV/m)", "B resultant (µT)")
        assert CRS.from_user_input(tif.crs.to_wkt()).equals(CRS.from_user_input(grid["working_crs"]))
        assert tif.tags(2)["unit"] == "µT" and any(k.startswith("threshold_") for k in tif.tags(2))
        e, b = tif.read(1), tif.read(2)
        assert (tif.height, tif.width) == (grid["ny"], grid["nx"])
        for j in (0, grid["ny"] // 2, grid["ny"] - 1):
            for i in (0, grid["nx"] // 3, grid["nx"] - 1):
                row, col = tif.index(grid["x_m"][i], grid["y_m"][j])  # GDAL's transform, cell centre
                assert b[row, col] == grid["b_ut"][j][i] and e[row, col] == grid["e_kv_m"][j][i]
                cx, cy = tif.xy(row, col)  # the cell centre is the report's node
                assert cx == pytest.approx(grid["x_m"][i], abs=1e-6) and cy == pytest.approx(grid["y_m"][j], abs=1e-6)
        np.testing.assert_array_equal(b[::-1], np.asarray(grid["b_ut"]))


def test_geotiff_marks_missing_values_as_nodata(utm):
    rep = json.loads(json.dumps(utm))
    rep["results"]["grid"]["b_ut"][0][0] = None
    with MemoryFile(export_geotiff.render_geotiff(rep)) as memfile, memfile.open() as tif:
        masked = tif.read(2, masked=True)
        assert masked.mask[-1, 0] and masked.mask.sum() == 1


def test_exports_over_http(client):
    body = json.loads((EXAMPLES / "demo_route.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 20.0
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201
    base = f"/v1/assessments/{created.get_json()['id']}"
    gpkg = client.get(base + "/geopackage")
    assert gpkg.status_code == 200 and gpkg.mimetype == "application/geopackage+sqlite3"
    assert gpkg.data[:16] == b"SQLite format 3\x00"
    tif = client.get(base + "/geotiff")
    assert tif.status_code == 200 and tif.mimetype == "image/tiff"
    with rasterio.open(io.BytesIO(tif.data)) as src:
        assert src.crs.to_epsg() == 32632
    assert client.get(base + "/geojson?coordinates=native").get_json()["coordinate_reference"].startswith("EPSG:32632")
    page = client.get(base + "/report?format=html").get_data(as_text=True)
    assert f'href="{base}/geopackage"' in page and f'href="{base}/geotiff"' in page  # linked from the page
    bad = client.get(base + "/geojson?coordinates=utm")
    assert bad.status_code == 400 and bad.get_json()["errors"][0]["parameter"] == "coordinates"


def test_cross_section_has_no_geopackage_or_geotiff(client):
    from tests.service.test_openapi import SPEC_PATH, check_response

    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    body = json.loads((EXAMPLES / "demo_cross_section.json").read_text(encoding="utf-8"))
    created = client.post("/v1/assessments", json=body)
    base = f"/v1/assessments/{created.get_json()['id']}"
    for suffix in ("geopackage", "geotiff"):
        r = client.get(f"{base}/{suffix}")
        assert r.status_code == 404 and r.get_json()["type"] == "urn:emf-assess:problem:no-geometry"
        check_response(spec, r)  # the documented problem response


def test_binary_exports_are_documented_with_their_media_types():
    from tests.service.test_openapi import SPEC_PATH

    paths = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))["paths"]
    for suffix, mime in (("geopackage", export_geopackage.GEOPACKAGE_MIME), ("geotiff", export_geotiff.GEOTIFF_MIME)):
        content = paths[f"/v1/assessments/{{assessment_id}}/{suffix}"]["get"]["responses"]["200"]["content"]
        assert list(content) == [mime] and content[mime]["schema"] == {"type": "string", "format": "binary"}


def test_receptor_point_is_where_the_report_puts_it(utm):
    """Transformation of one receptor checked against pyproj directly (EPSG:32632 -> lon/lat)."""
    from pyproj import Transformer

    fc = reports.render_geojson(utm)
    r0 = utm["results"]["receptors"][0]
    lon, lat = Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True).transform(r0["x"], r0["y"])
    feature = next(f for f in fc["features"] if f["id"] == f"receptor:{r0['id']}")
    assert Point(feature["geometry"]["coordinates"]).distance(Point(lon, lat)) < 1e-9


def test_plan_view_equal_ground_scale_labels_above_hatching_and_zones_without_colour(lonlat):
    """Plan view of the lon/lat demo: one metre on the ground is as long east-west as north-south
    (pyproj.Geod gives the metres), support labels sit in opaque boxes above every zone patch,
    and each zone threshold has its own hatch pattern (distinguishable in black and white)."""
    from matplotlib.patches import PathPatch

    from service import plots

    supports = lonlat["input"]["route"]["supports"]
    zones = {"type": "FeatureCollection", "features": [
        {**f, "properties": {**f["properties"], "label": f"{f['properties']['quantity']} "
                                                          f"{f['properties']['threshold_id']}"}}
        for f in zone_features(lonlat)]}
    fig = plots.route_plan_figure(supports, zones=zones, geographic=True)
    fig.canvas.draw()
    ax = fig.axes[0]
    lon0 = float(np.mean([s["x"] for s in supports]))
    lat0 = float(np.mean([s["y"] for s in supports]))
    d = 1e-3
    geod = Geod(ellps="WGS84")
    east_m = geod.inv(lon0, lat0, lon0 + d, lat0)[2]
    north_m = geod.inv(lon0, lat0, lon0, lat0 + d)[2]
    origin, east, north = ax.transData.transform([(lon0, lat0), (lon0 + d, lat0), (lon0, lat0 + d)])
    px_per_m_east = np.hypot(*(east - origin)) / east_m
    px_per_m_north = np.hypot(*(north - origin)) / north_m
    assert px_per_m_east == pytest.approx(px_per_m_north, rel=0.01)
    zone_patches = [p for p in ax.patches if isinstance(p, PathPatch)]
    assert zone_patches
    labels = [t for t in ax.texts if t.get_text() in {s["id"] for s in supports}]
    assert len(labels) == len(supports)
    for text in labels:
        box = text.get_bbox_patch()
        assert box is not None and box.get_facecolor()[:3] == (1.0, 1.0, 1.0) and box.get_alpha() >= 0.9
        assert text.get_zorder() > max(p.get_zorder() for p in zone_patches)
    hatch_by_label = {}
    for p in zone_patches:
        if p.get_label() and not p.get_label().startswith("_"):
            hatch_by_label[p.get_label()] = p.get_hatch()
    drawn = {f["properties"]["label"] for f in zones["features"] if f["geometry"].get("coordinates")}
    assert len(hatch_by_label) == len(drawn) >= 2
    assert len(set(hatch_by_label.values())) == len(hatch_by_label)


def test_exports_are_the_same_bytes_for_the_same_record(utm, tmp_path):
    """Stored records never change, so neither do their exports (the ETag is the record digest):
    GDAL's clock in the GeoPackage (gpkg_contents.last_change) is replaced by the report's created_at."""
    import sqlite3
    import time
    from contextlib import closing

    first = export_geopackage.render_geopackage(utm), export_geotiff.render_geotiff(utm)
    time.sleep(1.1)
    assert (export_geopackage.render_geopackage(utm), export_geotiff.render_geotiff(utm)) == first
    path = tmp_path / "stamp.gpkg"
    path.write_bytes(first[0])
    with closing(sqlite3.connect(path)) as db:
        stamps = {row[0] for row in db.execute("SELECT last_change FROM gpkg_contents")}
    assert stamps == {"2026-12-01T00:00:00.000Z"}
