"""3-D Biot–Savart of straight finite segments.

Independent references, named at each check:
* closed forms: the finite straight wire mu0 I/(4 pi d) (sin t2 - sin t1) (textbook
  Biot–Savart integral), the infinite wire mu0 I/(2 pi r); mu0 from scipy.constants;
* magpylib (general-purpose magnetics library, its own segment formula) for
  polylines along sagging spans and an angle support, real and imaginary parts
  of the phasors separately;
* the laws themselves: Ampère's circuital law as a closed loop integral around a
  sagging conductor of a closed circuit, and div B = 0 by finite differences.
"""

from __future__ import annotations

import math

import magpylib
import numpy as np
import pytest
from scipy.constants import mu_0

from models.errors import GeometryError
from models.geometry import Bundle
from models.route.discretise import discretise_route
from models.route.magnetic3d import flux_density_segments, flux_density_segments_numpy, warm_up
from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support


def _demo_route():
    """Invented line: three spans, 25 deg angle at the second support, uneven ground, one circuit."""
    supports = (Support("T1", 0.0, 0.0, 0.0), Support("T2", 320.0, 0.0, 4.0),
                Support("T3", 320.0 + 280.0 * math.cos(math.radians(25)), 280.0 * math.sin(math.radians(25)), 1.0),
                Support("T4", 320.0 + 560.0 * math.cos(math.radians(25)), 560.0 * math.sin(math.radians(25)), 6.0))
    c = RouteCircuit("c1", "overhead", 132.0, 600.0,
                     (RouteConductor("L1", -5.0, 18.0, 7.0), RouteConductor("L2", 0.0, 21.0, 7.5),
                      RouteConductor("L3", 5.0, 18.0, 7.0)), Bundle(0.028, 2, 0.4))
    return Route(supports, (c,), (RouteEarthWire(0.0, 26.0, 0.012, 5.0),))


def test_single_segment_closed_form():
    # Finite straight wire on the z axis from z1 to z2, observer at distance d:
    # |B| = mu0 I / (4 pi d) (sin t2 - sin t1), sin t = (z - z_obs) / sqrt(d^2 + (z - z_obs)^2),
    # direction phi-hat (right-hand rule).  Textbook Biot–Savart integral; mu0 from scipy.constants.
    i_a, z1, z2 = 750.0, -40.0, 65.0
    pts = np.array([[3.0, 0.0, 0.0], [0.0, 7.0, 12.5], [-2.0, -2.0, 90.0], [5.0, 0.0, -60.0]])
    b = flux_density_segments(pts, (np.array([[0, 0, z1]]), np.array([[0, 0, z2]])), current_a=np.array([i_a]))
    for p, bp in zip(pts, b):
        d = math.hypot(p[0], p[1])
        s2 = (z2 - p[2]) / math.hypot(d, z2 - p[2])
        s1 = (z1 - p[2]) / math.hypot(d, z1 - p[2])
        mag = mu_0 * i_a / (4 * math.pi * d) * (s2 - s1)
        phi = np.array([-p[1], p[0], 0.0]) / d
        np.testing.assert_allclose(bp.real, mag * phi, rtol=1e-13, atol=1e-13 * abs(mag))
        assert np.all(bp.imag == 0.0)
    # on the perpendicular bisector: B = mu0 I / (4 pi d) * 2 sin(theta), theta = half-angle subtended
    half, d = 50.0, 4.0
    b = flux_density_segments(np.array([[d, 0.0, 0.0]]), (np.array([[0, 0, -half]]), np.array([[0, 0, half]])),
                              current_a=np.array([1.0]))
    assert b[0, 1].real == pytest.approx(mu_0 / (4 * math.pi * d) * 2 * half / math.hypot(d, half), rel=1e-14)


def test_long_straight_conductor_matches_infinite_wire():
    # mu0 I / (2 pi r) for an infinite straight wire (Ampère); the 2e5 m wire differs from it by
    # the factor sin(theta) = 1e5 / sqrt(r^2 + 1e10) (finite-wire closed form), i.e. < 5e-7 here.
    # Observers 0.5 m from a 200 km segment also exercise the cancellation-free form (2).
    r = np.array([0.5, 3.0, 17.0, 100.0])
    pts = np.column_stack([np.zeros_like(r), r, np.zeros_like(r)])  # along +y from a wire on the x axis
    i_a = 1200.0 * np.exp(1j * 0.7)
    b = flux_density_segments(pts, (np.array([[-1e5, 0, 0]]), np.array([[1e5, 0, 0]])), current_a=np.array([i_a]),
                              radius_m=np.array([0.01]))
    # current along +x, observer at +y: B along +z
    infinite = mu_0 * i_a / (2 * math.pi * r)
    np.testing.assert_allclose(b[:, 2], infinite * 1e5 / np.hypot(r, 1e5), rtol=1e-12)
    np.testing.assert_allclose(b[:, 2], infinite, rtol=5e-7)
    np.testing.assert_allclose(np.abs(b[:, :2]), 0.0, atol=1e-20)


def _magpylib_b(points, segs):
    """B phasors from magpylib current polylines, one per wire, real and imaginary currents separately."""
    out = np.zeros((len(points), 3), dtype=complex)
    for w in np.unique(segs.wire_index):
        rows = np.flatnonzero(segs.wire_index == w)
        verts = np.vstack([segs.start_m[rows], segs.end_m[rows[-1:]]])
        cur = segs.current_a[rows[0]]
        assert np.all(segs.current_a[rows] == cur)
        for part, scale in ((cur.real, 1.0), (cur.imag, 1j)):
            if part != 0.0:
                src = magpylib.current.Polyline(current=float(part), vertices=verts)
                out += scale * magpylib.getB(src, points)
    return out


def test_agrees_with_magpylib_along_sagging_spans_and_an_angle_support():
    segs = discretise_route(_demo_route(), tolerance_m=0.05)
    assert segs.current_a.size > 100
    rng = np.random.default_rng(7)
    # points around the route: under the spans, at the angle support, beside it, above the wires
    pts = np.column_stack([rng.uniform(-50, 900, 400), rng.uniform(-60, 300, 400), rng.uniform(0.0, 40.0, 400)])
    b, inside = flux_density_segments(pts, segs, on_conductor="mask")
    pts, b = pts[~inside], b[~inside]
    ref = _magpylib_b(pts, segs)
    scale = np.abs(ref).max(axis=1, keepdims=True)
    # real and imaginary parts separately, relative to the point's field magnitude: 1e-6 required
    assert np.max(np.abs(b.real - ref.real) / scale) < 1e-9
    assert np.max(np.abs(b.imag - ref.imag) / scale) < 1e-9


def test_numba_kernel_equals_numpy_reference():
    # Same formula, independent loop structure (no blocking, no shared vertices, no chunking).
    segs = discretise_route(_demo_route(), tolerance_m=0.02)
    rng = np.random.default_rng(3)
    pts = np.column_stack([rng.uniform(-50, 900, 997), rng.uniform(-60, 300, 997), np.full(997, 1.0)])
    a = flux_density_segments(pts, segs, chunk_size=300, tile=64)
    b = flux_density_segments(pts, segs)
    ref = flux_density_segments_numpy(pts, segs)
    np.testing.assert_allclose(a, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())
    np.testing.assert_array_equal(a, b)  # chunking and tiling do not change a point's sum order


def _closed_circuit():
    """A sagging conductor over three spans closed by a straight return 40 m to its side (segments)."""
    route = Route((Support("a", 0, 0), Support("b", 300, 0), Support("c", 600, 30), Support("d", 900, 30)),
                  (RouteCircuit("c", "overhead", 0.0, 0.0, (RouteConductor("L1", 0.0, 20.0, 8.0),), Bundle(0.03)),))
    segs = discretise_route(route, tolerance_m=0.005)
    path = np.vstack([segs.start_m, segs.end_m[-1:]])
    ret = path[-1] + np.array([[0, 40.0, 0], [-900, 0, 0], [0, -40.0, 0]]).cumsum(axis=0)
    ret[-1] = path[0]
    verts = np.vstack([path, ret])
    return verts, route


def _loop_integral(centre, normal, radius, segments, current, n=256):
    """Circulation of B around a circle (trapezoid rule, spectrally accurate for a smooth periodic integrand)."""
    normal = normal / np.linalg.norm(normal)
    e1 = np.cross(normal, [0.0, 0.0, 1.0] if abs(normal[2]) < 0.9 else [1.0, 0.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(normal, e1)
    t = 2 * np.pi * np.arange(n) / n
    pts = centre + radius * (np.cos(t)[:, None] * e1 + np.sin(t)[:, None] * e2)
    dl = radius * (-np.sin(t)[:, None] * e1 + np.cos(t)[:, None] * e2) * (2 * np.pi / n)
    b = flux_density_segments(pts, segments, current_a=current)
    return np.sum(np.einsum("ij,ij->i", b.real, dl)) + 1j * np.sum(np.einsum("ij,ij->i", b.imag, dl))


def test_amperes_law_around_a_sagging_conductor():
    # Ampère: circulation of B along a closed loop = mu0 * enclosed current (closed circuit);
    # a loop enclosing nothing gives 0.
    verts, _ = _closed_circuit()
    segs = (verts[:-1], verts[1:])
    i_a = 800.0 * np.exp(-2.1j)
    cur = np.full(len(verts) - 1, i_a)
    # around the conductor in the middle span (tilted span: loop normal along the local tangent)
    k = int(np.argmin(np.abs(verts[:, 0] - 450.0)))
    tangent = verts[k + 1] - verts[k - 1]
    circ = _loop_integral(verts[k], tangent, 1.5, segs, cur)
    assert circ.real == pytest.approx(mu_0 * i_a.real, rel=1e-9)
    assert circ.imag == pytest.approx(mu_0 * i_a.imag, rel=1e-9)
    # near the support b, where the conductor bends, with a 0.8 m loop
    k = int(np.argmin(np.abs(verts[:, 0] - 300.0) + np.abs(verts[:, 2] - 20.0)))
    circ = _loop_integral(verts[k], verts[k + 1] - verts[k - 1], 0.8, segs, cur)
    assert abs(circ - mu_0 * i_a) < 1e-9 * mu_0 * abs(i_a)
    # a loop 10 m beside the conductor encloses nothing
    circ = _loop_integral(verts[k] + np.array([0.0, 10.0, 0.0]), np.array([1.0, 0, 0]), 3.0, segs, cur)
    assert abs(circ) < 1e-12 * mu_0 * abs(i_a)
    # a large loop around both the conductor and its return encloses zero net current
    circ = _loop_integral(np.array([450.0, 30.0, 10.0]), np.array([1.0, 0, 0]), 45.0, segs, cur, n=2048)
    assert abs(circ) < 1e-9 * mu_0 * abs(i_a)


def test_divergence_free():
    # div B = 0: central differences, h = 1 mm; truncation ~ (h/d)^2, round-off ~ eps |B| / h.
    segs = discretise_route(_demo_route(), tolerance_m=0.05)
    rng = np.random.default_rng(11)
    pts = np.column_stack([rng.uniform(0, 850, 40), rng.uniform(-40, 250, 40), rng.uniform(0.5, 35.0, 40)])
    b0, inside = flux_density_segments(pts, segs, on_conductor="mask")
    pts, b0 = pts[~inside], b0[~inside]
    h = 1e-3
    div = np.zeros(len(pts), dtype=complex)
    grad_scale = np.zeros(len(pts))
    for k in range(3):
        e = np.zeros(3)
        e[k] = h
        bp = flux_density_segments(pts + e, segs)
        bm = flux_density_segments(pts - e, segs)
        d = (bp[:, k] - bm[:, k]) / (2 * h)
        div += d
        grad_scale = np.maximum(grad_scale, np.abs((bp - bm) / (2 * h)).max(axis=1))
    assert np.all(np.abs(div) < 1e-6 * grad_scale)


def test_inside_conductor_raises_or_masks():
    seg = (np.array([[0.0, 0, 10], [100.0, 0, 10]]), np.array([[100.0, 0, 10], [200.0, 0, 12]]))
    cur = np.array([100.0, 100.0])
    rad = np.array([0.02, 0.02])
    pts = np.array([[50.0, 0.0, 10.01], [50.0, 0.0, 11.0], [150.0, 0.015, 11.0], [-0.01, 0.0, 10.0]])
    with pytest.raises(GeometryError) as info:
        flux_density_segments(pts, seg, current_a=cur, radius_m=rad)
    assert info.value.field == "points_m[0]"
    b, inside = flux_density_segments(pts, seg, current_a=cur, radius_m=rad, on_conductor="mask")
    np.testing.assert_array_equal(inside, [True, False, True, True])
    assert np.all(b[inside] == 0) and np.all(np.isfinite(b))
    assert np.abs(b[1]).max() > 0
    with pytest.raises(GeometryError, match="on_conductor"):
        flux_density_segments(pts, seg, current_a=cur, on_conductor="nan")


def test_on_the_axis_beyond_the_segment_is_zero_and_finite():
    # Eq. (1) gives exactly 0 on a segment's line outside it (R1 x R2 = 0).
    seg = (np.array([[0.0, 0, 0]]), np.array([[0.0, 0, 1.0]]))
    b = flux_density_segments(np.array([[0.0, 0, 2.0], [0.0, 0, -3.0]]), seg, current_a=np.array([5.0]))
    assert np.all(b == 0)


def test_linearity_and_no_current():
    segs = discretise_route(_demo_route(), tolerance_m=0.1)
    pts = np.array([[100.0, 5.0, 1.0], [500.0, 150.0, 2.0]])
    b = flux_density_segments(pts, segs)
    b2 = flux_density_segments(pts, (segs.start_m, segs.end_m), current_a=(2 - 1j) * segs.current_a)
    np.testing.assert_allclose(b2, (2 - 1j) * b, rtol=1e-13)
    zero = flux_density_segments(pts, (segs.start_m, segs.end_m), current_a=0 * segs.current_a)
    assert np.all(zero == 0)
    assert flux_density_segments(np.zeros((0, 3)), segs).shape == (0, 3)


@pytest.mark.parametrize(
    "kwargs, field",
    [
        pytest.param({"points_m": np.zeros((3, 2))}, "points_m", id="points-shape"),
        pytest.param({"points_m": np.array([[np.nan, 0, 0]])}, "points_m", id="points-nan"),
        pytest.param({"chunk_size": 0}, "chunk_size", id="chunk"),
        pytest.param({"segments": (np.zeros((2, 3)), np.ones((3, 3)))}, "segments", id="segment-shapes"),
        pytest.param({"current_a": None}, "current_a", id="no-current"),
    ],
)
def test_invalid_input(kwargs, field):
    args = {"points_m": np.ones((2, 3)), "segments": (np.zeros((2, 3)), np.ones((2, 3))),
            "current_a": np.ones(2)}
    args.update(kwargs)
    with pytest.raises(GeometryError) as info:
        flux_density_segments(args.pop("points_m"), args.pop("segments"), **args)
    assert info.value.field == field


def test_warm_up_returns_elapsed_seconds():
    assert warm_up() >= 0.0


def test_scaling_with_geometry():
    # Biot–Savart scaling law: B(a * geometry) = B(geometry) / a at the same current
    # (dimensional analysis, as in magpylib's own scaling tests).
    segs = discretise_route(_demo_route(), tolerance_m=0.1)
    pts = np.array([[100.0, 5.0, 1.0], [420.0, 60.0, 3.0], [700.0, 200.0, 30.0]])
    b = flux_density_segments(pts, segs)
    for a in (0.01, 7.0):
        ba = flux_density_segments(a * pts, (a * segs.start_m, a * segs.end_m), current_a=segs.current_a)
        np.testing.assert_allclose(ba * a, b, rtol=1e-12, atol=1e-12 * np.abs(b).max())


def test_concurrent_calls_from_threads_agree():
    # A threaded server may call the kernel from several request threads at once.
    import threading

    segs = discretise_route(_demo_route(), tolerance_m=0.1)
    pts = np.column_stack([np.linspace(0, 800, 3000), np.linspace(-40, 250, 3000), np.full(3000, 1.0)])
    ref = flux_density_segments(pts, segs)
    out = [None] * 4

    def work(i):
        out[i] = flux_density_segments(pts, segs, chunk_size=700)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for r in out:
        np.testing.assert_array_equal(r, ref)


def test_inconsistent_segment_set_is_a_typed_error():
    from dataclasses import replace

    segs = discretise_route(_demo_route(), tolerance_m=0.1)
    bad = replace(segs, wire_index=segs.wire_index + 100)
    with pytest.raises(GeometryError) as info:
        flux_density_segments(np.ones((1, 3)), bad)
    assert info.value.field == "segments.wire_index"
