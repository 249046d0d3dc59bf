"""Exposure zones (models.route.zones).

Independent references:
* the 2-D cross-section engine (models.cross_section) and its compliance distances
  (models.compliance.compliance_distances on a dense lateral profile): for a long
  straight line the zone's half-width on each side must equal the compliance
  distance, within the grid resolution;
* RFC 7946 (GeoJSON) sec. 3.1.6: linear rings closed (first == last position), at
  least four positions, exterior rings counter-clockwise and holes clockwise
  (checked here with the shoelace formula written out, not with shapely), and
  sec. 4: longitude/latitude within range;
* shapely/GEOS validity (``shape(geometry).is_valid``) of the returned geometry;
* closed-form areas of a disc and an annulus.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import shape

from models.catalogue import custom_threshold
from models.compliance import compliance_distances
from models.cross_section import evaluate_cross_section
from models.geometry import Bundle, Circuit, Conductor, CrossSection
from models.route.crs import working_frame
from models.route.sets import grid_axes
from models.route.types import Route, Support
from models.route.zones import exceedance_polygons, zone_features

F_HZ = 50.0


def _shoelace(ring) -> float:
    """Signed area of a closed ring (positive = counter-clockwise)."""
    xy = np.asarray(ring, dtype=float)
    x, y = xy[:, 0], xy[:, 1]
    return 0.5 * float(np.sum(x[:-1] * y[1:] - x[1:] * y[:-1]))


def _check_rfc7946_multipolygon(geometry: dict, *, lon_lat: bool) -> None:
    assert geometry["type"] == "MultiPolygon"
    for polygon in geometry["coordinates"]:
        for k, ring in enumerate(polygon):
            assert len(ring) >= 4
            assert ring[0] == ring[-1]                       # closed
            area = _shoelace(ring)
            if k == 0:
                assert area > 0.0                            # exterior counter-clockwise
            else:
                assert area < 0.0                            # holes clockwise
            if lon_lat:
                arr = np.asarray(ring)
                assert np.all(np.abs(arr[:, 0]) <= 180.0) and np.all(np.abs(arr[:, 1]) <= 90.0)
    geom = shape(geometry)
    assert geom.is_valid and not geom.is_empty


def _flat_line() -> CrossSection:
    # A balanced 3-phase flat line, 8 m phase spacing, 12 m high, 600 A (invented).
    conductors = (Conductor("L1", -8.0, 12.0), Conductor("L2", 0.0, 12.0), Conductor("L3", 8.0, 12.0))
    return CrossSection((Circuit("c1", "overhead", 220.0, 600.0, conductors, Bundle(0.03)),))


def test_balanced_straight_line_zone_symmetric_and_matches_2d_compliance_distance():
    section = _flat_line()
    # Route heading north along x = 0: offsets to the right are +x (east).
    route = Route((Support("S1", 0.0, -150.0), Support("S2", 0.0, 150.0)), ())
    res_m = 2.0
    axes = grid_axes((-120.0, -200.0, 120.0, 200.0), res_m, 1.0)
    # 2-D field across the line, extruded along it (infinitely long straight line)
    row = evaluate_cross_section(section, axes.x_m, 1.0, F_HZ)
    b_grid = np.tile(row.b_rms_t, (len(axes.y_m), 1))
    e_grid = np.tile(row.e_rms_v_per_m, (len(axes.y_m), 1))
    thresholds = [custom_threshold("b-0.4", "B", 0.4, "µT", F_HZ), custom_threshold("b-1", "B", 1.0, "µT", F_HZ)]
    fc = zone_features(thresholds, axes, e_grid, b_grid, route_m=route, frame=working_frame(None, [0.0], [0.0]))
    assert fc["type"] == "FeatureCollection" and len(fc["features"]) == 2

    # Reference: compliance distances of a dense 2-D lateral profile (0.05 m step)
    offsets = np.arange(-120.0, 120.0 + 1e-9, 0.05)
    prof = evaluate_cross_section(section, offsets, 1.0, F_HZ)
    for th, feat in zip(thresholds, fc["features"]):
        left_ref, right_ref, _ = compliance_distances(offsets, prof.b_rms_t, th.limit_si)
        assert 20.0 < right_ref < 110.0                       # the zone is well inside the grid across
        p = feat["properties"]
        assert p["threshold_id"] == th.level_id and p["quantity"] == "B"
        assert p["touches_grid_edge"]                          # cut off at the grid's north/south edges
        # symmetric about the centre line
        assert p["width_left_m"] == pytest.approx(p["width_right_m"], abs=1e-6)
        # half-width = 2-D compliance distance within the grid resolution
        assert abs(p["width_right_m"] - right_ref) < res_m
        assert abs(p["width_left_m"] - left_ref) < res_m
        (span,) = p["spans"]
        assert span["from_support"] == "S1" and span["to_support"] == "S2" and span["chainage_m"] == 150.0
        assert abs(span["width_right_m"] - right_ref) < res_m
        assert abs(span["width_left_m"] - left_ref) < res_m
        _check_rfc7946_multipolygon(feat["geometry"], lon_lat=False)
    # the 1 µT zone lies inside the 0.4 µT zone
    z04, z1 = (shape(f["geometry"]) for f in fc["features"])
    assert z04.buffer(1e-6).contains(z1)


def test_disc_and_annulus_areas_and_hole_kept():
    axes = grid_axes((-40.0, -40.0, 40.0, 40.0), 0.5, 1.0)
    xx, yy = np.meshgrid(axes.x_m, axes.y_m)
    r = np.hypot(xx, yy)
    disc = exceedance_polygons(axes, 1.0 / (1.0 + r), 1.0 / 11.0)          # r < 10
    assert disc.is_valid and len(disc.geoms) == 1
    assert disc.area == pytest.approx(math.pi * 100.0, rel=2e-3)
    ring = exceedance_polygons(axes, np.exp(-((r - 20.0) / 4.0) ** 2), math.exp(-1.0))   # 16 < r < 24
    (poly,) = ring.geoms
    assert len(poly.interiors) == 1                                          # the hole is kept
    assert poly.area == pytest.approx(math.pi * (24.0**2 - 16.0**2), rel=3e-3)
    assert poly.exterior.is_ccw and not poly.interiors[0].is_ccw
    assert exceedance_polygons(axes, r, 1e9).is_empty


def test_zone_geojson_in_lon_lat_valid_with_hole():
    # A site in lon/lat: the grid lives in the local UTM plane, output goes back to lon/lat.
    lon0, lat0 = 10.321, 47.115
    frame = working_frame("EPSG:4326", [lon0], [lat0])
    x0, y0 = (float(v[0]) for v in frame.to_working([lon0], [lat0]))
    route = Route((Support("A", x0 - 60.0, y0), Support("B", x0 + 60.0, y0)), ())
    axes = grid_axes((x0 - 50.0, y0 - 50.0, x0 + 50.0, y0 + 50.0), 1.0, 1.0)
    xx, yy = np.meshgrid(axes.x_m - x0, axes.y_m - y0)
    r = np.hypot(xx, yy)
    b = 1e-6 * np.exp(-((r - 20.0) / 6.0) ** 2)            # annulus of > 0.4 µT: hole in the middle
    th = custom_threshold("ring", "B", 0.4, "µT", F_HZ)
    fc = zone_features([th], axes, np.zeros_like(b), b, route_m=route, frame=frame)
    (feat,) = fc["features"]
    _check_rfc7946_multipolygon(feat["geometry"], lon_lat=True)
    (polygon,) = feat["geometry"]["coordinates"]
    assert len(polygon) == 2                                # exterior + hole survive the transform
    assert not feat["properties"]["touches_grid_edge"]
    # centre of the hole back in lon/lat is the site
    hole = shape({"type": "Polygon", "coordinates": [polygon[1]]})
    assert hole.centroid.x == pytest.approx(lon0, abs=1e-6) and hole.centroid.y == pytest.approx(lat0, abs=1e-6)
    # widths measured from the east-west centre line through the site: symmetric, outer radius
    rad = 20.0 + 6.0 * math.sqrt(math.log(1.0 / 0.4))
    p = feat["properties"]
    assert p["width_left_m"] == pytest.approx(rad, abs=1.0) and p["width_right_m"] == pytest.approx(rad, abs=1.0)


def test_not_exceeded_gives_empty_multipolygon():
    axes = grid_axes((0.0, 0.0, 10.0, 10.0), 1.0, 1.0)
    route = Route((Support("A", 0.0, 5.0), Support("B", 10.0, 5.0)), ())
    zero = np.zeros(axes.shape)
    fc = zone_features([custom_threshold("b", "B", 1.0, "uT", F_HZ)], axes, zero, zero,
                       route_m=route, frame=working_frame(None, [0.0], [0.0]))
    feat = fc["features"][0]
    assert feat["geometry"] == {"type": "MultiPolygon", "coordinates": []}
    assert feat["properties"]["area_m2"] == 0.0
    assert feat["properties"]["width_left_m"] is None and feat["properties"]["width_right_m"] is None
    assert shape(feat["geometry"]).is_empty


def test_zone_edge_converges_with_grid_resolution_and_one_sided_zone():
    # A balanced circuit entirely right of the centre line (offsets +10..+18 m): the 1 µT zone's
    # right width converges to the 2-D compliance distance as the grid is refined (error
    # O(h^2) of linear interpolation); its left width is smaller than its right one.
    conductors = (Conductor("L1", 10.0, 12.0), Conductor("L2", 14.0, 12.0), Conductor("L3", 18.0, 12.0))
    section = CrossSection((Circuit("c1", "overhead", 132.0, 500.0, conductors, Bundle(0.03)),))
    route = Route((Support("S1", 0.0, -100.0), Support("S2", 0.0, 100.0)), ())
    offsets = np.arange(-80.0, 100.0 + 1e-9, 0.01)
    th = custom_threshold("b1", "B", 1.0, "µT", F_HZ)
    left_ref, right_ref, _ = compliance_distances(offsets, evaluate_cross_section(section, offsets, 1.0, F_HZ).b_rms_t,
                                                  th.limit_si)
    errors = []
    for res_m in (8.0, 4.0, 2.0):
        axes = grid_axes((-80.0, -20.0, 100.0, 20.0), res_m, 1.0)
        row = evaluate_cross_section(section, axes.x_m, 1.0, F_HZ).b_rms_t
        grid = np.tile(row, (len(axes.y_m), 1))
        (feat,) = zone_features([th], axes, grid, grid, route_m=route,
                                frame=working_frame(None, [0.0], [0.0]))["features"]
        span = feat["properties"]["spans"][0]
        errors.append(abs(span["width_right_m"] - right_ref))
        assert abs(span["width_left_m"] - left_ref) < res_m
        assert span["width_left_m"] < span["width_right_m"]
    assert errors[-1] < 0.1 and errors[-1] < errors[0]      # measured: 0.28, 0.19, 0.02 m
