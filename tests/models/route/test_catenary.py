"""Catenary of one span: handbook formulas, uneven supports, conductor length.

Independent references, named at each check:
* engineering handbook formulas and the worked example quoted in
  a worked example at https://www.scienceaq.com/Article/Physics/4823.html (secondary source; parabolic sag wL^2/(8H); exact catenary
  values DERIVED there);
* the catenary built directly from its definition z = C cosh((x - a)/C) + const with
  a chosen low point a, integrated/minimised numerically with scipy.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize

from models.errors import GeometryError
from models.route.catenary import (
    CatenarySpan,
    catenary_constant_from_sag,
    catenary_height_m,
    conductor_length_m,
    level_span_sag_m,
    low_point_x_m,
    midspan_sag_m,
    parabolic_sag_m,
)

G = 9.80665  # standard gravity [m/s^2] (scipy.constants.g)


def test_worked_example_parabolic_and_exact():
    # worked example, https://www.scienceaq.com/Article/Physics/4823.html (secondary source): 1 kg/m, 10,000 kg tension, 500 m span
    # -> parabolic sag (1)(500^2)/(8)(10,000) = 3.125 m.  kg-force units cancel in C = H/w.
    assert parabolic_sag_m(500.0, 1.0 * G, 10_000.0 * G) == pytest.approx(3.125, rel=1e-15)
    # Exact catenary for the same case, derived from the exact catenary: D = 3.12516 m, L_c = 500.05208 m.
    c = 10_000.0
    assert level_span_sag_m(500.0, c) == pytest.approx(3.12516, abs=5e-6)
    assert conductor_length_m(500.0, 0.0, c) == pytest.approx(500.05208, abs=5e-6)
    # Handbook series L + w^2 L^3 / (24 H^2) (catenary of a uniform flexible cable, common practice (any statics text)); the next term of the
    # sinh series, L^5 / (1920 C^4) = 1.6e-6 m, bounds the difference.
    assert conductor_length_m(500.0, 0.0, c) == pytest.approx(500.0 + 500.0**3 / (24 * c**2), abs=2e-6)


def test_si_example():
    # an SI example derived from the exact catenary: w = 15.897 N/m (1.621 kg/m), H = 25 kN, L = 350 m,
    # C = 1572.67 m, parabolic 9.7367 m, catenary 9.7467 m.
    w, h, span = 1.621 * G, 25_000.0, 350.0
    s = CatenarySpan.from_tension(span, 0.0, h, w)
    assert s.catenary_constant_m == pytest.approx(1572.67, abs=0.01)
    assert parabolic_sag_m(span, w, h) == pytest.approx(9.7367, abs=1e-4)
    assert s.midspan_sag_m == pytest.approx(9.7467, abs=1e-4)
    # and the inverse: the sag gives back C
    assert catenary_constant_from_sag(span, 0.0, s.midspan_sag_m) == pytest.approx(h / w, rel=1e-12)


def test_exact_formula_matches_definition():
    # Handbook: y(x) = C (cosh(x/C) - 1) with the low point as origin (catenary of a uniform flexible cable, common practice (any statics text));
    # level-span sag D = C (cosh(L/2C) - 1) evaluated here with math.cosh directly.
    for span, c in [(100.0, 50.0), (300.0, 1200.0), (1000.0, 3000.0)]:
        assert level_span_sag_m(span, c) == pytest.approx(c * (math.cosh(span / (2 * c)) - 1), rel=1e-12)
        x = np.linspace(0.0, span, 11)
        ref = c * (np.cosh((x - span / 2) / c) - 1) - c * (math.cosh(span / (2 * c)) - 1)
        np.testing.assert_allclose(catenary_height_m(x, span, 0.0, c), ref, rtol=0, atol=1e-9 * span)


@pytest.mark.parametrize(
    "span, c, a",
    [
        (300.0, 1000.0, 100.0),  # low point inside, nearer the first support
        (300.0, 1000.0, 260.0),  # nearer the second support
        (250.0, 600.0, -80.0),  # low point before the span (first support much lower)
        (400.0, 900.0, 520.0),  # low point beyond the span
    ],
)
def test_uneven_supports_against_the_catenary_itself(span, c, a):
    # Independent construction: the catenary through a chosen low point a,
    # z(x) = C cosh((x - a)/C) - C cosh(a/C), so that z(0) = 0 and dh = z(L).
    def z(x):
        return c * np.cosh((x - a) / c) - c * math.cosh(a / c)

    dh = float(z(span))
    # Low point, closed form x_low = L/2 - C asinh(dh / (2 C sinh(L/2C))) (derived in the module).
    assert low_point_x_m(span, dh, c) == pytest.approx(a, abs=1e-9 * span)
    # Heights along the span.
    x = np.linspace(0.0, span, 21)
    np.testing.assert_allclose(catenary_height_m(x, span, dh, c), z(x), rtol=0, atol=1e-9 * span)
    # Mid-span sag below the chord, from the definition.
    sag_ref = dh / 2 - float(z(span / 2))
    assert midspan_sag_m(span, dh, c) == pytest.approx(sag_ref, rel=1e-10)
    # C recovered from that sag and the support heights.
    assert catenary_constant_from_sag(span, dh, sag_ref) == pytest.approx(c, rel=1e-9)
    # Arc length: numerical quadrature of sqrt(1 + z'^2) (scipy.integrate.quad).
    length_ref, _ = integrate.quad(lambda t: math.sqrt(1 + math.sinh((t - a) / c) ** 2), 0.0, span,
                                   epsabs=1e-12, epsrel=1e-13)
    assert conductor_length_m(span, dh, c) == pytest.approx(length_ref, rel=1e-12)
    # Lowest point of the conductor in the span: numerical minimisation (scipy.optimize).
    res = optimize.minimize_scalar(lambda t: float(z(t)), bounds=(0.0, span), method="bounded",
                                   options={"xatol": 1e-10})
    lowest = CatenarySpan(span, dh, c).lowest_height_m
    assert lowest == pytest.approx(min(res.fun, 0.0, dh), abs=1e-7)


def test_conductor_hangs_below_the_chord_and_low_point_moves_downhill():
    span = 300.0
    c = catenary_constant_from_sag(span, 30.0, 8.0)
    x = np.linspace(0.0, span, 301)
    z = catenary_height_m(x, span, 30.0, c)
    assert np.all(z <= 30.0 * x / span + 1e-12)
    # second support higher -> low point nearer the first support (common practice: it moves downhill)
    assert low_point_x_m(span, 30.0, c) < span / 2
    assert low_point_x_m(span, -30.0, c) == pytest.approx(span - low_point_x_m(span, 30.0, c), rel=1e-12)


def test_taut_limit_is_the_parabola_and_zero_sag_the_chord():
    # For C -> inf the catenary tends to the parabola 4 D x (L - x) / L^2 below the chord (handbook
    # parabolic approximation); the relative difference is O((L/C)^2).
    span, sag = 300.0, 1e-4
    c = catenary_constant_from_sag(span, 0.0, sag)
    assert c == pytest.approx(span**2 / (8 * sag), rel=1e-6)
    x = np.linspace(0.0, span, 7)
    np.testing.assert_allclose(catenary_height_m(x, span, 0.0, c), -4 * sag * x * (span - x) / span**2,
                               rtol=1e-6, atol=1e-15)
    assert math.isinf(catenary_constant_from_sag(span, 5.0, 0.0))
    straight = CatenarySpan(span, 5.0, math.inf)
    assert straight.midspan_sag_m == 0.0
    assert straight.length_m == pytest.approx(math.hypot(span, 5.0), rel=1e-15)
    np.testing.assert_allclose(straight.height_m(x), 5.0 * x / span)


def test_curvature_bound():
    s = CatenarySpan(300.0, 20.0, 800.0)
    x = np.linspace(0.0, 300.0, 3001)
    z2 = np.cosh((x - s.low_point_x_m) / 800.0) / 800.0  # z'' of the catenary
    assert s.curvature_bound_per_m() == pytest.approx(z2.max(), rel=1e-12)


@pytest.mark.parametrize(
    "span, dh, sag, field",
    [
        pytest.param(300.0, 0.0, -1.0, "sag_m", id="negative-sag"),
        pytest.param(300.0, 0.0, math.nan, "sag_m", id="nan-sag"),
        pytest.param(0.0, 0.0, 1.0, "span_m", id="zero-span"),
    ],
)
def test_invalid_sag(span, dh, sag, field):
    with pytest.raises(GeometryError, match=field) as info:
        catenary_constant_from_sag(span, dh, sag)
    assert info.value.field == field


@settings(max_examples=60, deadline=None)
@given(span=st.floats(20.0, 1500.0), slope=st.floats(-0.4, 0.4), sag_ratio=st.floats(1e-5, 0.12))
def test_sag_round_trip_and_geometry_invariants(span, slope, sag_ratio):
    # Self-consistency of the closed forms over a wide range (property-based, hypothesis):
    # the solved C reproduces the sag, the curve passes through both attachments, hangs below
    # the chord, and is longer than the chord.
    dh, sag = slope * span, sag_ratio * span
    c = catenary_constant_from_sag(span, dh, sag)
    s = CatenarySpan(span, dh, c)
    assert s.midspan_sag_m == pytest.approx(sag, rel=1e-9)
    assert s.height_m(0.0) == pytest.approx(0.0, abs=1e-9 * span)
    assert s.height_m(span) == pytest.approx(dh, abs=1e-9 * span)
    x = np.linspace(0.0, span, 33)
    assert np.all(s.height_m(x) <= dh * x / span + 1e-9 * span)
    assert s.length_m > math.hypot(span, dh)
    assert s.lowest_height_m <= min(0.0, dh) + 1e-12 * span
