"""Magnetic flux density of infinite straight conductors (models.magnetic).

Checks, each against something outside the engine:
* Ampère's law, closed form for one infinite filament: |B| = mu0 I / (2 pi r), tangential;
* Ampère's law as an integral: the closed line integral of B equals mu0 times the enclosed
  current (circle, off-centre ellipse, contour enclosing nothing), by trapezoidal quadrature;
* div B = 0 and curl B = 0 away from the currents, by central finite differences;
* magpylib (general-purpose magnetostatics library from PyPI; v5+ uses SI units: metres,
  amperes, tesla) as an independent reference, with straight segments from z = -L to +L,
  L = 1e6 m (end effect ~ r^2 / (2 L^2) < 2e-9 at r = 60 m);
* linearity, superposition, scaling B(aI, a x) = B(I, x) (magpylib's test_scaling idea),
  far-field decay (1/r for a net current, 1/r^2 for a balanced set);
* Deri complex depth p against Deri et al., IEEE Trans. PAS-100(8):3686-3693, 1981 (from memory) (values derived from the paper's formula, recomputed
  here from the skin-depth form with scipy.constants), vanishing earth-return correction
  for very resistive soil and for a balanced set.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc
from magpylib.func import polyline_field

from models.cross_section import evaluate_cross_section
from models.geometry import Bundle, Circuit, Conductor, CrossSection, CurrentPhasor, EarthWire
from models.magnetic import complex_depth_m, flux_density_phasors

MU0 = sc.mu_0  # CODATA 2022 in SciPy >= 1.15; models.units pins the same value (test_units.py)
SEQ = np.exp(1j * np.radians([0.0, -120.0, 120.0]))


def contour_integral(xc, yc, current, path_x, path_y):
    """Closed line integral of B along a periodic contour sampled at uniform parameter steps.

    The trapezoidal rule is spectrally accurate for smooth periodic integrands.
    """
    n = path_x.size
    b = flux_density_phasors(path_x, path_y, xc, yc, current)
    dt = 2 * math.pi / n
    k = np.fft.fftfreq(n, d=1.0 / n) * 1j
    dx = np.fft.ifft(k * np.fft.fft(path_x)).real      # exact derivative of the sampled contour
    dy = np.fft.ifft(k * np.fft.fft(path_y)).real
    return np.sum(b[:, 0] * dx + b[:, 1] * dy) * dt


# ----------------------------------------------------------------------------- Ampère

def test_single_conductor_closed_form():
    # Ampère / Biot–Savart for an infinite filament: |B| = mu0 I / (2 pi r), tangential
    rng = np.random.default_rng(1)
    x, y = rng.uniform(-40, 40, 200), rng.uniform(0, 40, 200)
    xc, yc, current = 3.0, 18.0, 750.0 * np.exp(0.3j)
    b = flux_density_phasors(x, y, [xc], [yc], [current])
    r = np.hypot(x - xc, y - yc)
    mag = np.sqrt(np.abs(b[:, 0]) ** 2 + np.abs(b[:, 1]) ** 2)
    np.testing.assert_allclose(mag, MU0 * abs(current) / (2 * np.pi * r), rtol=1e-12)
    # direction: perpendicular to the radius, counter-clockwise for +z current
    radial = (b[:, 0] * (x - xc) + b[:, 1] * (y - yc)) / r
    np.testing.assert_allclose(np.abs(radial), 0.0, atol=1e-12 * mag.max())
    tangential = (-b[:, 0] * (y - yc) + b[:, 1] * (x - xc)) / r / current
    np.testing.assert_allclose(tangential.real, MU0 / (2 * np.pi * r), rtol=1e-12)


@pytest.mark.parametrize(
    "path",
    [
        pytest.param(lambda t: (3.0 + 2.0 * np.cos(t), 18.0 + 2.0 * np.sin(t)), id="circle"),
        pytest.param(lambda t: (4.0 + 6.0 * np.cos(t), 17.0 + 2.5 * np.sin(t) + 0.5 * np.sin(2 * t)),
                     id="off-centre-wobbly-ellipse"),
    ],
)
def test_ampere_line_integral_encloses_the_current(path):
    # Ampère's circuital law: closed integral of B . dl = mu0 I_enclosed
    t = np.linspace(0, 2 * np.pi, 2048, endpoint=False)
    px, py = path(t)
    current = 640.0 * np.exp(-0.7j)
    got = contour_integral([3.0], [18.0], [current], px, py)
    assert abs(got - MU0 * current) <= 1e-10 * MU0 * abs(current)


def test_ampere_line_integral_with_three_phases_and_empty_contour():
    t = np.linspace(0, 2 * np.pi, 2048, endpoint=False)
    xc, yc, current = [-6.0, 0.0, 6.0], [15.0, 15.0, 15.0], 1000.0 * SEQ
    # a contour around two of the three conductors encloses I1 + I2
    got = contour_integral(xc, yc, current, -3.0 + 5.0 * np.cos(t), 15.0 + 2.0 * np.sin(t))
    assert abs(got - MU0 * (current[0] + current[1])) <= 1e-10 * MU0 * 1000.0
    # a contour enclosing no current gives zero
    got = contour_integral(xc, yc, current, 3.0 + 1.5 * np.cos(t), 5.0 + 1.0 * np.sin(t))
    assert abs(got) <= 1e-12 * MU0 * 1000.0


def test_divergence_and_curl_vanish_away_from_currents():
    # Maxwell: div B = 0 everywhere; curl B = mu0 J = 0 outside the conductors (2-D, quasi-static)
    xc, yc = [-6.0, 0.0, 6.0, 0.0], [15.0, 19.0, 15.0, 25.0]
    current = np.append(900.0 * SEQ, 35.0 * np.exp(2j))
    rng = np.random.default_rng(7)
    x, y = rng.uniform(-30, 30, 50), rng.uniform(0, 12, 50)
    h = 1e-3

    def b(dx, dy):
        return flux_density_phasors(x + dx, y + dy, xc, yc, current)

    dbdx = (b(h, 0) - b(-h, 0)) / (2 * h)
    dbdy = (b(0, h) - b(0, -h)) / (2 * h)
    scale = np.abs(dbdx).max() + np.abs(dbdy).max()
    div = dbdx[:, 0] + dbdy[:, 1]
    curl = dbdx[:, 1] - dbdy[:, 0]
    assert np.abs(div).max() <= 1e-6 * scale
    assert np.abs(curl).max() <= 1e-6 * scale


# ----------------------------------------------------------------------------- magpylib

L_SEGMENT_M = 1e6


def magpylib_b(points, wires):
    """Phasor B from magpylib: real and imaginary current parts evaluated separately.

    ``wires`` are (x, y, current phasor); each is a straight segment along z from -L to +L.
    """
    obs = np.column_stack([points[:, 0], points[:, 1], np.zeros(len(points))])
    out = np.zeros((len(points), 2), dtype=complex)
    for x, y, current in wires:
        start = np.tile([x, y, -L_SEGMENT_M], (len(points), 1))
        end = np.tile([x, y, L_SEGMENT_M], (len(points), 1))
        for part, unit in ((current.real, 1.0), (current.imag, 1j)):
            if part == 0:
                continue
            b = polyline_field("B", obs, start, end, np.full(len(points), part))
            out += unit * b[:, :2]
    return out


def twin(x, y, s):
    # Bundle convention (models.geometry.Bundle): twin side by side horizontally
    return [(x + s / 2, y), (x - s / 2, y)]


def quad(x, y, s):
    # Bundle convention: square with horizontal sides
    return [(x + dx, y + dy) for dx in (-s / 2, s / 2) for dy in (-s / 2, s / 2)]


def test_single_circuit_twin_bundle_with_earth_wire_against_magpylib():
    current = 1100.0
    phases = [("L1", -7.0, 16.0), ("L2", 0.0, 16.0), ("L3", 7.0, 16.0)]
    c = Circuit("c", "overhead", 275.0, current, tuple(Conductor(p, x, y) for p, x, y in phases),
                Bundle(0.03, 2, 0.4))
    ew_current = 42.0 * np.exp(1j * np.radians(160.0))
    section = CrossSection((c,), (EarthWire(0.0, 24.0, 0.016, CurrentPhasor(42.0, 160.0)),))
    x = np.linspace(-60.0, 60.0, 41)
    points = np.column_stack([x, np.full_like(x, 1.0)])
    points = np.vstack([points, [[0.0, 10.0], [3.0, 20.0], [-12.0, 30.0]]])
    wires = [(sx, sy, current / 2 * ph) for (_, x0, y0), ph in zip(phases, SEQ) for sx, sy in twin(x0, y0, 0.4)]
    wires.append((0.0, 24.0, ew_current))
    ref = magpylib_b(points, wires)
    got = evaluate_cross_section(section, points[:, 0], points[:, 1], 50.0).b_phasor_t
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-5 * np.abs(ref).max())
    rel = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert rel.max() < 1e-5


def test_double_circuit_quad_bundles_two_earth_wires_against_magpylib():
    # double circuit, vertical arrangement each side, second circuit reverse-phased ("low reactance")
    left = [("L1", -9.0, 22.0), ("L2", -10.5, 30.0), ("L3", -9.0, 38.0)]
    right = [("L3", 9.0, 22.0), ("L2", 10.5, 30.0), ("L1", 9.0, 38.0)]
    b4 = Bundle(0.0286, 4, 0.45)
    c1 = Circuit("c1", "overhead", 400.0, 1500.0, tuple(Conductor(*p) for p in left), b4)
    c2 = Circuit("c2", "overhead", 400.0, 900.0, tuple(Conductor(*p) for p in right), b4, angle_offset_deg=15.0)
    ews = (EarthWire(-6.0, 46.0, 0.02, CurrentPhasor(60.0, -30.0)), EarthWire(6.0, 46.0, 0.02, CurrentPhasor(55.0, 100.0)))
    section = CrossSection((c1, c2), ews)
    ang = {"L1": 0.0, "L2": -120.0, "L3": 120.0}
    wires = []
    for phases, i_a, off in ((left, 1500.0, 0.0), (right, 900.0, 15.0)):
        for lab, x0, y0 in phases:
            ph = i_a / 4 * np.exp(1j * np.radians(ang[lab] + off))
            wires += [(sx, sy, ph) for sx, sy in quad(x0, y0, 0.45)]
    wires += [(-6.0, 46.0, 60.0 * np.exp(-1j * np.radians(30.0))), (6.0, 46.0, 55.0 * np.exp(1j * np.radians(100.0)))]
    x = np.linspace(-80.0, 80.0, 33)
    points = np.vstack([np.column_stack([x, np.ones_like(x)]), np.column_stack([x[::4], np.full(9, 12.0)])])
    ref = magpylib_b(points, wires)
    got = evaluate_cross_section(section, points[:, 0], points[:, 1], 50.0).b_phasor_t
    rel = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert rel.max() < 1e-5


# ----------------------------------------------------------------------------- consistency

def flat_line(current=1000.0, scale=1.0, labels=("L1", "L2", "L3")):
    cond = tuple(Conductor(lab, scale * x, scale * 14.0) for lab, x in zip(labels, (-6.0, 0.0, 6.0)))
    return CrossSection((Circuit("c", "overhead", 132.0, current, cond, Bundle(scale * 0.03, 2, scale * 0.4)),))


def test_linearity_in_current():
    x = np.linspace(-40, 40, 81)
    b1 = evaluate_cross_section(flat_line(400.0), x, 1.0, 50.0).b_phasor_t
    b2 = evaluate_cross_section(flat_line(1400.0), x, 1.0, 50.0).b_phasor_t
    np.testing.assert_allclose(b2, 3.5 * b1, rtol=1e-13, atol=1e-13 * np.abs(b2).max())


def test_superposition_of_conductors():
    x, y = np.linspace(-40, 40, 81), np.full(81, 1.5)
    xc, yc, cur = np.array([-6.0, 0.0, 6.0]), np.array([14.0, 14.0, 14.0]), 800.0 * SEQ
    total = flux_density_phasors(x, y, xc, yc, cur)
    parts = sum(flux_density_phasors(x, y, xc[k:k + 1], yc[k:k + 1], cur[k:k + 1]) for k in range(3))
    np.testing.assert_allclose(total, parts, rtol=1e-13, atol=1e-14 * np.abs(total).max())


def test_scaling_current_and_geometry_together_leaves_b_unchanged():
    # B(a I, a geometry) at a x = B(I, geometry) at x  (mu0 I / (2 pi r) is homogeneous of degree 0)
    x = np.linspace(-40, 40, 81)
    a = 3.7
    b1 = evaluate_cross_section(flat_line(1000.0), x, 1.0, 50.0).b_phasor_t
    b2 = evaluate_cross_section(flat_line(a * 1000.0, scale=a), a * x, a * 1.0, 50.0).b_phasor_t
    np.testing.assert_allclose(b2, b1, rtol=1e-12, atol=1e-12 * np.abs(b1).max())


def test_far_field_decay():
    # net current: |B| ~ 1/r exactly; balanced set (zero net current): |B| ~ 1/r^2 far away
    r = np.array([2e3, 4e3])
    one = np.abs(flux_density_phasors(r, np.zeros(2), [0.0], [14.0], [1000.0]))
    ratio_one = np.linalg.norm(one[1]) / np.linalg.norm(one[0])
    assert ratio_one == pytest.approx(0.5, rel=1e-4)
    bal = flux_density_phasors(r, np.zeros(2), [-6.0, 0.0, 6.0], [14.0] * 3, 1000.0 * SEQ)
    ratio_bal = np.linalg.norm(bal[1]) / np.linalg.norm(bal[0])
    assert ratio_bal == pytest.approx(0.25, rel=1e-2)


# ----------------------------------------------------------------------------- Deri image

@pytest.mark.parametrize(
    "f_hz, rho, p_re",
    # Deri et al., IEEE Trans. PAS-100(8):3686-3693, 1981 (from memory): values derived from its formula (2 decimals)
    [(50.0, 10.0, 112.54), (50.0, 100.0, 355.88), (50.0, 1000.0, 1125.40),
     (60.0, 10.0, 102.73), (60.0, 100.0, 324.87), (60.0, 1000.0, 1027.34)],
    ids=["50Hz-10", "50Hz-100", "50Hz-1000", "60Hz-10", "60Hz-100", "60Hz-1000"],
)
def test_complex_depth_against_table_and_skin_depth(f_hz, rho, p_re):
    p = complex_depth_m(rho, f_hz)
    assert p.real == pytest.approx(p_re, abs=0.006)
    assert p.imag == pytest.approx(-p_re, abs=0.006)
    # independent form: p = (1 - j) delta / 2, skin depth delta = sqrt(2 rho / (omega mu0))
    delta = math.sqrt(2 * rho / (2 * math.pi * f_hz * sc.mu_0))
    assert abs(p - (1 - 1j) * delta / 2) <= 1e-12 * delta


def test_earth_return_correction_vanishes_for_very_resistive_soil():
    x = np.linspace(-50, 50, 21)
    y = np.ones_like(x)
    args = (x, y, [0.0], [14.0], [1000.0])
    b0 = flux_density_phasors(*args)
    b_hi = flux_density_phasors(*args, complex_depth_m=complex_depth_m(1e14, 50.0))
    np.testing.assert_allclose(b_hi, b0, rtol=0, atol=1e-6 * np.abs(b0).max())
    # ordinary soil changes a single conductor's field noticeably (image ~1 km away)
    b_100 = flux_density_phasors(*args, complex_depth_m=complex_depth_m(100.0, 50.0))
    assert np.abs(b_100 - b0).max() > 1e-3 * np.abs(b0).max()


def test_earth_return_correction_is_negligible_for_a_balanced_set():
    x = np.linspace(-50, 50, 21)
    y = np.ones_like(x)
    args = (x, y, [-6.0, 0.0, 6.0], [14.0] * 3, 1000.0 * SEQ)
    b0 = flux_density_phasors(*args)
    b_100 = flux_density_phasors(*args, complex_depth_m=complex_depth_m(100.0, 50.0))
    # images of a balanced set sit together ~1 km down and cancel to second order in
    # (conductor spacing / |p|): relative change well below 1e-3
    assert np.abs(b_100 - b0).max() < 1e-3 * np.abs(b0).max()


def test_earth_return_confines_the_far_field_of_a_single_conductor():
    # With earth return (Carson/Deri) the current and its return form a pair, so far
    # beyond |p| the field falls like 1/r^2 instead of 1/r (physical consequence of the model).
    p = complex_depth_m(10.0, 50.0)   # |p| = 159 m
    r = np.array([2e5, 4e5])
    b = flux_density_phasors(r, np.zeros(2), [0.0], [14.0], [1000.0], complex_depth_m=p)
    ratio = np.linalg.norm(b[1]) / np.linalg.norm(b[0])
    assert ratio == pytest.approx(0.25, rel=1e-2)


def test_cross_section_applies_deri_only_when_resistivity_given():
    section = flat_line(labels=("L1", "N", "N"))   # unbalanced: one phase, two idle neutrals
    x = np.linspace(-30, 30, 13)
    plain = evaluate_cross_section(section, x, 1.0, 50.0)
    deri = evaluate_cross_section(section, x, 1.0, 50.0, soil_resistivity_ohm_m=100.0)
    ref = flux_density_phasors(x, np.ones_like(x), [-6.2, -5.8], [14.0, 14.0], [500.0, 500.0],
                               complex_depth_m=complex_depth_m(100.0, 50.0))
    np.testing.assert_allclose(deri.b_phasor_t, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())
    assert np.abs(deri.b_phasor_t - plain.b_phasor_t).max() > 1e-3 * np.abs(plain.b_phasor_t).max()
    assert any("Deri" in a for a in deri.assumptions)
    assert not any("Deri" in a for a in plain.assumptions)
