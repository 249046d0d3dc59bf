"""Earth-return images of 3-D current segments (models.route.earth_return3d).

Independent references, named at each check:
* the 2-D engine (models.cross_section.evaluate_cross_section and
  models.magnetic.earth_return_phasors, itself tested against a derived table of the
  complex depth and the skin-depth form): for an (almost) infinitely long straight level
  route the 3-D image is the 2-D Deri image (the 2-D model is the limit of long straight
  conductors);
* the boundary condition of a perfect conductor for the magnetic field (normal B = 0 at
  its surface) as rho -> 0, and the real mirror image computed with the free-space
  kernel (models.route.magnetic3d, tested against magpylib) for p = 0;
* the Biot–Savart field of a current element, mu0/(4 pi) I dl x R / |R|^3, for the far
  image as rho -> infinity (first term of the multipole expansion; error ~ (L/|p|)^2);
* div B = 0 (Maxwell), by central finite differences;
* the plain complex-numpy formula (image_flux_density_segments_numpy) for the kernel.
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest

import models.route.earth_return3d as er
from models.cross_section import evaluate_cross_section
from models.errors import GeometryError
from models.geometry import Bundle, Circuit, Conductor, CrossSection
from models.magnetic import complex_depth_m
from models.route.discretise import discretise_route
from models.route.earth_return3d import image_flux_density_segments, image_flux_density_segments_numpy
from models.route.evaluate import evaluate_route
from models.route.sets import EvaluationSets, GridSet, LateralProfileSet, Receptor
from models.route.magnetic3d import flux_density_segments
from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support
from models.units import MU0_H_PER_M

F_HZ = 50.0
# One loaded phase and two idle neutrals: an unbalanced circuit whose earth return matters.
LABELS = (("L1", -6.0), ("N", 0.0), ("N", 6.0))
HEIGHT_M = 14.0
TINY_SAG_M = 0.01


def _unbalanced_route(half_length_m: float, sag_m: float = TINY_SAG_M) -> Route:
    """Invented straight level line heading north: three collinear supports, one phase loaded."""
    c = RouteCircuit("c1", "overhead", 0.0, 500.0,
                     tuple(RouteConductor(p, o, HEIGHT_M, sag_m) for p, o in LABELS), Bundle(0.03))
    sup = (Support("A", 0.0, 0.0), Support("B", 0.0, half_length_m), Support("C", 0.0, 2 * half_length_m))
    return Route(sup, (c,))


def _unbalanced_section(sag_m: float = TINY_SAG_M) -> CrossSection:
    """The 2-D section at mid-span of :func:`_unbalanced_route` (attachment height less the sag)."""
    return CrossSection((Circuit("c1", "overhead", 0.0, 500.0,
                                 tuple(Conductor(p, o, HEIGHT_M - sag_m) for p, o in LABELS), Bundle(0.03)),))


def _angle_route() -> Route:
    """Invented 3-span line, 25 deg angle, uneven support ground, sagging spans, one circuit and an earth wire."""
    a = math.radians(25.0)
    sup = (Support("T1", 0.0, 0.0, 0.0), Support("T2", 320.0, 0.0, 4.0),
           Support("T3", 320.0 + 280.0 * math.cos(a), 280.0 * math.sin(a), 1.0),
           Support("T4", 320.0 + 560.0 * math.cos(a), 560.0 * math.sin(a), 6.0))
    c = RouteCircuit("c1", "overhead", 132.0, 600.0,
                     (RouteConductor("L1", -5.0, 18.0, 7.0), RouteConductor("L2", 0.0, 21.0, 7.5),
                      RouteConductor("N", 5.0, 18.0, 7.0)), Bundle(0.028, 2, 0.4))
    return Route(sup, (c,), (RouteEarthWire(0.0, 26.0, 0.012, 5.0),))


def _points(n, seed, z_lo=0.0, z_hi=30.0):
    rng = np.random.default_rng(seed)
    return np.column_stack([rng.uniform(-50, 850, n), rng.uniform(-60, 300, n), rng.uniform(z_lo, z_hi, n)])


def test_long_straight_route_matches_the_2d_deri_image():
    # Reference: the 2-D engine with the same soil resistivity.  The 3-D line is 200 km long
    # (two 100 km spans) and observed at its middle; the finite length changes the image
    # (complex distance |h + 2p| ~ 720 m at 50 ohm m) by ~ |h + 2p|^2 / (2 (100 km)^2) ~ 3e-5.
    rho = 50.0
    half = 1.0e5
    segs = discretise_route(_unbalanced_route(half, sag_m=0.0))
    offsets = np.linspace(-40.0, 40.0, 17)
    pts = np.column_stack([offsets, np.full_like(offsets, half), np.full_like(offsets, 1.0)])
    p = complex_depth_m(rho, F_HZ)
    direct = flux_density_segments(pts, segs)
    image = image_flux_density_segments(pts, segs, p)
    ref_plain = evaluate_cross_section(_unbalanced_section(0.0), offsets, 1.0, F_HZ)
    ref_deri = evaluate_cross_section(_unbalanced_section(0.0), offsets, 1.0, F_HZ, soil_resistivity_ohm_m=rho)
    # frames: 2-D (offset, height, out of the plane) = 3-D (x, z, -y) for a line heading north;
    # the sign between the two current conventions is taken from the free-space fields
    sign = np.sign(np.vdot(ref_plain.b_phasor_t[:, 0], direct[:, 0]).real)
    np.testing.assert_allclose(sign * direct[:, [0, 2]], ref_plain.b_phasor_t, rtol=1e-7,
                               atol=1e-7 * np.abs(ref_plain.b_phasor_t).max())
    # the image difference alone against the 2-D image, to 1e-4 of its size
    img_2d = ref_deri.b_phasor_t - ref_plain.b_phasor_t
    assert np.abs(img_2d).max() > 1e-2 * np.abs(ref_plain.b_phasor_t).max()   # the image matters here
    np.testing.assert_allclose(sign * image[:, [0, 2]], img_2d, rtol=0, atol=1e-4 * np.abs(img_2d).max())
    assert np.abs(image[:, 1]).max() < 1e-6 * np.abs(image).max()   # no field along a long straight line
    # total resultant rms
    b_rms = np.sqrt(np.sum(np.abs(direct + image) ** 2, axis=1))
    np.testing.assert_allclose(b_rms, ref_deri.b_rms_t, rtol=1e-5)


def test_perfect_conductor_limit_normal_field_vanishes_on_the_ground():
    # rho -> 0: the earth is a perfect conductor at z = 0, where the normal component of B
    # vanishes (boundary condition; residual ~ |p| / distance ~ 3e-6 at 1e-12 ohm m... p = 3.6e-5 m).
    segs = discretise_route(_angle_route(), tolerance_m=0.05)
    pts = _points(300, 5, 0.0, 0.0)
    p = complex_depth_m(1e-12, F_HZ)
    total = flux_density_segments(pts, segs) + image_flux_density_segments(pts, segs, p)
    mag = np.linalg.norm(np.abs(total), axis=1)
    assert np.all(np.abs(total[:, 2]) < 1e-5 * mag)
    # the free-space field alone has a normal component there: the check can fail
    free = flux_density_segments(pts, segs)
    assert np.max(np.abs(free[:, 2]) / mag) > 0.1
    # p = 0 exactly: the real mirror image (z -> -z, current -I) by the free-space kernel
    mirror = (segs.start_m * [1, 1, -1], segs.end_m * [1, 1, -1])
    pts_up = _points(200, 6, 0.0, 30.0)
    ref = flux_density_segments(pts_up, mirror, current_a=-segs.current_a)
    got = image_flux_density_segments(pts_up, segs, 0.0)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12 * np.abs(ref).max())
    # and the 1e-12 ohm m image tends to it
    near = image_flux_density_segments(pts_up, segs, p)
    np.testing.assert_allclose(near, ref, rtol=0, atol=1e-5 * np.abs(ref).max())


@pytest.mark.parametrize("rho", [1e-12, 1.0, 100.0, 1e4, 1e10])
def test_numba_kernel_equals_numpy_reference(rho):
    # Same formula, independent loop structure (no runs, no shared vertices, complex numpy)
    segs = discretise_route(_angle_route(), tolerance_m=0.05)
    pts = _points(240, 3)
    p = complex_depth_m(rho, F_HZ)
    ref = image_flux_density_segments_numpy(pts, segs, p)
    got = image_flux_density_segments(pts, segs, p)
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())


def test_very_resistive_soil_image_vanishes_like_a_far_current_element():
    # rho -> infinity: the image recedes to depth ~ 2|p| and vanishes.  Seen from there a route
    # of finite length L is a current element: B ~ -mu0/(4 pi) sum I (b' - a') x R / (R . R)^(3/2)
    # (Biot–Savart element, error ~ (L / |p|)^2), i.e. it decays like 1/|p|^2 (for an infinitely
    # long line, the 2-D case, like 1/|p|).
    segs = discretise_route(_angle_route(), tolerance_m=0.05)
    pts = _points(50, 8)
    free = flux_density_segments(pts, segs)
    images = {}
    for rho in (1e10, 1e12):
        p = complex_depth_m(rho, F_HZ)
        got = image_flux_density_segments(pts, segs, p)
        a = segs.start_m.astype(complex)
        b = segs.end_m.astype(complex)
        a[:, 2] = -(a[:, 2] + 2 * p)
        b[:, 2] = -(b[:, 2] + 2 * p)
        r = pts[:, None, :] - 0.5 * (a + b)[None]
        rr = np.sum(r * r, axis=2) ** 1.5
        element = -MU0_H_PER_M / (4 * np.pi) * np.einsum(
            "m,pmk,pm->pk", segs.current_a, np.cross((b - a)[None], r), 1.0 / rr)
        np.testing.assert_allclose(got, element, rtol=0, atol=1e-6 * np.abs(element).max())
        images[rho] = got
    ratio = np.abs(images[1e10]).max() / np.abs(images[1e12]).max()
    assert ratio == pytest.approx(100.0, rel=1e-3)     # |p| ratio 10 -> field ratio 100
    assert np.abs(images[1e12]).max() < 1e-9 * np.abs(free).max()


def test_divergence_free_with_images():
    # div B = 0 (central differences, h = 1 mm; truncation ~ (h/d)^2, round-off ~ eps |B| / h)
    # for the image field alone and for direct + image above ground
    segs = discretise_route(_angle_route(), tolerance_m=0.05)
    pts = _points(40, 11, 0.5, 35.0)
    _, inside = flux_density_segments(pts, segs, on_conductor="mask")
    pts = pts[~inside]
    p = complex_depth_m(1.0, F_HZ)   # |p| = 36 m: the image matters near the line

    h = 1e-3
    div = {"image": np.zeros(len(pts), dtype=complex), "total": np.zeros(len(pts), dtype=complex)}
    grad = {"image": np.zeros(len(pts)), "total": np.zeros(len(pts))}
    for k in range(3):
        e = np.zeros(3)
        e[k] = h
        ip = image_flux_density_segments(pts + e, segs, p)
        im = image_flux_density_segments(pts - e, segs, p)
        for key, (bp, bm) in {"image": (ip, im),
                              "total": (ip + flux_density_segments(pts + e, segs),
                                        im + flux_density_segments(pts - e, segs))}.items():
            div[key] += (bp[:, k] - bm[:, k]) / (2 * h)
            grad[key] = np.maximum(grad[key], np.abs((bp - bm) / (2 * h)).max(axis=1))
    for key in ("image", "total"):
        assert np.all(np.abs(div[key]) < 1e-6 * grad[key]), key
    assert np.median(grad["image"] / grad["total"]) > 1e-3


def test_chunking_and_tiling_do_not_change_results():
    segs = discretise_route(_angle_route(), tolerance_m=0.05)
    pts = _points(1001, 4)
    p = complex_depth_m(100.0, F_HZ)
    ref = image_flux_density_segments(pts, segs, p)
    np.testing.assert_array_equal(image_flux_density_segments(pts, segs, p, chunk_size=97, tile=13), ref)
    np.testing.assert_array_equal(image_flux_density_segments(pts, segs, p, chunk_size=1), ref)


def test_memory_bounded_by_chunk_size(monkeypatch):
    # The kernel sees at most chunk_size points at a time, and Python-side memory beyond the
    # output (48 B a point) stays a few chunk-sized arrays (tracemalloc traces numpy buffers).
    segs = discretise_route(_unbalanced_route(150.0, sag_m=3.0), tolerance_m=0.5)
    n, chunk = 120_000, 4096
    pts = np.column_stack([np.linspace(-50, 50, n), np.linspace(0, 300, n), np.ones(n)])
    p = complex_depth_m(100.0, F_HZ)
    seen = []
    kernel = er._get_kernel()

    def spy(*args):
        seen.append(len(args[0]))
        return kernel(*args)

    monkeypatch.setattr(er, "_get_kernel", lambda: spy)
    tracemalloc.start()
    image_flux_density_segments(pts, segs, p, chunk_size=chunk)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert max(seen) == chunk and sum(seen) == n
    assert peak - 48 * n < 6 * 8 * chunk + 200_000


def test_evaluate_route_adds_the_images_to_b_on_every_set():
    # Reference: the 2-D engine with the same soil resistivity at mid-span of a 2 km line.
    # rho = 0.1 ohm m keeps the image close (|h + 2p| ~ 40 m), so the finite length changes
    # it by < 1e-3 (as for the free-space comparison in test_evaluate.py).
    rho = 0.1
    route = _unbalanced_route(1000.0, sag_m=0.0)
    sets = EvaluationSets(lateral_profile=LateralProfileSet(1000.0, -30.0, 30.0, 5.0, 1.0),
                          receptors=(Receptor("r1", "house", 10.0, 1000.0, 1.0),),
                          grid=GridSet((-30.0, 990.0, 30.0, 1010.0), 5.0, 1.0))
    with_earth = evaluate_route(route, F_HZ, sets, soil_resistivity_ohm_m=rho)
    without = evaluate_route(route, F_HZ, sets)
    prof = with_earth.sets["lateral_profile"]
    ref = evaluate_cross_section(_unbalanced_section(0.0), prof.offset_m, 1.0, F_HZ, soil_resistivity_ohm_m=rho)
    plain = evaluate_cross_section(_unbalanced_section(0.0), prof.offset_m, 1.0, F_HZ)
    assert np.max(np.abs(ref.b_rms_t - plain.b_rms_t) / plain.b_rms_t) > 0.05   # earth return matters
    np.testing.assert_allclose(prof.field.b_rms_t, ref.b_rms_t, rtol=1e-3)
    # E is unaffected (perfectly conducting earth for E at power frequency)
    np.testing.assert_array_equal(with_earth.combined.e_phasor_v_per_m, without.combined.e_phasor_v_per_m)
    # the receptor and the grid node at (10, 1000) see the same B, the profile point too
    g = with_earth.sets["grid"]
    k = int(np.argmin(np.hypot(g.field.points_m[:, 0] - 10.0, g.field.points_m[:, 1] - 1000.0)))
    j = int(np.argmin(np.abs(prof.offset_m - 10.0)))
    b_rec = with_earth.sets["receptors"].field.b_rms_t[0]
    assert g.field.b_rms_t[k] == pytest.approx(b_rec, rel=1e-12)
    assert prof.field.b_rms_t[j] == pytest.approx(b_rec, rel=1e-12)
    assert abs(b_rec - without.sets["receptors"].field.b_rms_t[0]) > 0.05 * b_rec
    assert any("Deri" in a and "0.1 ohm m" in a for a in with_earth.assumptions)
    assert not any("Deri" in a for a in without.assumptions)


def test_underground_cables_get_no_image():
    # As in the 2-D engine (images for overhead wires only): a buried cable's segments are skipped.
    c = RouteCircuit("cab", "underground", 0.0, 400.0,
                     (RouteConductor("L1", -0.3, -1.2), RouteConductor("N", 0.3, -1.2)), Bundle(0.02))
    segs = discretise_route(Route((Support("a", 0, 0), Support("b", 200, 0)), (c,)))
    assert segs.wire_screened.all()
    pts = np.array([[100.0, 3.0, 1.0], [50.0, -2.0, 0.0]])
    assert np.all(image_flux_density_segments(pts, segs, complex_depth_m(100.0, F_HZ)) == 0)
    # the same segments as plain arrays (no screening information) do get an image
    arr = image_flux_density_segments(pts, (segs.start_m, segs.end_m), complex_depth_m(100.0, F_HZ),
                                      current_a=segs.current_a)
    assert np.abs(arr).max() > 0


@pytest.mark.parametrize(
    "kwargs, field",
    [
        pytest.param({"points_m": np.array([[0.0, 0.0, -0.5]])}, "points_m[0]", id="below-ground"),
        pytest.param({"points_m": np.zeros((2, 2))}, "points_m", id="shape"),
        pytest.param({"points_m": np.array([[np.nan, 0.0, 1.0]])}, "points_m", id="nan"),
        pytest.param({"complex_depth_m": -1.0 + 1.0j}, "complex_depth_m", id="depth-upper-half-plane"),
        pytest.param({"complex_depth_m": complex(np.inf, 0)}, "complex_depth_m", id="depth-inf"),
        pytest.param({"complex_depth_m": "deep"}, "complex_depth_m", id="depth-text"),
        pytest.param({"chunk_size": 0}, "chunk_size", id="chunk"),
        pytest.param({"tile": 0}, "tile", id="tile"),
        pytest.param({"current_a": None}, "current_a", id="no-current"),
    ],
)
def test_invalid_input(kwargs, field):
    args = {"points_m": np.ones((2, 3)), "segments": (np.zeros((1, 3)) + 5, np.ones((1, 3)) * [6, 5, 5]),
            "complex_depth_m": 10 - 10j, "current_a": np.ones(1)}
    args.update(kwargs)
    with pytest.raises(GeometryError) as info:
        image_flux_density_segments(args.pop("points_m"), args.pop("segments"), args.pop("complex_depth_m"), **args)
    assert info.value.field == field


def test_warm_up_returns_elapsed_seconds():
    from models.route import warm_up_magnetic

    assert er.warm_up() >= 0.0
    assert warm_up_magnetic() >= 0.0
