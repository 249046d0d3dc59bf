"""Screens of single-core cables bonded at both ends (models.cable_screens) and their effect on B.

Checks against sources outside the project:
* trefoil, both ends bonded: screen current and loss factor against IEC 60287-1-1:2006,
  clause 2.3.1 (three single-core cables in trefoil, sheaths bonded at both ends):
  lambda1' = (R_s/R) / (1 + (R_s/X)^2), X = 2 omega 1e-7 ln(2 s / d) ohm/m, i.e.
  |I_s| = |I| X / sqrt(R_s^2 + X^2) (formulas from memory: the standard's text was not
  available to this project);
* flat formation without transposition, both ends bonded: the three loss factors of
  IEC 60287-1-1:2006, clause 2.3.3 (P = X + X_m, Q = X - X_m / 3, X_m = 2 omega 1e-7 ln 2;
  from memory, including which outer cable (lagging phase) takes the + sign);
* laws: Ampère's circuital law around one cable (mu0 (I_c + I_s)) and around the whole
  trench (mu0 sum I_c: the screen currents circulate); the limits R_s -> 0 (perfect
  screens cancel a trefoil's field outside the trench) and open screens (B equals the
  plain conductor result exactly);
* invariance of the solution under the arbitrary reference distance of the logarithms
  (the common drop V absorbs it), and linearity in the conductor currents.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import scipy.constants as sc

from models import evaluate_cross_section
from models.cable_screens import screen_currents, screen_transfer_matrix, with_screen_currents
from models.errors import GeometryError, LoadingError
from models.geometry import Bundle, CableScreen, Circuit, Conductor, CrossSection
from models.load_cases import apply_loading
from models.magnetic import flux_density_phasors
from models.sources import build_sources

F_HZ = 50.0
OMEGA = 2 * math.pi * F_HZ
SEQ = np.exp(1j * np.radians([0.0, -120.0, 120.0]))
CURRENT_A = 1000.0
R_SCREEN_OHM_PER_KM = 0.06        # an invented copper-wire screen
D_SCREEN_M = 0.092                # mean screen diameter
D_CONDUCTOR_M = 0.04


def trefoil(spacing_m=0.11, depth_m=1.3, x0_m=0.0):
    """Apex up, centroid at depth_m."""
    h = spacing_m * math.sqrt(3) / 2
    yc = -depth_m
    return [(x0_m - spacing_m / 2, yc - h / 3), (x0_m + spacing_m / 2, yc - h / 3), (x0_m, yc + 2 * h / 3)]


def flat(spacing_m=0.25, depth_m=1.3, x0_m=0.0):
    return [(x0_m - spacing_m, -depth_m), (x0_m, -depth_m), (x0_m + spacing_m, -depth_m)]


def cable_circuit(positions, bonding="both_ends", cid="c1", current_a=CURRENT_A, r=R_SCREEN_OHM_PER_KM):
    screen = None if bonding is None else CableScreen(bonding, r, D_SCREEN_M)
    return Circuit(cid, "underground", 132.0, current_a,
                   tuple(Conductor(lab, x, y) for lab, (x, y) in zip(("L1", "L2", "L3"), positions)),
                   Bundle(D_CONDUCTOR_M), screen=screen)


def screens(section):
    return screen_currents(section, build_sources(section), F_HZ)


def iec_x(spacing_m):
    # IEC 60287-1-1:2006 2.3.1: X = 2 omega 1e-7 ln(2 s / d) [ohm/m] (from memory)
    return 2 * OMEGA * 1e-7 * math.log(2 * spacing_m / D_SCREEN_M)


MU0_RATIO = sc.mu_0 / (4 * math.pi * 1e-7)   # the engine uses CODATA mu0; IEC writes 2e-7 for mu0 / 2 pi


# ----------------------------------------------------------------------------- IEC 60287-1-1


@pytest.mark.parametrize("spacing_m", [0.095, 0.11, 0.3])
def test_trefoil_screen_current_matches_iec_60287_loss_factor(spacing_m):
    sc_ = screens(CrossSection((cable_circuit(trefoil(spacing_m)),)))
    rs = R_SCREEN_OHM_PER_KM * 1e-3
    x = iec_x(spacing_m) * MU0_RATIO
    expected = CURRENT_A * x / math.hypot(rs, x)                       # |I_s| = |I| X / sqrt(Rs^2 + X^2)
    np.testing.assert_allclose(np.abs(sc_.screen_current_a), expected, rtol=1e-12)
    # phase: I_s = -j X / (Rs + j X) I  (same derivation)
    np.testing.assert_allclose(sc_.screen_current_a, -1j * x / (rs + 1j * x) * sc_.conductor_current_a, rtol=1e-12)
    r_conductor = 0.03e-3                                               # any conductor ac resistance [ohm/m]
    loss_factor = rs * np.abs(sc_.screen_current_a) ** 2 / (r_conductor * CURRENT_A ** 2)
    np.testing.assert_allclose(loss_factor, rs / r_conductor / (1 + (rs / x) ** 2), rtol=1e-12)


@pytest.mark.parametrize("spacing_m", [0.12, 0.25, 0.5])
def test_flat_untransposed_loss_factors_match_iec_60287(spacing_m):
    # IEC 60287-1-1:2006 2.3.3 (from memory): middle cable lambda11 = Rs/R Q^2/(Rs^2+Q^2); outer cables
    # Rs/R [0.75 P^2/(Rs^2+P^2) + 0.25 Q^2/(Rs^2+Q^2) +- 2 Rs P Q Xm / (sqrt3 (Rs^2+P^2)(Rs^2+Q^2))],
    # + for the outer cable carrying the lagging phase, - for the leading one.
    sc_ = screens(CrossSection((cable_circuit(flat(spacing_m)),)))
    rs, r = R_SCREEN_OHM_PER_KM * 1e-3, 0.025e-3
    x = iec_x(spacing_m) * MU0_RATIO
    xm = 2 * OMEGA * 1e-7 * math.log(2) * MU0_RATIO
    p, q = x + xm, x - xm / 3
    middle = rs / r * q ** 2 / (rs ** 2 + q ** 2)
    outer = rs / r * (0.75 * p ** 2 / (rs ** 2 + p ** 2) + 0.25 * q ** 2 / (rs ** 2 + q ** 2))
    cross = rs / r * 2 * rs * p * q * xm / (math.sqrt(3) * (rs ** 2 + p ** 2) * (rs ** 2 + q ** 2))
    loss = rs * np.abs(sc_.screen_current_a) ** 2 / (r * CURRENT_A ** 2)
    # L1 (0 deg) leads the middle L2 (-120 deg); L3 (+120 deg) lags it
    np.testing.assert_allclose(loss, [outer - cross, middle, outer + cross], rtol=1e-10)


# ----------------------------------------------------------------------------- laws and limits


def contour_integral(sources, cx, cy, radius, n=256):
    # closed line integral of B . dl on a circle (trapezoidal rule, spectrally accurate)
    t = np.linspace(0, 2 * math.pi, n, endpoint=False)
    px, py = cx + radius * np.cos(t), cy + radius * np.sin(t)
    b = flux_density_phasors(px, py, sources.x_m, sources.y_m, sources.current_a)
    dx, dy = -radius * np.sin(t), radius * np.cos(t)
    return np.sum(b[:, 0] * dx + b[:, 1] * dy) * 2 * math.pi / n


def test_ampere_around_one_cable_and_around_the_trench():
    # Ampère: closed integral of B . dl = mu0 * enclosed current (conductor plus its screen)
    c1 = cable_circuit(flat(0.3))
    c2 = cable_circuit(trefoil(0.1, x0_m=1.0), cid="c2", current_a=600.0)
    section = CrossSection((c1, c2))
    src = with_screen_currents(section, build_sources(section), F_HZ)
    plain = build_sources(section)
    sc_ = screens(section)
    for k in range(6):
        enclosed = contour_integral(src, src.x_m[k], src.y_m[k], 0.06)
        assert enclosed == pytest.approx(sc.mu_0 * (plain.current_a[k] + sc_.screen_current_a[k]), rel=1e-9)
        assert abs(sc_.screen_current_a[k]) > 0.1 * abs(plain.current_a[k])      # the screen matters
    whole = contour_integral(src, 0.5, -1.3, 3.0)
    assert abs(whole - sc.mu_0 * plain.current_a.sum()) < 1e-9 * sc.mu_0 * CURRENT_A   # screens circulate


def test_open_screens_give_exactly_the_plain_conductor_field():
    x = np.linspace(-10, 10, 41)
    plain = evaluate_cross_section(CrossSection((cable_circuit(flat(), bonding=None),)), x, 1.0, F_HZ)
    for bonding in ("single_point", "cross_bonded"):
        res = evaluate_cross_section(CrossSection((cable_circuit(flat(), bonding=bonding),)), x, 1.0, F_HZ)
        np.testing.assert_array_equal(res.b_phasor_t, plain.b_phasor_t)
        assert screens(CrossSection((cable_circuit(flat(), bonding=bonding),))) is None
    bonded = evaluate_cross_section(CrossSection((cable_circuit(flat()),)), x, 1.0, F_HZ)
    assert bonded.b_rms_t.max() < 0.9 * plain.b_rms_t.max()      # bonded screens lower B
    assert any("bonded at both ends" in a for a in bonded.assumptions)
    assert any("no screen and sheath" in a or "neglected" in a for a in plain.assumptions)


def test_perfect_and_resistive_screen_limits():
    x = np.linspace(-5, 5, 11)
    base = evaluate_cross_section(CrossSection((cable_circuit(trefoil(), bonding=None),)), x, 1.0, F_HZ)
    perfect = evaluate_cross_section(CrossSection((cable_circuit(trefoil(), r=1e-12),)), x, 1.0, F_HZ)
    lossy = evaluate_cross_section(CrossSection((cable_circuit(trefoil(), r=1e9),)), x, 1.0, F_HZ)
    # R_s -> 0: I_s -> -I_c (Lenz), nothing is left outside; R_s -> inf: no screen current
    assert perfect.b_rms_t.max() < 1e-9 * base.b_rms_t.max()
    np.testing.assert_allclose(lossy.b_phasor_t, base.b_phasor_t, rtol=1e-6, atol=1e-6 * base.b_rms_t.max())


def test_reference_distance_drops_out_and_currents_are_linear():
    pos = flat(0.2) + trefoil(0.1, x0_m=0.8)
    x, y = np.array(pos).T
    kw = dict(screened=[True] * 6, screen_radius_m=[0.046] * 6, screen_resistance_ohm_per_m=[6e-5] * 6,
              group=[0, 0, 0, 1, 1, 1], frequency_hz=F_HZ)
    t1 = screen_transfer_matrix(x, y, **kw)
    t2 = screen_transfer_matrix(x * 7.0, y * 7.0, **{**kw, "screen_radius_m": [0.046 * 7] * 6})
    # scaling every length by 7 = changing the 1 m reference distance to 1/7 m: same currents
    np.testing.assert_allclose(t2, t1, rtol=1e-12, atol=1e-14)
    # each bonding group's screen currents sum to zero for any conductor currents
    np.testing.assert_allclose(t1[:3].sum(axis=0), 0, atol=1e-12)
    np.testing.assert_allclose(t1[3:].sum(axis=0), 0, atol=1e-12)
    section = CrossSection((cable_circuit(flat(0.2)), cable_circuit(trefoil(0.1, x0_m=0.8), cid="c2")))
    scaled = apply_loading(section, current_scale=1.7)
    np.testing.assert_allclose(screens(scaled).screen_current_a, 1.7 * screens(section).screen_current_a, rtol=1e-12)


def test_evaluate_cross_section_uses_conductor_plus_screen_current():
    section = CrossSection((cable_circuit(flat()),))
    src = with_screen_currents(section, build_sources(section), F_HZ)
    x = np.linspace(-8, 8, 9)
    res = evaluate_cross_section(section, x, 0.5, F_HZ)
    np.testing.assert_allclose(res.b_phasor_t, flux_density_phasors(x, np.full(9, 0.5), src.x_m, src.y_m,
                                                                   src.current_a), rtol=1e-12)


# ----------------------------------------------------------------------------- input checks


def _with_screen(**kw):
    c = cable_circuit(flat())
    return dataclasses.replace(c, **kw)


@pytest.mark.parametrize("circuit, field, cls", [
    (_with_screen(screen=CableScreen("twice", 0.06, 0.09)), "cross_section.circuits[0].screen.bonding",
     GeometryError),
    (_with_screen(screen=CableScreen("both_ends", None, 0.09)),
     "cross_section.circuits[0].screen.resistance_ohm_per_km", LoadingError),
    (_with_screen(screen=CableScreen("both_ends", 0.06, None)), "cross_section.circuits[0].screen.mean_diameter_m",
     GeometryError),
    (_with_screen(screen=CableScreen("both_ends", -1.0, 0.09)),
     "cross_section.circuits[0].screen.resistance_ohm_per_km", LoadingError),
    (_with_screen(screen=CableScreen("both_ends", 0.06, 0.03)), "cross_section.circuits[0].screen.mean_diameter_m",
     GeometryError),
    (_with_screen(bundle=Bundle(0.03, 2, 0.06)), "cross_section.circuits[0].bundle.count", GeometryError),
    (_with_screen(kind="overhead", conductors=tuple(Conductor(p, x, 10.0) for p, x in (("L1", -3), ("L2", 0),
                                                                                        ("L3", 3)))),
     "cross_section.circuits[0].screen", GeometryError),
    (cable_circuit([(-0.045, -1.3), (0.045, -1.3), (0.2, -1.3)]), "cross_section.circuits[0].conductors[1]",
     GeometryError),                                                  # screens (0.092 m) overlap at 0.09 m
])
def test_bad_screen_input_names_the_field(circuit, field, cls):
    with pytest.raises(cls) as err:
        evaluate_cross_section(CrossSection((circuit,)), [0.0], 1.0, F_HZ)
    assert err.value.field == field


def test_single_point_screen_needs_no_resistance():
    c = _with_screen(screen=CableScreen("single_point"))
    res = evaluate_cross_section(CrossSection((c,)), [0.0], 1.0, F_HZ)
    assert any("single-point bonded" in a for a in res.assumptions)


def test_formation_positions_match_the_formation_geometry():
    # flat: equal spacing on one depth; trefoil: equilateral triangle (common practice), centroid at the depth
    from models.cable_screens import formation_positions

    np.testing.assert_allclose(formation_positions("trefoil", 0.11, 1.3, 0.4), trefoil(0.11, 1.3, 0.4), atol=1e-15)
    np.testing.assert_allclose(formation_positions("flat", 0.25, 1.3), flat(0.25, 1.3), atol=1e-15)
    with pytest.raises(ValueError, match="formation"):
        formation_positions("square", 0.1, 1.0)
