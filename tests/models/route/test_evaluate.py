"""Route orchestrator (models.route.evaluate.evaluate_route).

Independent references:
* the 2-D cross-section engine (models.cross_section.evaluate_cross_section): the
  2-D model is exact for infinitely long straight parallel conductors, so at
  mid-span of a long, straight, level span with (almost) no sag the 3-D fields must
  agree with it (common practice; the issue's check list);
* models.compliance.compliance_distances of a dense 2-D lateral profile for the
  exposure zone half-width;
* pyproj (Transformer, Geod.geometry_area_perimeter on the WGS 84 ellipsoid) for the
  lon/lat twin of a projected request and for zone areas.
"""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Geod, Transformer
from shapely.geometry import LineString, shape

from models.catalogue import custom_threshold
from models.compliance import compliance_distances
from models.cross_section import evaluate_cross_section
from models.errors import EngineInputError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
from models.route.evaluate import evaluate_route
from models.route.sets import (
    CustomZoneLimit,
    EvaluationSets,
    GridSet,
    LateralProfileSet,
    PathSet,
    Receptor,
    ZoneSet,
)
from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support

F_HZ = 50.0
PHASES = (("L1", -8.0, 14.0), ("L2", 0.0, 14.0), ("L3", 8.0, 14.0))
BUNDLE = Bundle(0.03, 2, 0.4)
# Nearly straight conductors (1 cm sag over km-long spans): the 2-D limit.
TINY_SAG_M = 0.01


def _straight_route(length_m: float, x0: float = 1000.0, y0: float = 2000.0) -> Route:
    circuit = RouteCircuit("c1", "overhead", 220.0, 600.0,
                           tuple(RouteConductor(p, o, h, TINY_SAG_M) for p, o, h in PHASES), BUNDLE)
    return Route((Support("A", x0, y0), Support("B", x0, y0 + length_m)), (circuit,),
                 (RouteEarthWire(0.0, 22.0, 0.012, TINY_SAG_M),))


def _section() -> CrossSection:
    """The 2-D section at mid-span: attachment heights less the mid-span sag."""
    circuit = Circuit("c1", "overhead", 220.0, 600.0,
                      tuple(Conductor(p, o, h - TINY_SAG_M) for p, o, h in PHASES), BUNDLE)
    return CrossSection((circuit,), (EarthWire(0.0, 22.0 - TINY_SAG_M, 0.012),))


def test_lateral_profile_at_mid_span_of_long_straight_span_matches_2d():
    length = 2000.0
    res = evaluate_route(_straight_route(length), F_HZ,
                         EvaluationSets(lateral_profile=LateralProfileSet(length / 2, -40.0, 40.0, 5.0, 1.0)))
    prof = res.sets["lateral_profile"]
    # heading north: right (+offset) is east (+x)
    np.testing.assert_allclose(prof.x - 1000.0, prof.offset_m, atol=1e-9)
    ref = evaluate_cross_section(_section(), prof.offset_m, 1.0, F_HZ)
    # 2-D model = infinitely long conductors; residual from the finite span ~ (d / (L/2))^2
    np.testing.assert_allclose(prof.field.b_rms_t, ref.b_rms_t, rtol=1e-3)
    # E: uniform charges on 10 m segments, matching on the surface: per-mille level
    np.testing.assert_allclose(prof.field.e_rms_v_per_m, ref.e_rms_v_per_m, rtol=5e-3)
    # vertical B and E components: (x, y, z) in 3-D vs (horizontal, vertical) in 2-D
    np.testing.assert_allclose(np.abs(prof.field.b_phasor_t[:, 2]), np.abs(ref.b_phasor_t[:, 1]), rtol=2e-3, atol=1e-10)
    assert res.combined.points_m.shape == (17, 3)


def test_zone_half_width_matches_2d_compliance_distance():
    length = 2000.0
    route = _straight_route(length)
    res_m = 2.0
    ymid = 2000.0 + length / 2
    grid = GridSet((1000.0 - 90.0, ymid - 30.0, 1000.0 + 90.0, ymid + 30.0), res_m, 1.0)
    zones = ZoneSet((CustomZoneLimit("policy-0.4", 0.4, "µT"), CustomZoneLimit("policy-1", 1.0, "µT")))
    res = evaluate_route(route, F_HZ, EvaluationSets(grid=grid, zones=zones))
    offsets = np.arange(-90.0, 90.0 + 1e-9, 0.05)
    ref = evaluate_cross_section(_section(), offsets, 1.0, F_HZ)
    feats = res.zones["features"]
    assert [f["id"] for f in feats] == ["policy-0.4/B", "policy-1/B"]
    for limit_ut, feat in zip((0.4, 1.0), feats):
        left_ref, right_ref, _ = compliance_distances(offsets, ref.b_rms_t, limit_ut * 1e-6)
        p = feat["properties"]
        assert 15.0 < right_ref < 85.0
        # symmetric (balanced flat line, centred earth wire)
        assert p["width_left_m"] == pytest.approx(p["width_right_m"], abs=0.05)
        assert abs(p["width_right_m"] - right_ref) < res_m
        assert abs(p["width_left_m"] - left_ref) < res_m
        (span,) = p["spans"]
        assert abs(span["width_right_m"] - right_ref) < res_m and abs(span["width_left_m"] - left_ref) < res_m
        assert shape(feat["geometry"]).is_valid


def _angle_route() -> Route:
    """Invented 3-span line with one angle support, two circuits and an earth wire (local metres)."""
    supports = (Support("T1", 0.0, 0.0, 2.0), Support("T2", 320.0, 0.0, 1.0),
                Support("T3", 600.0, 150.0, 0.0), Support("T4", 880.0, 300.0, 3.0))
    left = RouteCircuit("west", "overhead", 132.0, 450.0,
                        (RouteConductor("L1", -6.0, 24.0, 6.0), RouteConductor("L2", -6.5, 19.0, 6.0),
                         RouteConductor("L3", -6.0, 14.0, 6.0)), Bundle(0.025))
    right = RouteCircuit("east", "overhead", 132.0, 450.0,
                         (RouteConductor("L3", 6.0, 24.0, 6.0), RouteConductor("L2", 6.5, 19.0, 6.0),
                          RouteConductor("L1", 6.0, 14.0, 6.0)), Bundle(0.025))
    return Route(supports, (left, right), (RouteEarthWire(0.0, 29.0, 0.011, 4.0),))


def test_path_crossing_under_the_line():
    route = _angle_route()
    # A footpath crossing the first span at right angles at chainage 160 m
    path = PathSet(LineString([(160.0, -60.0), (160.0, 60.0)]), 2.5, 1.0)
    lat = LateralProfileSet(160.0, -60.0, 60.0, 2.5, 1.0)
    res = evaluate_route(route, F_HZ, EvaluationSets(path=path, lateral_profile=lat))
    p = res.sets["path"]
    assert p.distance_m[0] == 0.0 and p.distance_m[-1] == pytest.approx(120.0)
    np.testing.assert_allclose(np.diff(p.distance_m), 2.5)
    assert (p.x[0], p.y[0]) == pytest.approx((160.0, -60.0)) and (p.x[-1], p.y[-1]) == pytest.approx((160.0, 60.0))
    # The same points walked the other way by the lateral profile (right of an eastward span = south)
    lp = res.sets["lateral_profile"]
    np.testing.assert_allclose(p.field.b_rms_t, lp.field.b_rms_t[::-1], rtol=1e-12)
    # field largest near the line and falling off towards the path ends
    b = p.field.b_rms_t
    k = int(np.argmax(b))
    assert abs(p.y[k]) < 15.0 and b[0] < 0.2 * b[k] and b[-1] < 0.2 * b[k]
    assert np.all(np.isfinite(p.field.e_rms_v_per_m)) and np.all(p.field.e_rms_v_per_m > 0)
    assert res.locate(len(b)) == ("lateral_profile", 0)


@pytest.mark.slow
def test_projected_and_lon_lat_twins_agree():
    # The same invented line in UTM 32N metres and in lon/lat (converted with pyproj)
    east0, north0 = 531_250.0, 5_102_400.0
    r_m = _angle_route()
    to_ll = Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True)

    def shift(s: Support) -> Support:
        return Support(s.id, s.x + east0, s.y + north0, s.ground_elevation_m)

    r_utm = Route(tuple(shift(s) for s in r_m.supports), r_m.circuits, r_m.earth_wires)
    lon, lat = to_ll.transform([s.x for s in r_utm.supports], [s.y for s in r_utm.supports])
    r_ll = Route(tuple(Support(s.id, float(x), float(y), s.ground_elevation_m)
                       for s, x, y in zip(r_utm.supports, lon, lat)), r_m.circuits, r_m.earth_wires)

    rec_xy = [(east0 + 100.0, north0 + 25.0), (east0 + 450.0, north0 + 40.0), (east0 + 700.0, north0 + 260.0)]
    rec_ll = [to_ll.transform(x, y) for x, y in rec_xy]
    path_xy = [(east0 + 150.0, north0 - 50.0), (east0 + 170.0, north0 + 50.0)]
    path_ll = [to_ll.transform(x, y) for x, y in path_xy]
    bbox = (east0 - 100.0, north0 - 100.0, east0 + 980.0, north0 + 400.0)   # whole line
    bbox_ll_corners = to_ll.transform([bbox[0], bbox[2]], [bbox[1], bbox[3]])
    bbox_ll = (bbox_ll_corners[0][0], bbox_ll_corners[1][0], bbox_ll_corners[0][1], bbox_ll_corners[1][1])
    zones = ZoneSet((CustomZoneLimit("b04", 0.4, "µT"), CustomZoneLimit("b1", 1.0, "µT")))

    def sets(rec, path, box):
        return EvaluationSets(
            path=PathSet(LineString(path), 5.0, 1.0),
            receptors=tuple(Receptor(f"r{i}", f"house {12 + i}", x, y, 1.5) for i, (x, y) in enumerate(rec)),
            grid=GridSet(box, 5.0, 1.0), zones=zones)

    a = evaluate_route(r_utm, F_HZ, sets(rec_xy, path_xy, bbox), crs="EPSG:32632")
    b = evaluate_route(r_ll, F_HZ, sets(rec_ll, path_ll, bbox_ll), crs="EPSG:4326")
    assert a.frame.working_crs == "EPSG:32632" and b.frame.working_crs == "EPSG:32632" and b.frame.geographic
    # Same working geometry up to the pyproj round trip (~1e-9 m): same fields at receptors and path
    np.testing.assert_allclose(b.sets["receptors"].field.b_rms_t, a.sets["receptors"].field.b_rms_t, rtol=1e-6)
    np.testing.assert_allclose(b.sets["receptors"].field.e_rms_v_per_m, a.sets["receptors"].field.e_rms_v_per_m, rtol=1e-6)
    # the lon/lat path is straight in lon/lat (RFC 7946), the UTM one in UTM: sub-millimetre apart here
    np.testing.assert_allclose(b.sets["path"].field.b_rms_t, a.sets["path"].field.b_rms_t, rtol=2e-5)
    np.testing.assert_allclose(b.sets["path"].distance_m, a.sets["path"].distance_m, atol=1e-6)
    # positions reported in each request's own CRS
    assert b.sets["receptors"].x[0] == pytest.approx(rec_ll[0][0]) and a.sets["receptors"].x[0] == rec_xy[0][0]
    assert np.all(np.abs(b.sets["path"].x - 9.4) < 0.5) and np.all(np.abs(b.sets["path"].y - 46.06) < 0.5)
    # zones: lon/lat polygons; geodesic area (pyproj.Geod) equals the plane area to the UTM scale (<0.1 %)
    # (zones cut by the grid edge are not compared: the lon/lat box maps to a slightly rotated plane box)
    geod = Geod(ellps="WGS84")
    compared = 0
    for fa, fb in zip(a.zones["features"], b.zones["features"]):
        ga, gb = shape(fa["geometry"]), shape(fb["geometry"])
        assert ga.is_valid and gb.is_valid and not gb.is_empty
        coords = np.concatenate([np.asarray(p.exterior.coords) for p in gb.geoms])
        assert np.all(np.abs(coords[:, 0]) <= 180.0) and np.all(np.abs(coords[:, 1]) <= 90.0)
        if fa["properties"]["touches_grid_edge"] or fb["properties"]["touches_grid_edge"]:
            continue
        area_geod = abs(geod.geometry_area_perimeter(gb)[0])
        assert area_geod == pytest.approx(fa["properties"]["area_m2"], rel=1.5e-3)
        assert fb["properties"]["area_m2"] == pytest.approx(fa["properties"]["area_m2"], rel=1e-3)
        compared += 1
    assert compared >= 1


def test_lateral_profile_at_angle_support_and_zone_on_grid():
    route = _angle_route()
    res = evaluate_route(route, F_HZ, EvaluationSets(
        lateral_profile=LateralProfileSet(320.0, -30.0, 30.0, 30.0, 1.0),
        grid=GridSet((200.0, -100.0, 450.0, 150.0), 5.0, 1.0),
        zones=ZoneSet((CustomZoneLimit("b1", 1.0, "µT"),))))
    lp = res.sets["lateral_profile"]
    # At the angle support T2 the profile follows the span leaving it (towards T3)
    d = np.array([280.0, 150.0]) / np.hypot(280.0, 150.0)
    right = np.array([d[1], -d[0]])
    np.testing.assert_allclose(np.column_stack([lp.x, lp.y])[2], np.array([320.0, 0.0]) + 30.0 * right, atol=1e-9)
    (feat,) = res.zones["features"]
    spans = feat["properties"]["spans"]
    assert [s["from_support"] for s in spans] == ["T1", "T2", "T3"]
    g = res.sets["grid"]
    assert g.grid.shape == (51, 51) and g.field.b_rms_t.shape == (51 * 51,)
    assert any("angle support" in a for a in res.assumptions)


@pytest.mark.parametrize(
    ("sets", "kwargs", "field"),
    [
        pytest.param(EvaluationSets(), {}, "path", id="no-sets"),
        pytest.param(EvaluationSets(zones=ZoneSet((CustomZoneLimit("b", 1.0, "uT"),)),
                                    receptors=(Receptor("r", "house", 100.0, 50.0, 1.5),)), {}, "zones",
                     id="zones-without-grid"),
        pytest.param(EvaluationSets(grid=GridSet((0.0, -10.0, 10.0, 10.0), 1.0, 1.0),
                                    zones=ZoneSet(("no-such-level",))), {}, "zones.thresholds[0]",
                     id="unknown-level"),
        pytest.param(EvaluationSets(grid=GridSet((0.0, -10.0, 10.0, 10.0), 1.0, 1.0),
                                    zones=ZoneSet((CustomZoneLimit("b", 1.0, "uT"), CustomZoneLimit("b", 2.0, "uT")))),
                     {}, "zones.thresholds[1]", id="duplicate-threshold"),
        pytest.param(EvaluationSets(grid=GridSet((0.0, -10.0, 10.0, 10.0), 1.0, 1.0),
                                    zones=ZoneSet((CustomZoneLimit("b", 1.0, "furlong"),))),
                     {}, "zones.thresholds[0].unit", id="bad-unit"),
        pytest.param(EvaluationSets(receptors=(Receptor("a", "ok", 100.0, 50.0, 1.5),
                                               Receptor("b", "on the wire", 0.0, -6.0, 16.0))),
                     {}, "receptors.features[1]", id="receptor-inside-conductor"),
        pytest.param(EvaluationSets(grid=GridSet((0.0, -500.0, 500.0, 500.0), 0.5, 1.0)), {"max_points": 100_000},
                     "grid.resolution_m", id="grid-too-fine"),
        pytest.param(EvaluationSets(receptors=(Receptor("a", "x", 0.0, 0.0, 1.0),)), {"crs": "EPSG:99999"},
                     "route.crs", id="unknown-crs"),
    ],
)
def test_bad_input_names_the_field(sets, kwargs, field):
    with pytest.raises(EngineInputError) as err:
        evaluate_route(_angle_route(), F_HZ, sets, **kwargs)
    assert err.value.field == field


def test_geographic_path_out_of_range_named():
    to_ll = Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True)
    r = _angle_route()
    lon, lat = to_ll.transform([s.x + 500_000.0 for s in r.supports], [s.y + 5_000_000.0 for s in r.supports])
    r_ll = Route(tuple(Support(s.id, float(x), float(y)) for s, x, y in zip(r.supports, lon, lat)), r.circuits, r.earth_wires)
    bad = EvaluationSets(path=PathSet(LineString([(9.0, 45.1), (190.0, 45.1)]), 5.0, 1.0))
    with pytest.raises(EngineInputError) as err:
        evaluate_route(r_ll, F_HZ, bad, crs="EPSG:4326")
    assert err.value.field == "path.geometry"
