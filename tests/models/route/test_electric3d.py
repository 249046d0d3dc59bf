"""Checks of the 3-D charge-simulation electric field (models/route/electric3d.py).

Each check names its independent reference:

* finite-segment potential and field formulas against numerical quadrature of
  the point-charge integrals (scipy.integrate.quad), and the kernel against an
  independent numpy evaluation of the textbook parallel/perpendicular components;
* a long straight line against the 2-D image solution (Maxwell potential
  coefficients, CIGRE TB 21 / EPRI Reference Book ch. 8, from memory; formulas as in
  image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)), single wire and 3-phase with earth wire;
* Gauss's law as a surface integral of eps0 E (enclosed charge, and zero);
* the boundary conditions themselves: V = wire voltage at the matching points,
  V = 0 on the ground plane (image method), E vertical at ground;
* curl E = 0 and E = -grad V by finite differences (electrostatics);
* convergence with segment count on a sagging span, mirror symmetry, linearity
  and superposition in V, far field of the balanced 3-phase line = 3-D dipole of
  the charges and their images (multipole expansion).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import epsilon_0

from models.errors import EngineInputError, GeometryError
from models.route import electric3d as e3
from models.route.types import SegmentSet

K = 1.0 / (4.0 * math.pi * epsilon_0)  # independent constant: scipy.constants (CODATA)
U_LL_V = 400e3
PHASES = np.exp(1j * np.deg2rad([0.0, -120.0, 120.0]))


def polyline_set(wires, voltages, radii, screened=None):
    """SegmentSet from a list of (k, 3) polylines, one per wire."""
    starts, ends, idx = [], [], []
    for w, pts in enumerate(wires):
        pts = np.asarray(pts, dtype=float)
        starts.append(pts[:-1])
        ends.append(pts[1:])
        idx.append(np.full(len(pts) - 1, w))
    start = np.concatenate(starts)
    nw = len(wires)
    return SegmentSet(
        start_m=start,
        end_m=np.concatenate(ends),
        current_a=np.zeros(len(start), complex),
        wire_index=np.concatenate(idx),
        wire_voltage_v=np.asarray(voltages, dtype=complex),
        wire_radius_m=np.asarray(radii, dtype=float),
        wire_screened=np.zeros(nw, bool) if screened is None else np.asarray(screened, bool),
    )


def straight_wires(lateral_m, height_m, length_m, seg_m):
    """Level straight wires along x from -length/2 to +length/2."""
    xs = np.arange(-length_m / 2, length_m / 2 + 1e-9, seg_m)
    return [np.column_stack([xs, np.full(len(xs), y), np.full(len(xs), z)]) for y, z in zip(lateral_m, height_m)]


def catenary_wire(span_m, h_support_m, sag_m, n_seg, lateral_m=0.0):
    """Level span from x=0 to span_m with catenary sag (z = h - sag + C (cosh((x - L/2)/C) - 1))."""
    c = brentq_catenary(span_m, sag_m)
    xs = np.linspace(0.0, span_m, n_seg + 1)
    z = h_support_m - sag_m + c * (np.cosh((xs - span_m / 2) / c) - 1.0)
    return np.column_stack([xs, np.full(n_seg + 1, lateral_m), z])


def brentq_catenary(span_m, sag_m):
    from scipy.optimize import brentq

    return brentq(lambda c: c * (math.cosh(span_m / (2 * c)) - 1) - sag_m, 1.0, 1e7)


def field_2d(q, ys, zs, obs_y, obs_z):
    """2-D image solution (image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)): E = sum q/(2 pi eps0) [(r-rk)/|r-rk|^2 - (r-rk')/|r-rk'|^2]."""
    ey = np.zeros(len(obs_y), complex)
    ez = np.zeros(len(obs_y), complex)
    for qk, yk, zk in zip(q, ys, zs):
        for sign, zz in ((1.0, zk), (-1.0, -zk)):
            dy = obs_y - yk
            dz = obs_z - zz
            r2 = dy * dy + dz * dz
            ey += sign * qk / (2 * math.pi * epsilon_0) * dy / r2
            ez += sign * qk / (2 * math.pi * epsilon_0) * dz / r2
    return ey, ez


def charges_2d(ys, zs, radii, volts):
    """2-D Maxwell potential coefficients P_ii = ln(2h/r)/(2 pi eps0), P_ij = ln(D'/d)/(2 pi eps0)."""
    n = len(ys)
    p = np.empty((n, n))
    for i in range(n):
        for j in range(n):
            if i == j:
                p[i, j] = math.log(2 * zs[i] / radii[i])
            else:
                d = math.hypot(ys[i] - ys[j], zs[i] - zs[j])
                dd = math.hypot(ys[i] - ys[j], zs[i] + zs[j])
                p[i, j] = math.log(dd / d)
    return np.linalg.solve(p / (2 * math.pi * epsilon_0), np.asarray(volts, complex))


# ------------------------------------------------------------------ formulas vs quadrature


def _seg_set(a, b, radius=0.01, volt=1.0):
    return polyline_set([np.array([a, b])], [volt], [radius])


@pytest.mark.parametrize(
    "point",
    [
        pytest.param((3.0, 2.0, 5.0), id="beside"),
        pytest.param((12.0, 0.3, 9.0), id="beyond-end"),
        pytest.param((-4.0, 0.0, 8.0), id="on-axis-extension"),
        pytest.param((5.0, 0.0, 8.01), id="wire-surface-mid"),
        pytest.param((0.2, -0.005, 7.991), id="near-end"),
        pytest.param((40.0, -30.0, 0.0), id="ground"),
    ],
)
def test_potential_coefficient_against_quadrature(point):
    # Reference: V(p) = k * integral over the segment of ds/|p - s| minus the same over its
    # image (point-charge potential, integrated numerically by scipy.integrate.quad).
    a = np.array([0.0, 0.0, 8.0])
    b = np.array([10.0, 0.0, 8.0 + 1.5])
    p = np.array(point)
    length = np.linalg.norm(b - a)
    u = (b - a) / length
    img = np.array([1.0, 1.0, -1.0])
    t0 = float(np.dot(p - a, u))
    brk = [min(max(t0, 0.0), length)]

    def integrand(s, mirror):
        pos = (a + s * u) * (img if mirror else 1.0)
        return 1.0 / np.linalg.norm(p - pos)

    real, _ = integrate.quad(integrand, 0.0, length, args=(False,), points=brk, limit=200, epsabs=0, epsrel=1e-13)
    image, _ = integrate.quad(integrand, 0.0, length, args=(True,), limit=200, epsabs=0, epsrel=1e-13)
    expected = K * (real - image)
    got = e3.potential_coefficients(p[None, :], _seg_set(a, b))[0, 0]
    assert got == pytest.approx(expected, rel=1e-10, abs=1e-13 * K)


@pytest.mark.parametrize(
    "point",
    [(3.0, 2.0, 5.0), (12.0, 0.3, 9.0), (-4.0, 0.0, 8.0), (5.0, 0.05, 8.8), (40.0, -30.0, 0.0), (5.0, 1.0, 0.0)],
)
def test_segment_field_against_quadrature(point):
    # Reference: E(p) = k q * integral of (p - s)/|p - s|^3 ds over the segment minus its image (quad).
    a = np.array([0.0, 0.0, 8.0])
    b = np.array([10.0, 0.0, 9.5])
    p = np.array(point)
    length = np.linalg.norm(b - a)
    u = (b - a) / length
    img = np.array([1.0, 1.0, -1.0])
    q = 1e-6 * (1.0 - 0.5j)
    brk = [min(max(float(np.dot(p - a, u)), 0.0), length)]
    expected = np.zeros(3)
    for c in range(3):
        for mirror, sign in ((False, 1.0), (True, -1.0)):
            def f(s):
                pos = (a + s * u) * (img if mirror else 1.0)
                d = p - pos
                return d[c] / np.linalg.norm(d) ** 3
            val, _ = integrate.quad(f, 0.0, length, points=brk, limit=200, epsabs=0, epsrel=1e-12)
            expected[c] += sign * val
    seg = _seg_set(a, b)
    got = e3.electric_field_segments(p[None, :], seg, charges=np.array([q]))[0]
    np.testing.assert_allclose(got, K * q * expected, rtol=1e-10, atol=1e-12 * np.abs(K * q * expected).max())


def _field_reference_numpy(points, segments, charges):
    """Independent closed form: E_par = k q (1/r2 - 1/r1), E_perp = k q (t/r1 + (L-t)/r2)/rho (textbook)."""
    out = np.zeros((len(points), 3), complex)
    for a0, b0, q in zip(segments.start_m, segments.end_m, charges):
        for a, b, sign in ((a0, b0, 1.0), (a0 * [1, 1, -1], b0 * [1, 1, -1], -1.0)):
            length = np.linalg.norm(b - a)
            u = (b - a) / length
            d1 = points - a
            t = d1 @ u
            rho_v = d1 - t[:, None] * u
            rho = np.linalg.norm(rho_v, axis=1)
            r1 = np.linalg.norm(points - a, axis=1)
            r2 = np.linalg.norm(points - b, axis=1)
            e_par = 1 / r2 - 1 / r1
            e_perp = (t / r1 + (length - t) / r2) / rho
            out += sign * K * q * (e_par[:, None] * u + (e_perp / rho)[:, None] * rho_v)
    return out


def test_kernel_against_independent_numpy_form_with_blocking():
    # A polyline longer than one segment block (256) and a point count that is not a multiple
    # of the point block (64) exercise the cache-blocked loops; the reference is the
    # parallel/perpendicular decomposition evaluated with plain numpy.
    rng = np.random.default_rng(5)
    wires = [catenary_wire(300.0, 20.0 + 3 * k, 6.0 + k, n, lateral_m=5.0 * k) for k, n in enumerate((97, 300, 41))]
    seg = polyline_set(wires, [1.0, 2.0, 0.0], [0.02, 0.01, 0.005])
    m = len(seg.wire_index)
    q = rng.normal(size=m) + 1j * rng.normal(size=m)
    pts = np.column_stack([rng.uniform(-50, 350, 333), rng.uniform(-40, 50, 333), rng.uniform(0, 40, 333)])
    pts = pts[np.min(np.abs(pts[:, None, 2] - np.array([14.0, 17.0, 20.0])), axis=1) > 1.0]  # keep off the wires
    ref = _field_reference_numpy(pts, seg, q)
    got = e3.electric_field_segments(pts, seg, charges=q)
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9 * np.abs(ref).max())
    # segments in any order (no shared vertices left): same field
    perm = rng.permutation(m)
    shuffled = SegmentSet(seg.start_m[perm], seg.end_m[perm], seg.current_a[perm], seg.wire_index[perm],
                          seg.wire_voltage_v, seg.wire_radius_m, seg.wire_screened)
    got2 = e3.electric_field_segments(pts, shuffled, charges=q[perm])
    np.testing.assert_allclose(got2, ref, rtol=1e-9, atol=1e-9 * np.abs(ref).max())


def test_matching_matrix_equals_mean_of_point_coefficients():
    # Two implementations: the optimised square-matrix kernel (shared vertex distances, one
    # log per entry) against the general point kernel averaged over the four matching points.
    rng = np.random.default_rng(8)
    wires = [catenary_wire(300.0, 20.0 + 3 * k, 6.0 + k, n, lateral_m=5.0 * k) for k, n in enumerate((30, 270, 9))]
    seg = polyline_set(wires, [1.0, 2.0, 0.0], [0.02, 0.01, 0.005])
    perm = np.concatenate([np.arange(30), 30 + rng.permutation(270), np.arange(300, 309)])
    seg = SegmentSet(seg.start_m[perm], seg.end_m[perm], seg.current_a, seg.wire_index[perm],
                     seg.wire_voltage_v, seg.wire_radius_m, seg.wire_screened)
    p = e3.matching_matrix(seg)
    mp = e3.matching_points(seg)
    ref = e3.potential_coefficients(mp.reshape(-1, 3), seg).reshape(len(mp), 4, -1).mean(axis=1)
    np.testing.assert_allclose(p, ref, rtol=1e-12, atol=1e-13 * np.abs(ref).max())
    # diagonal close to the 2-D self coefficient of a straight wire, 2 ln(L/r) order (positive, largest in row)
    assert (np.diag(p) >= p.max(axis=1) - 1e-9 * p.max()).all()


# ------------------------------------------------------------------ 2-D image solution


def test_single_long_wire_matches_2d_image_solution():
    # Reference: q = 2 pi eps0 V / ln(2h/r) and the 2-D image field (image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)).
    h, r, v = 12.0, 0.015, 230e3
    seg = polyline_set(straight_wires([0.0], [h], 4000.0, 10.0), [v], [r])
    q = e3.line_charges(seg)
    mid = np.abs(0.5 * (seg.start_m[:, 0] + seg.end_m[:, 0])) < 50.0
    q2d = 2 * math.pi * epsilon_0 * v / math.log(2 * h / r)
    np.testing.assert_allclose(q[mid].real, q2d, rtol=1e-4)
    np.testing.assert_allclose(q[mid].imag, 0.0, atol=1e-12 * q2d)
    obs_y = np.linspace(-40.0, 40.0, 33)
    for z in (0.0, 1.0, 2.0, 25.0):
        pts = np.column_stack([np.full(33, 3.0), obs_y, np.full(33, z)])
        e = e3.electric_field_segments(pts, seg, q)
        ey, ez = field_2d([q2d], [0.0], [h], obs_y, np.full(33, z))
        scale = np.abs(np.stack([ey, ez])).max()
        np.testing.assert_allclose(e[:, 1], ey, rtol=0, atol=1e-4 * scale)
        np.testing.assert_allclose(e[:, 2], ez, rtol=0, atol=1e-4 * scale)
        assert np.abs(e[:, 0]).max() < 1e-4 * scale  # no axial field at mid-line
    # surface gradient of a single wire over ground: V / (r ln(2h/r)) (2-D, to r/h)
    surf = e3.electric_field_segments(np.array([[0.0, 0.0, h - 2 * r]]), seg, q)
    assert abs(surf[0, 2]) * 2 * r == pytest.approx(v / math.log(2 * h / r), rel=2e-3)


def test_three_phase_line_with_earth_wire_matches_2d():
    # Reference: the 2-D potential-coefficient solution (image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)) for a flat 400 kV line
    # with one earth wire; 3-D line 6 km long with 20 m segments, fields at mid-span.
    ys = [-9.0, 0.0, 9.0, 0.0]
    zs = [15.0, 15.0, 15.0, 24.0]
    radii = [0.1317, 0.1317, 0.1317, 0.009]
    volts = list(U_LL_V / math.sqrt(3) * PHASES) + [0.0]
    seg = polyline_set(straight_wires(ys, zs, 6000.0, 20.0), volts, radii)
    q = e3.line_charges(seg)
    q2 = charges_2d(ys, zs, radii, volts)
    xm = 0.5 * (seg.start_m[:, 0] + seg.end_m[:, 0])
    for w in range(4):
        sel = (seg.wire_index == w) & (np.abs(xm) < 30)
        np.testing.assert_allclose(q[sel], q2[w], rtol=0, atol=1e-4 * np.abs(q2).max())
    obs_y = np.linspace(-60.0, 60.0, 41)
    pts = np.column_stack([np.full(41, 5.0), obs_y, np.full(41, 1.0)])
    e = e3.electric_field_segments(pts, seg, q)
    ey, ez = field_2d(q2, ys, zs, obs_y, np.full(41, 1.0))
    e_ref = np.sqrt(np.abs(ey) ** 2 + np.abs(ez) ** 2)
    e_got = np.sqrt((np.abs(e) ** 2).sum(axis=1))
    np.testing.assert_allclose(e_got, e_ref, rtol=0, atol=1e-4 * e_ref.max())
    # peak ground-level field of a 400 kV flat line is a few kV/m (common practice, order of magnitude)
    assert 2e3 < e_ref.max() < 15e3


def test_route_mid_span_matches_cross_section_engine():
    # Reference: the 2-D engine (models.cross_section.evaluate_cross_section) for the same
    # circuits, against a 6 km straight level line (20 spans of 300 m, sag 0) discretised by the
    # route helper with 20 m segments; single subconductors so that both model the same wires.
    from models.cross_section import evaluate_cross_section
    from models.geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
    from models.route.discretise import discretise_route
    from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support

    bundle = Bundle(0.0286)
    phases = (("L1", -9.0, 16.0), ("L2", 0.0, 16.0), ("L3", 9.0, 16.0))
    section = CrossSection(
        circuits=(Circuit("c1", "overhead", 400.0, 1000.0,
                          tuple(Conductor(ph, off, h) for ph, off, h in phases), bundle),),
        earth_wires=(EarthWire(0.0, 25.0, 0.0126),),
    )
    route = Route(
        supports=tuple(Support(f"s{i}", 300.0 * i, 0.0) for i in range(21)),
        circuits=(RouteCircuit("c1", "overhead", 400.0, 1000.0,
                               tuple(RouteConductor(ph, off, h, 0.0) for ph, off, h in phases), bundle),),
        earth_wires=(RouteEarthWire(0.0, 25.0, 0.0126, 0.0),),
    )
    seg = discretise_route(route, for_electric=True, max_segment_m=20.0)
    offsets = np.linspace(-50.0, 50.0, 21)
    ref = evaluate_cross_section(section, offsets, 1.0, 50.0).e_phasor_v_per_m
    # route along +x: offset to the right looking from s0 to s20 is -y; mid-span of span 10
    pts = np.column_stack([np.full(21, 3150.0), -offsets, np.full(21, 1.0)])
    e = e3.electric_field_segments(pts, seg)
    scale = np.abs(ref).max()
    np.testing.assert_allclose(e[:, 2], ref[:, 1], rtol=0, atol=1e-4 * scale)     # vertical
    np.testing.assert_allclose(e[:, 1], -ref[:, 0], rtol=0, atol=1e-4 * scale)    # across: y = -offset
    assert np.abs(e[:, 0]).max() < 1e-4 * scale
    e_rms = np.sqrt((np.abs(e) ** 2).sum(axis=1))
    ref_rms = np.sqrt((np.abs(ref) ** 2).sum(axis=1))
    np.testing.assert_allclose(e_rms, ref_rms, rtol=0, atol=1e-4 * scale)


# ------------------------------------------------------------------ Gauss's law


def _gauss_flux_cylinder(seg, q, y0, z0, radius, x0, x1, x_breaks, hole_m=0.0):
    """Flux of eps0 E out of a closed cylinder along x (axis at y0, z0) by Gauss-Legendre x trapezoid.

    The caps leave out a disc of radius ``hole_m`` where the wire pierces them (no field is
    defined inside the wire; at a segment's midpoint its axial field is nearly 0 there).
    """
    gx, gw = np.polynomial.legendre.leggauss(24)
    nth = 96
    th = 2 * math.pi * np.arange(nth) / nth
    flux = 0.0 + 0.0j
    # lateral surface, panels between x_breaks
    edges = np.concatenate([[x0], [b for b in x_breaks if x0 < b < x1], [x1]])
    for lo, hi in zip(edges[:-1], edges[1:]):
        xs = 0.5 * (hi - lo) * gx + 0.5 * (hi + lo)
        ws = 0.5 * (hi - lo) * gw
        X, T = np.meshgrid(xs, th, indexing="ij")
        pts = np.column_stack([X.ravel(), y0 + radius * np.cos(T).ravel(), z0 + radius * np.sin(T).ravel()])
        e = e3.electric_field_segments(pts, seg, q)
        en = e[:, 1] * np.cos(T).ravel() + e[:, 2] * np.sin(T).ravel()
        flux += np.sum(en.reshape(X.shape) * ws[:, None]) * radius * (2 * math.pi / nth)
    # end caps (normal -x at x0, +x at x1), polar Gauss-Legendre in rho
    rr = hole_m + 0.5 * (radius - hole_m) * (gx + 1)
    rw = 0.5 * (radius - hole_m) * gw
    R, T = np.meshgrid(rr, th, indexing="ij")
    for xc, sign in ((x0, -1.0), (x1, 1.0)):
        pts = np.column_stack([np.full(R.size, xc), y0 + (R * np.cos(T)).ravel(), z0 + (R * np.sin(T)).ravel()])
        e = e3.electric_field_segments(pts, seg, q)
        flux += sign * np.sum(e[:, 0].reshape(R.shape) * (rw * rr)[:, None]) * (2 * math.pi / nth)
    return epsilon_0 * flux


def test_gauss_law_cylinder_around_conductor_and_empty_cylinder():
    # Reference: Gauss's law, closed-surface integral of eps0 E = enclosed charge (0 if none).
    ys = [-8.0, 0.0, 8.0]
    zs = [14.0, 14.0, 14.0]
    seg = polyline_set(straight_wires(ys, zs, 600.0, 10.0), list(U_LL_V / math.sqrt(3) * PHASES), [0.02] * 3)
    q = e3.line_charges(seg)
    breaks = np.arange(-300.0, 301.0, 10.0)
    # cylinder around phase 2 from x = -15 to 25 (caps at segment midpoints)
    flux = _gauss_flux_cylinder(seg, q, 0.0, 14.0, 0.4, -15.0, 25.0, breaks, hole_m=0.0201)
    sel = seg.wire_index == 1
    a = seg.start_m[sel, 0]
    b = seg.end_m[sel, 0]
    overlap = np.clip(np.minimum(b, 25.0) - np.maximum(a, -15.0), 0.0, None)
    enclosed = np.sum(q[sel] * overlap)
    assert abs(flux - enclosed) < 1e-7 * abs(enclosed)
    # empty cylinder between phases 1 and 2
    flux0 = _gauss_flux_cylinder(seg, q, -4.0, 12.0, 1.0, -15.0, 25.0, breaks)
    assert abs(flux0) < 1e-8 * abs(enclosed)


# ------------------------------------------------------------------ boundary conditions, curl


@pytest.fixture(scope="module")
def sagging_two_circuit():
    """Two spans with sag, 3 phases + earth wire, an angle of 10 degrees at the middle support."""
    n = 40
    wires = []
    ang = math.radians(10.0)
    for lat, h, sag in ((-7.0, 20.0, 9.0), (0.0, 20.0, 9.0), (7.0, 20.0, 9.0), (0.0, 28.0, 6.0)):
        first = catenary_wire(300.0, h, sag, n, lateral_m=lat)
        second = catenary_wire(250.0, h, sag * 0.7, n, lateral_m=0.0)
        rot = np.array([[math.cos(ang), -math.sin(ang)], [math.sin(ang), math.cos(ang)]])
        second[:, :2] = second[:, :2] @ rot.T + np.array([300.0, 0.0])
        second[:, 1] += lat  # keep the lateral offset (simple, not on the bisector)
        wires.append(np.vstack([first, second[1:]]))
    volts = list(U_LL_V / math.sqrt(3) * PHASES) + [0.0]
    seg = polyline_set(wires, volts, [0.1, 0.1, 0.1, 0.008])
    return seg, e3.line_charges(seg)


def test_potential_at_matching_points_and_ground(sagging_two_circuit):
    # Reference: the boundary conditions of the method (V = wire voltage at matching points,
    # 0 for the earth wire) and the image method (V = 0 on the plane z = 0).
    seg, q = sagging_two_circuit
    mp = e3.matching_points(seg)
    assert mp.shape == (len(q), 4, 3)
    np.testing.assert_allclose(np.linalg.norm(mp - 0.5 * (seg.start_m + seg.end_m)[:, None, :], axis=2),
                               np.repeat(seg.wire_radius_m[seg.wire_index][:, None], 4, axis=1), rtol=1e-12)
    v = e3.electric_potential_segments(mp.reshape(-1, 3), seg, q).reshape(-1, 4).mean(axis=1)
    expected = seg.wire_voltage_v[seg.wire_index]
    np.testing.assert_allclose(v, expected, rtol=0, atol=1e-9 * U_LL_V)
    rng = np.random.default_rng(1)
    ground = np.column_stack([rng.uniform(-100, 700, 200), rng.uniform(-100, 200, 200), np.zeros(200)])
    assert np.abs(e3.electric_potential_segments(ground, seg, q)).max() < 1e-9 * U_LL_V
    # elsewhere on the wire surface (other side, between matching points) V is close to the wire voltage
    mid = 0.75 * seg.start_m[5] + 0.25 * seg.end_m[5] + np.array([0.0, 0.0, -0.1])
    v5 = e3.electric_potential_segments(mid[None, :], seg, q)[0]
    assert abs(v5 - expected[5]) < 0.01 * abs(expected[5])


def test_ground_field_vertical_and_curl_free(sagging_two_circuit):
    # Reference: a perfect conductor's surface field is normal to it; electrostatic E is curl-free
    # and equals -grad V (central finite differences of the potential).
    seg, q = sagging_two_circuit
    rng = np.random.default_rng(2)
    ground = np.column_stack([rng.uniform(-50, 600, 300), rng.uniform(-60, 120, 300), np.zeros(300)])
    e = e3.electric_field_segments(ground, seg, q)
    assert np.abs(e[:, :2]).max() < 1e-12 * np.abs(e[:, 2]).max()
    pts = np.column_stack([rng.uniform(0, 500, 20), rng.uniform(-30, 60, 20), rng.uniform(1, 9, 20)])
    hstep = 1e-3
    jac = np.zeros((20, 3, 3), complex)  # jac[:, i, j] = dE_i / dx_j
    grad_v = np.zeros((20, 3), complex)
    for j in range(3):
        dp = np.zeros(3)
        dp[j] = hstep
        jac[:, :, j] = (e3.electric_field_segments(pts + dp, seg, q)
                        - e3.electric_field_segments(pts - dp, seg, q)) / (2 * hstep)
        grad_v[:, j] = (e3.electric_potential_segments(pts + dp, seg, q)
                        - e3.electric_potential_segments(pts - dp, seg, q)) / (2 * hstep)
    curl = np.stack([jac[:, 2, 1] - jac[:, 1, 2], jac[:, 0, 2] - jac[:, 2, 0], jac[:, 1, 0] - jac[:, 0, 1]], axis=1)
    scale = np.abs(jac).max(axis=(1, 2))
    assert (np.abs(curl).max(axis=1) < 1e-6 * scale).all()
    e_pts = e3.electric_field_segments(pts, seg, q)
    np.testing.assert_allclose(-grad_v, e_pts, rtol=0, atol=1e-6 * np.abs(e_pts).max())


# ------------------------------------------------------------------ convergence, symmetry, linearity


def test_convergence_with_segment_count_on_sagging_span():
    # Reference: chord discretisation of a smooth catenary converges at second order (error / 4 per
    # doubling); the finest discretisation (512 segments) is the reference.
    pts = np.column_stack([np.full(9, 150.0), np.linspace(-20, 20, 9), np.full(9, 1.0)])
    pts = np.vstack([pts, [[60.0, 4.0, 1.5], [150.0, 0.0, 6.0]]])

    def solve(n):
        seg = polyline_set([catenary_wire(300.0, 22.0, 10.0, n)], [230e3], [0.03])
        return e3.electric_field_segments(pts, seg)

    ref = solve(512)
    errs = [np.abs(solve(n) - ref).max() / np.abs(ref).max() for n in (8, 16, 32, 64)]
    assert all(e1 > e2 for e1, e2 in zip(errs, errs[1:]))
    assert errs[-2] / errs[-1] > 3.0  # close to the second-order ratio 4
    assert errs[-1] < 1e-3


def test_mirror_symmetry_about_mid_span():
    # Reference: symmetry. A level catenary span is symmetric about its mid-span plane x = L/2:
    # E_x is odd, E_y and E_z are even.
    seg = polyline_set([catenary_wire(300.0, 20.0, 8.0, 60, lateral_m=y) for y in (-6, 0, 6)],
                       list(U_LL_V / math.sqrt(3) * PHASES), [0.05] * 3)
    q = e3.line_charges(seg)
    d = np.array([3.0, 40.0, 110.0])
    pts_r = np.column_stack([150.0 + d, [2.0, -7.0, 15.0], [1.0, 3.0, 0.0]])
    pts_l = pts_r * [1, 1, 1]
    pts_l[:, 0] = 150.0 - d
    er = e3.electric_field_segments(pts_r, seg, q)
    el = e3.electric_field_segments(pts_l, seg, q)
    scale = np.abs(er).max()
    np.testing.assert_allclose(el[:, 0], -er[:, 0], atol=1e-9 * scale)
    np.testing.assert_allclose(el[:, 1:], er[:, 1:], atol=1e-9 * scale)
    # lateral symmetry: a single-voltage symmetric pair of wires -> E_y odd in y, E_z even
    seg2 = polyline_set([catenary_wire(300.0, 20.0, 8.0, 60, lateral_m=y) for y in (-5, 5)], [1e5, 1e5], [0.02] * 2)
    p = np.array([[100.0, 12.0, 1.0], [100.0, -12.0, 1.0]])
    e = e3.electric_field_segments(p, seg2)
    assert e[0, 1] == pytest.approx(-e[1, 1], rel=1e-9)
    assert e[0, 2] == pytest.approx(e[1, 2], rel=1e-9)


def test_linearity_and_superposition_in_voltage():
    # Reference: linearity of electrostatics: q(a V1 + b V2) = a q(V1) + b q(V2), same for E.
    wires = [catenary_wire(200.0, 18.0, 5.0, 30, lateral_m=y) for y in (-4.0, 4.0, 0.0)]
    v1 = np.array([1e5, -5e4 + 2e4j, 0.0])
    v2 = np.array([3e3j, 7e4, 0.0])
    alpha, beta = 0.3 - 1.2j, 2.5
    q1 = e3.line_charges(polyline_set(wires, v1, [0.02, 0.02, 0.005]))
    q2 = e3.line_charges(polyline_set(wires, v2, [0.02, 0.02, 0.005]))
    seg12 = polyline_set(wires, alpha * v1 + beta * v2, [0.02, 0.02, 0.005])
    q12 = e3.line_charges(seg12)
    np.testing.assert_allclose(q12, alpha * q1 + beta * q2, rtol=0, atol=1e-12 * np.abs(q12).max())
    pts = np.array([[50.0, 1.0, 1.0], [100.0, 30.0, 0.0], [150.0, -2.0, 5.0]])
    e12 = e3.electric_field_segments(pts, seg12)
    e1 = e3.electric_field_segments(pts, polyline_set(wires, v1, [0.02, 0.02, 0.005]))
    e2 = e3.electric_field_segments(pts, polyline_set(wires, v2, [0.02, 0.02, 0.005]))
    np.testing.assert_allclose(e12, alpha * e1 + beta * e2, rtol=0, atol=1e-12 * np.abs(e12).max())


def test_balanced_three_phase_far_field_is_image_dipole():
    # Reference: multipole expansion. Far from a finite line, charges + images form a dipole
    # p = sum q_j L_j (c_j - c_j') = z-hat * sum 2 z_j q_j L_j; E = k (3 (p.n) n - p) / R^3.
    # Relative deviation shrinks like (size / R); |E| falls by 8 per doubling of R.
    seg = polyline_set([catenary_wire(300.0, 20.0, 8.0, 30, lateral_m=y) for y in (-6, 0, 6)],
                       list(U_LL_V / math.sqrt(3) * PHASES), [0.05] * 3)
    q = e3.line_charges(seg)
    centre = 0.5 * (seg.start_m + seg.end_m)
    lengths = np.linalg.norm(seg.end_m - seg.start_m, axis=1)
    p = np.zeros(3, complex)
    p[2] = np.sum(2 * centre[:, 2] * q * lengths)
    origin = np.array([150.0, 0.0, 0.0])
    direction = np.array([0.6, 0.8, 0.0])
    devs, mags = [], []
    for dist in (2e4, 4e4, 8e4):
        pt = origin + dist * direction
        e = e3.electric_field_segments(pt[None, :], seg, q)[0]
        # image dipole centred on the ground at the span centre
        dip = K * (3 * np.dot(p, direction) * direction - p) / dist**3
        devs.append(np.abs(e - dip).max() / np.abs(dip).max())
        mags.append(np.sqrt((np.abs(e) ** 2).sum()))
    assert devs[0] < 0.05 and devs[1] < devs[0] / 1.8 and devs[2] < devs[1] / 1.8
    assert mags[0] / mags[1] == pytest.approx(8.0, rel=0.03)


# ------------------------------------------------------------------ bookkeeping and errors


def test_screened_wires_carry_no_charge_and_add_no_field():
    # Reference: a screened cable's field stays inside its screen (common practice).
    wires = straight_wires([0.0], [15.0], 400.0, 20.0)
    cable = straight_wires([5.0], [-1.2], 400.0, 20.0)
    alone = polyline_set(wires, [1e5], [0.02])
    both = polyline_set(wires + cable, [1e5, 2e4], [0.02, 0.05], screened=[False, True])
    q = e3.line_charges(both)
    assert np.all(q[both.wire_index == 1] == 0)
    pts = np.array([[0.0, 5.0, 0.0], [10.0, -3.0, 1.0]])
    np.testing.assert_array_equal(e3.electric_field_segments(pts, both), e3.electric_field_segments(pts, alone))


def test_wires_at_zero_volts_give_no_charge_and_no_field():
    # Reference: with every wire at 0 V above 0 V ground the solution is zero charge, and
    # without charge there is no electric field (Gauss's law); a route with only
    # current-carrying 0 V conductors must give E = 0, not an error.
    wires = straight_wires([0.0, 6.0], [15.0, 15.0], 400.0, 20.0)
    dead = polyline_set(wires, [0.0, 0.0], [0.02, 0.02])
    q = e3.line_charges(dead)
    assert np.all(q == 0)
    pts = np.array([[0.0, 5.0, 0.0], [10.0, -3.0, 1.0]])
    np.testing.assert_array_equal(e3.electric_field_segments(pts, dead, q), 0.0)


def test_chunking_does_not_change_results():
    seg = polyline_set([catenary_wire(200.0, 18.0, 5.0, 30)], [1e5], [0.02])
    q = e3.line_charges(seg)
    rng = np.random.default_rng(3)
    pts = np.column_stack([rng.uniform(0, 200, 1000), rng.uniform(-30, 30, 1000), rng.uniform(0, 5, 1000)])
    full = e3.electric_field_segments(pts, seg, q)
    for chunk in (1, 7, 333):
        np.testing.assert_array_equal(e3.electric_field_segments(pts, seg, q, chunk_size=chunk), full)


def test_thread_count_does_not_change_results():
    # Each point's sum runs over the links in a fixed order whatever thread computes it.
    import numba

    seg = polyline_set([catenary_wire(200.0, 18.0, 5.0, 31, lateral_m=y) for y in (-5.0, 5.0)], [1e5, -1e5], [0.02] * 2)
    q = e3.line_charges(seg)
    rng = np.random.default_rng(4)
    pts = np.column_stack([rng.uniform(0, 200, 500), rng.uniform(-30, 30, 500), rng.uniform(0, 5, 500)])
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = e3.electric_field_segments(pts, seg, q)
    finally:
        numba.set_num_threads(before)
    np.testing.assert_array_equal(e3.electric_field_segments(pts, seg, q), one)


def test_warm_up_runs():
    assert e3.warm_up() is None


@pytest.mark.parametrize(
    "point, index",
    [
        pytest.param([[0.0, 0.0, 1.0], [5.0, 1.0, -0.01]], 1, id="below-ground"),
        pytest.param([[0.0, 0.0, 1.0], [3.0, 0.0, 1.0], [100.0, 0.004, 10.0]], 2, id="inside-wire-mid-segment"),
        pytest.param([[20.0, 0.0, 10.003]], 0, id="inside-wire-at-segment-joint"),
        pytest.param([[-200.0, 0.0, 10.0]], 0, id="inside-wire-at-its-end"),
    ],
)
def test_bad_points_raise_geometry_error_naming_the_point(point, index):
    seg = polyline_set(straight_wires([0.0], [10.0], 400.0, 20.0), [1e5], [0.01])
    with pytest.raises(GeometryError, match=rf"points\[{index}\]") as err:
        e3.electric_field_segments(np.array(point), seg)
    assert err.value.field == f"points[{index}]"


def test_inside_wire_found_in_a_later_chunk():
    seg = polyline_set(straight_wires([0.0], [10.0], 400.0, 20.0), [1e5], [0.01])
    pts = np.column_stack([np.linspace(-100, 100, 50), np.full(50, 3.0), np.full(50, 1.0)])
    pts[37] = [33.0, 0.0, 10.0]
    with pytest.raises(GeometryError) as err:
        e3.electric_field_segments(pts, seg, chunk_size=16)
    assert err.value.field == "points[37]"


def test_point_just_outside_wire_is_accepted():
    seg = polyline_set(straight_wires([0.0], [10.0], 400.0, 20.0), [1e5], [0.01])
    e = e3.electric_field_segments(np.array([[20.0, 0.0, 10.0105], [7.0, 0.0105, 10.0]]), seg)
    assert np.isfinite(e).all()


@pytest.mark.parametrize(
    "kwargs, field",
    [
        pytest.param({"points_m": np.zeros((3, 2))}, "points", id="points-shape"),
        pytest.param({"points_m": np.array([[0.0, np.nan, 1.0]])}, "points[0]", id="points-nan"),
        pytest.param({"charges": np.zeros(3, complex)}, "charges", id="charges-shape"),
        pytest.param({"chunk_size": 0}, "chunk_size", id="chunk-size"),
    ],
)
def test_malformed_input(kwargs, field):
    seg = polyline_set(straight_wires([0.0], [10.0], 100.0, 20.0), [1e5], [0.01])
    args = {"points_m": np.array([[0.0, 5.0, 1.0]]), "segments": seg} | kwargs
    with pytest.raises(EngineInputError) as err:
        e3.electric_field_segments(**args)
    assert err.value.field == field


def test_too_many_segments_is_an_input_error(monkeypatch):
    # the dense matrix needs 16 m^2 bytes: beyond the cap the request is refused, not attempted
    monkeypatch.setattr(e3, "MAX_CHARGE_SEGMENTS", 10)
    seg = polyline_set(straight_wires([0.0], [10.0], 220.0, 20.0), [1e5], [0.01])
    with pytest.raises(EngineInputError) as err:
        e3.line_charges(seg)
    assert err.value.field == "segments"


def test_bad_segments():
    low = polyline_set([np.array([[0.0, 0.0, 0.005], [10.0, 0.0, 5.0]])], [1e5], [0.01])
    with pytest.raises(GeometryError) as err:
        e3.line_charges(low)
    assert err.value.field == "segments.start_m[0]"
    zero = polyline_set([np.array([[0.0, 0.0, 5.0], [0.0, 0.0, 5.0], [1.0, 0.0, 5.0]])], [1e5], [0.01])
    with pytest.raises(GeometryError) as err:
        e3.line_charges(zero)
    assert err.value.field == "segments.end_m[0]"
    rad = polyline_set([np.array([[0.0, 0.0, 5.0], [1.0, 0.0, 5.0]])], [1e5], [0.0])
    with pytest.raises(GeometryError) as err:
        e3.line_charges(rad)
    assert err.value.field == "segments.wire_radius_m[0]"
    nan_end = polyline_set([np.array([[0.0, 0.0, 5.0], [1.0, 0.0, 5.0], [2.0, np.nan, 5.0]])], [1e5], [0.01])
    with pytest.raises(EngineInputError) as err:
        e3.line_charges(nan_end)
    assert err.value.field == "segments.end_m[1]"
    nan_v = polyline_set([np.array([[0.0, 0.0, 5.0], [1.0, 0.0, 5.0]])], [complex(np.inf, 0.0)], [0.01])
    with pytest.raises(EngineInputError) as err:
        e3.line_charges(nan_v)
    assert err.value.field == "segments.wire_voltage_v[0]"
