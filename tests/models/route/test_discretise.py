"""Adaptive discretisation of catenaries into straight segments.

Independent references, named at each check:
* the exact catenary (models.route.catenary is itself checked against handbook formulas)
  for the chord deviation;
* the Biot–Savart line integral along the exact catenary, by adaptive quadrature
  (scipy.integrate.quad), for the convergence of B as segments are refined;
* the 2-D cross-section engine (models.cross_section.evaluate_cross_section) for a
  long straight level span at mid-span;
* Deno & Zaffanella, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982 (from memory) (values derived from the formula) for the bundle equivalent radius.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import mu_0

from models.cross_section import evaluate_cross_section
from models.errors import GeometryError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, CurrentPhasor, EarthWire
from models.route.catenary import CatenarySpan
from models.route.discretise import discretise_route, segments_for_span
from models.route.alignment import strung_wires
from models.route.magnetic3d import flux_density_segments
from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support


def _route(sag=7.0, bundle=Bundle(0.0286, 2, 0.4), elevations=(0.0, 6.0, 2.0)):
    supports = (Support("A", 0.0, 0.0, elevations[0]), Support("B", 350.0, 0.0, elevations[1]),
                Support("C", 350.0 + 300.0 * math.cos(math.radians(30)), 300.0 * math.sin(math.radians(30)),
                        elevations[2]))
    c = RouteCircuit("c1", "overhead", 220.0, 800.0,
                     (RouteConductor("L1", -6.0, 22.0, sag), RouteConductor("L2", 0.0, 26.0, sag),
                      RouteConductor("L3", 6.0, 22.0, sag)), bundle)
    return Route(supports, (c,), (RouteEarthWire(0.0, 32.0, 0.011, sag * 0.8),))


def _wire_rows(segs, w):
    return np.flatnonzero(segs.wire_index == w)


def test_chord_deviation_below_tolerance():
    # Bundle centres and the earth wire (for_electric: one wire per bundle) against their exact
    # catenaries.  Subconductors are the centre polyline shifted by an offset linear along the
    # span (test_bundle_subconductors...), so their chord deviation is the centre's.
    route = _route()
    c_of = {w.path: [s.catenary_constant_m for s in w.spans] for w in strung_wires(route)}
    for tol in (0.1, 0.01, 0.002):
        segs = discretise_route(route, tolerance_m=tol, for_electric=True)
        worst = 0.0
        for w in range(len(segs.wire_radius_m)):
            rows = _wire_rows(segs, w)
            for span_i in np.unique(segs.span_index[rows]):
                r = rows[segs.span_index[rows] == span_i]
                a, b = segs.start_m[r[0]], segs.end_m[r[-1]]
                length = math.hypot(*(b[:2] - a[:2]))
                # the exact catenary through the same attachments with the wire's (bundle's) C
                span = CatenarySpan(length, b[2] - a[2], c_of[segs.wire_path[w]][span_i])
                t = np.linspace(0.0, 1.0, 41)
                s, e = segs.start_m[r], segs.end_m[r]
                pts = s[:, None, :] + t[None, :, None] * (e - s)[:, None, :]  # (segments, 41, 3)
                xs = np.hypot(pts[..., 0] - a[0], pts[..., 1] - a[1])
                exact = a[2] + span.height_m(xs)
                worst = max(worst, float(np.max(np.abs(pts[..., 2] - exact))))
        assert worst <= tol * (1 + 1e-9)
        assert worst > tol / 4  # not needlessly fine: n = ceil(L sqrt(z''/(8 tol)))


def test_polylines_are_continuous_and_end_at_the_attachments():
    route = _route()
    segs = discretise_route(route)
    wires = {w.path: w for w in strung_wires(route)}
    assert segs.start_m.shape == segs.end_m.shape == (len(segs.current_a), 3)
    for w in range(len(segs.wire_radius_m)):
        rows = _wire_rows(segs, w)
        assert np.all(np.diff(rows) == 1)
        np.testing.assert_array_equal(segs.end_m[rows[:-1]], segs.start_m[rows[1:]])
        assert np.all(np.diff(segs.span_index[rows]) >= 0)
    ew = wires["route.earth_wires[0]"]
    rows = _wire_rows(segs, len(segs.wire_radius_m) - 1)
    np.testing.assert_allclose(segs.start_m[rows[0]], ew.attachment_m[0])
    np.testing.assert_allclose(segs.end_m[rows[-1]], ew.attachment_m[-1])
    assert segs.wire_path[-1] == "route.earth_wires[0]"


def test_bundle_subconductors_in_the_plane_perpendicular_to_the_span():
    # 2-bundle, spacing 0.4 m, side by side horizontally (models.geometry.Bundle convention):
    # in the first span (along +x, right = -y) conductor L1 at offset -6 m gives subconductor
    # lines at y = 6 -+ 0.2 m, parallel to the span, at the same height.
    segs = discretise_route(_route())
    assert segs.wire_path[:2] == ("route.circuits[0].conductors[0]",) * 2
    for w, y in ((0, 5.8), (1, 6.2)):
        rows = _wire_rows(segs, w)
        rows = rows[segs.span_index[rows] == 0]
        np.testing.assert_allclose(segs.start_m[rows, 1], y, rtol=1e-12)
        np.testing.assert_allclose(segs.end_m[rows, 1], y, rtol=1e-12)
    r0, r1 = _wire_rows(segs, 0), _wire_rows(segs, 1)
    # spacers: every subconductor vertex sits at the bundle centre's vertex + the bundle offset
    centre = discretise_route(_route(), for_electric=True)
    rc = _wire_rows(centre, 0)
    assert len(r0) == len(r1) == len(rc)
    np.testing.assert_array_equal(segs.start_m[r0, 2], centre.start_m[rc, 2])
    np.testing.assert_array_equal(segs.start_m[r1, 2], centre.start_m[rc, 2])
    np.testing.assert_allclose((segs.start_m[r0] + segs.start_m[r1]) / 2, centre.start_m[rc], rtol=0, atol=1e-9)
    np.testing.assert_allclose(segs.wire_radius_m[:6], 0.0143)


def test_currents_and_voltages_follow_the_phase_labels():
    segs = discretise_route(_route())
    i_sub = segs.current_a[[_wire_rows(segs, w)[0] for w in range(7)]]
    # subconductors share the phase current equally (common practice), L1/L2/L3 at 0/-120/+120 deg
    expected = 400.0 * np.exp(1j * np.radians([0, 0, -120, -120, 120, 120]))
    np.testing.assert_allclose(i_sub[:6], expected, rtol=1e-14, atol=1e-9)
    assert i_sub[6] == 0  # earth wire without a given current
    np.testing.assert_allclose(segs.wire_voltage_v[:6], 220e3 / math.sqrt(3) * np.exp(
        1j * np.radians([0, 0, -120, -120, 120, 120])), rtol=1e-14)
    assert segs.wire_voltage_v[6] == 0 and not segs.wire_screened.any()


def test_for_electric_one_wire_per_bundle_with_equivalent_radius():
    # Deno & Zaffanella, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982 (from memory), derived: n = 2, r = 14.3 mm, s = 0.40 m -> r_eq = 75.63 mm
    segs = discretise_route(_route(), for_electric=True)
    assert len(segs.wire_radius_m) == 4
    assert segs.wire_radius_m[0] == pytest.approx(0.07563, abs=5e-6)
    assert segs.wire_radius_m[3] == pytest.approx(0.0055)
    wires = strung_wires(_route())
    rows = _wire_rows(segs, 1)
    np.testing.assert_allclose(segs.start_m[rows[0]], wires[1].attachment_m[0])  # bundle centre
    np.testing.assert_allclose(segs.current_a[rows[0]], 800.0 * np.exp(-2j * np.pi / 3))


def test_max_segment_and_straight_spans():
    route = _route(sag=0.0)
    segs = discretise_route(route)
    assert len(segs.current_a) == 2 * len(segs.wire_radius_m)  # straight: one segment per span
    segs = discretise_route(route, max_segment_m=25.0, for_electric=True)  # the limit applies to bundle centres
    lengths = np.hypot(*(segs.end_m[:, :2] - segs.start_m[:, :2]).T)
    assert lengths.max() <= 25.0 + 1e-9


@pytest.mark.parametrize("kw, field", [({"tolerance_m": 0.0}, "tolerance_m"), ({"tolerance_m": math.nan}, "tolerance_m"),
                                       ({"max_segment_m": -1.0}, "max_segment_m")])
def test_invalid_tolerance(kw, field):
    with pytest.raises(GeometryError) as info:
        discretise_route(_route(), **kw)
    assert info.value.field == field


def _catenary_b_quad(point, a, b, c, current):
    """Biot–Savart along the exact catenary from a to b (vertical plane), scipy.integrate.quad per component."""
    length = math.hypot(*(b[:2] - a[:2]))
    u = (b[:2] - a[:2]) / length
    span = CatenarySpan(length, b[2] - a[2], c)
    x_low = span.low_point_x_m

    def r_and_dl(x):
        pos = np.array([a[0] + x * u[0], a[1] + x * u[1], a[2] + float(span.height_m(x))])
        slope = math.sinh((x - x_low) / c)
        dl = np.array([u[0], u[1], slope])
        return pos, dl

    def comp(k):
        def f(x):
            pos, dl = r_and_dl(x)
            r = point - pos
            return np.cross(dl, r)[k] / np.linalg.norm(r) ** 3
        return integrate.quad(f, 0.0, length, epsabs=0.0, epsrel=1e-13, limit=200)[0]

    return mu_0 * current / (4 * math.pi) * np.array([comp(k) for k in range(3)])


def test_b_converges_as_h_squared_and_the_tolerance_bounds_the_error():
    # One sagging conductor, one 400 m span, 12 m sag; observers under and beside it.
    route = Route((Support("A", 0, 0), Support("B", 400, 0, 8.0)),
                  (RouteCircuit("c", "overhead", 0.0, 0.0, (RouteConductor("L1", 0.0, 25.0, 12.0,
                                                                           current=CurrentPhasor(1000.0, 0.0)),),
                                Bundle(0.03)),))
    wire = strung_wires(route)[0]
    a, b = wire.attachment_m
    c = wire.spans[0].catenary_constant_m
    pts = np.array([[200.0, 0.0, 1.0], [150.0, 8.0, 2.0], [300.0, -3.0, 10.0]])
    ref = np.array([_catenary_b_quad(p, a, b, c, 1000.0) for p in pts])
    errors = []
    ns = [16, 32, 64, 128]
    for n in ns:
        segs = discretise_route(route, tolerance_m=1e3, max_segment_m=400.0 / n)
        assert len(segs.current_a) == n
        bb = flux_density_segments(pts, segs).real
        errors.append(np.max(np.linalg.norm(bb - ref, axis=1) / np.linalg.norm(ref, axis=1)))
    ratios = np.array(errors[:-1]) / np.array(errors[1:])
    assert np.all((ratios > 3.6) & (ratios < 4.4)), (errors, ratios)  # O(h^2): halving h quarters the error
    # The stated bound: relative error < tolerance_m / d, d = distance to the conductor.
    for tol in (0.05, 0.01, 0.002):
        segs = discretise_route(route, tolerance_m=tol)
        bb = flux_density_segments(pts, segs).real
        verts = np.vstack([segs.start_m, segs.end_m[-1:]])
        d = np.min(np.linalg.norm(pts[:, None, :] - verts[None], axis=2), axis=1)
        err = np.linalg.norm(bb - ref, axis=1) / np.linalg.norm(ref, axis=1)
        assert np.all(err < tol / d), (tol, err, tol / d)


def test_long_straight_level_span_matches_the_cross_section_engine():
    # 2-D engine (models.cross_section) vs the 3-D route at mid-span of a 20 km level span
    # with sag -> 0.  Balanced circuit: the finite-length correction at 40 m is < 1e-5.
    phases = (("L1", -8.0, 20.0), ("L2", 0.0, 23.0), ("L3", 8.0, 20.0))
    bundle = Bundle(0.0286, 2, 0.4)
    section = CrossSection((Circuit("c", "overhead", 400.0, 1500.0,
                                    tuple(Conductor(p, o, h) for p, o, h in phases), bundle),),
                           (EarthWire(0.0, 30.0, 0.012, CurrentPhasor(60.0, 170.0)),))
    offsets = np.linspace(-40.0, 40.0, 81)
    b2 = evaluate_cross_section(section, offsets, 1.0, 50.0).b_phasor_t
    for sag in (0.0, 1e-3):
        route = Route((Support("A", 0.0, 0.0), Support("B", 20_000.0, 0.0)),
                      (RouteCircuit("c", "overhead", 400.0, 1500.0,
                                    tuple(RouteConductor(p, o, h, sag) for p, o, h in phases), bundle),),
                      (RouteEarthWire(0.0, 30.0, 0.012, sag, current=CurrentPhasor(60.0, 170.0)),))
        segs = discretise_route(route)
        # route along +x: offset to the right is -y; observers at 1 m above ground at mid-span
        pts = np.column_stack([np.full_like(offsets, 10_000.0), -offsets, np.ones_like(offsets)])
        b3 = flux_density_segments(pts, segs)
        # The 2-D engine's axes (offset, height, z = offset x height) put its currents flowing
        # backwards along the route, ours flow forwards: B_2d = -(B . right, B . up).
        horiz, vert = -(-b3[:, 1]), -b3[:, 2]
        scale = np.abs(b2).max()
        assert np.max(np.abs(horiz - b2[:, 0])) < 1e-4 * scale
        assert np.max(np.abs(vert - b2[:, 1])) < 1e-4 * scale
        assert np.max(np.abs(b3[:, 0])) < 1e-4 * scale  # no component along the line
        # and point by point, relative
        np.testing.assert_allclose(np.linalg.norm(np.column_stack([horiz, vert]), axis=1),
                                   np.linalg.norm(b2, axis=1), rtol=1e-4)


def test_segments_for_span():
    span = CatenarySpan(300.0, 0.0, 1000.0)
    n = segments_for_span(span, 0.01)
    h = 300.0 / n
    assert h**2 * span.curvature_bound_per_m() / 8 <= 0.01 < (300.0 / (n - 1)) ** 2 * span.curvature_bound_per_m() / 8
    assert segments_for_span(CatenarySpan(300.0, 4.0, math.inf), 0.01) == 1
    assert segments_for_span(CatenarySpan(300.0, 4.0, math.inf), 0.01, 40.0) == 8
