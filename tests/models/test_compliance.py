"""Compliance evaluation: exposure index, margins, compliance distances, multi-frequency sums.

Field results here are synthetic FieldResult objects built from analytic shapes whose
limit crossings are computed by hand (triangles, where linear interpolation is exact;
a Lorentzian 1/(1 + (x/a)^2), crossing at a*sqrt(B0/L - 1)).  Published vectors: the
Cyprus measurement report, and the harmonic sum by ICNIRP 2010 eqs. (4)/(5) with the Table 4 values
(official text, see docs/sources.md). No published numeric example of the sum was found.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from models.catalogue import custom_threshold, thresholds_for
from models.compliance import (
    compliance_distances,
    evaluate_compliance,
    harmonic_exposure_index,
    multi_frequency_exposure_index,
)
from models.errors import CatalogueError, EngineInputError
from models.results import FieldResult


def profile_result(offset_m, b_t=None, e_v_per_m=None, frequency_hz=50.0, circular=False):
    """FieldResult on a lateral profile at 1 m height with the given resultant B and E.

    Linear polarisation puts the whole value on the vertical component; ``circular`` splits it
    into two equal components 90 degrees apart (resultant unchanged, maximum = resultant/sqrt(2)).
    """
    x = np.asarray(offset_m, dtype=float)
    n = x.size
    points = np.column_stack([x, np.ones(n)])

    def phasors(values):
        v = np.zeros(n) if values is None else np.broadcast_to(np.asarray(values, dtype=float), (n,))
        if circular:
            return np.column_stack([v / math.sqrt(2), 1j * v / math.sqrt(2)])
        return np.column_stack([np.zeros(n), v]).astype(complex)

    return FieldResult(points, frequency_hz, phasors(e_v_per_m), phasors(b_t))


def b_limit(value_ut, frequency_hz=50.0):
    return custom_threshold("test-limit", "B", value_ut, "uT", frequency_hz)


# --------------------------------------------------------------------------- published vectors


@pytest.mark.parametrize(
    ("quantity", "value", "frequency_hz", "percent"),
    [
        # Cyprus measurement report (fosscy.eu emfmap measurement report, secondary source):
        # https://fosscy.eu/projects/emfmap/emf-nicosia/emf-high-voltage-power-lines-delphon-strt-geri-nicosia-03012017.php
        # columns: measured value | frequency | "ICNIRP General Public (%)", printed to 0.01 %.
        ("B", 1.52e-6, 51.0, 1.55),
        ("B", 1.52e-6, 50.0, 1.52),
        ("E", 258.35, 51.0, 5.27),
        ("E", 252.80, 50.0, 5.06),
    ],
)
def test_cyprus_report_percentages_icnirp_1998_public(quantity, value, frequency_hz, percent):
    kwargs = {"b_t": value} if quantity == "B" else {"e_v_per_m": value}
    result = profile_result([0.0], frequency_hz=frequency_hz, **kwargs)
    thresholds = [t for t in thresholds_for(["icnirp-1998-public"], frequency_hz) if t.quantity == quantity]
    (c,) = evaluate_compliance(result, thresholds)
    assert 100 * c.exposure_index == pytest.approx(percent, abs=0.005)
    assert c.passes


def test_harmonic_sum_by_the_icnirp_2010_rule():
    # ICNIRP 2010, Health Phys. 99(6):818-836, eq. (5) p. 829 (official text): sum_j H_j/H_R,j <= 1, with
    # Table 4's B = 2e-4 T at 50 and 150 Hz (ratios of B equal ratios of H in air).  50 µT at 50 Hz +
    # 10 µT at 150 Hz: 50/200 + 10/200 = 0.30.  With 1999/519/EC Annex III's 5/f µT (f in kHz, secondary):
    # 50/100 + 10/(5/0.15) = 0.80.  These are the rule applied by hand to printed table values; no
    # published worked example of the sum was found (see docs/sources.md).
    components = [(50.0, 50e-6), (150.0, 10e-6)]
    assert harmonic_exposure_index("icnirp-2010-public", "B", components) == pytest.approx(0.30, rel=1e-12)
    assert harmonic_exposure_index("icnirp-1998-public", "B", components) == pytest.approx(0.80, rel=1e-12)


def test_multi_frequency_mapping_and_sequence_agree():
    ts = {f: thresholds_for(["icnirp-2010-public"], f)[1] for f in (50.0, 150.0)}
    components = [(50.0, 50e-6), (150.0, 10e-6)]
    by_map = multi_frequency_exposure_index(components, ts)
    by_seq = multi_frequency_exposure_index(components, [ts[50.0], ts[150.0]])
    assert by_map == by_seq == pytest.approx(0.30, rel=1e-12)
    # Linear in the amplitudes (the worst case, phases aligned): doubling every component doubles the sum.
    assert multi_frequency_exposure_index([(f, 2 * v) for f, v in components], ts) == pytest.approx(0.60, rel=1e-12)


def test_multi_frequency_errors():
    ts = {t.frequency_hz: t for t in thresholds_for(["icnirp-2010-public"], 50.0)}  # last one (B) wins
    with pytest.raises(CatalogueError, match="150"):
        multi_frequency_exposure_index([(50.0, 1e-6), (150.0, 1e-6)], ts)
    e50, b50 = thresholds_for(["icnirp-2010-public"], 50.0)
    with pytest.raises(CatalogueError, match="quantities"):
        multi_frequency_exposure_index([(50.0, 1.0), (50.0, 1e-6)], [e50, b50])
    with pytest.raises(CatalogueError, match="paired"):
        multi_frequency_exposure_index([(60.0, 1e-6)], [b50])
    with pytest.raises(EngineInputError):
        multi_frequency_exposure_index([], [])
    with pytest.raises(EngineInputError):
        multi_frequency_exposure_index([(50.0, -1e-6)], [b50])


# --------------------------------------------------------------------------- index and margin


def test_index_margin_and_quantity_selection():
    # Different E and B shapes: E thresholds must read E, B thresholds B.
    x = np.array([-10.0, 0.0, 10.0])
    result = profile_result(x, b_t=[10e-6, 40e-6, 20e-6], e_v_per_m=[1000.0, 2000.0, 6000.0])
    e_lim = custom_threshold("e5", "E", 5, "kV/m", 50.0)
    b_lim = custom_threshold("b100", "B", 100, "uT", 50.0)
    ce, cb = evaluate_compliance(result, [e_lim, b_lim])
    assert (ce.max_value_si, ce.max_index, ce.passes) == (pytest.approx(6000.0), 2, False)
    assert ce.exposure_index == pytest.approx(1.2, rel=1e-12)
    assert ce.margin_si == pytest.approx(-1000.0, rel=1e-12)
    assert (cb.max_value_si, cb.max_index, cb.passes) == (pytest.approx(40e-6), 1, True)
    assert cb.exposure_index == pytest.approx(0.4, rel=1e-12)
    assert cb.margin_si == pytest.approx(60e-6, rel=1e-12)
    assert cb.distance_left_m is None and cb.distance_right_m is None  # no lateral profile given


def test_field_exactly_at_limit_passes():
    result = profile_result([-1.0, 0.0, 1.0], b_t=[50e-6, 100e-6, 50e-6])
    (c,) = evaluate_compliance(result, [b_limit(100)], lateral_offset_m=[-1.0, 0.0, 1.0])
    assert c.exposure_index == pytest.approx(1.0, rel=1e-12) and c.passes
    assert (c.distance_left_m, c.distance_right_m) == (0.0, 0.0)


def test_maximum_versus_resultant():
    # Circular polarisation: resultant = sqrt(2) * maximum (emfs.info ellipse page, SEEN in
    # polarisation-ellipse definitions, IEEE Std 644 terms (from memory); resultant^2 = max^2 + min^2).
    result = profile_result([0.0], b_t=100e-6, circular=True)
    (res,) = evaluate_compliance(result, [b_limit(100)])
    (mx,) = evaluate_compliance(result, [b_limit(100)], quantity_kind="maximum")
    assert res.max_value_si == pytest.approx(100e-6, rel=1e-12)
    assert mx.max_value_si == pytest.approx(100e-6 / math.sqrt(2), rel=1e-12)


def test_evaluate_errors():
    result = profile_result([0.0, 1.0], b_t=1e-6)
    with pytest.raises(EngineInputError) as info:
        evaluate_compliance(result, [b_limit(1)], quantity_kind="peak")
    assert info.value.field == "quantity_kind"
    with pytest.raises(EngineInputError) as info:
        evaluate_compliance(result, [b_limit(1)], lateral_offset_m=[0.0, 1.0, 2.0])
    assert info.value.field == "lateral_offset_m"
    with pytest.raises(CatalogueError) as info:
        evaluate_compliance(result, [b_limit(1), b_limit(1, frequency_hz=60.0)])
    assert info.value.field == "thresholds[1]"
    nan_result = profile_result([0.0, 1.0], b_t=[1e-6, math.nan])
    with pytest.raises(EngineInputError, match="finite"):
        evaluate_compliance(nan_result, [b_limit(1)])
    with pytest.raises(EngineInputError, match="finite"):
        evaluate_compliance(result, [b_limit(1)], lateral_offset_m=[0.0, math.nan])


# --------------------------------------------------------------------------- compliance distances


def test_triangle_crossing_is_exact():
    # v(x) = 100 - 5|x| µT, limit 40 µT: crossing at |x| = 12 m (by hand); the interpolant is exact
    # because the profile is linear between sample points (apex at a sample).
    x = np.arange(-30.0, 30.5, 1.5)
    b = np.maximum(100 - 5 * np.abs(x), 0) * 1e-6
    (c,) = evaluate_compliance(profile_result(x, b_t=b), [b_limit(40)], lateral_offset_m=x)
    assert c.distance_left_m == pytest.approx(12.0, abs=1e-12)
    assert c.distance_right_m == pytest.approx(12.0, abs=1e-12)
    assert c.distance_note == ""
    assert not c.passes and c.exposure_index == pytest.approx(2.5, rel=1e-12)


def test_lorentzian_crossing():
    # B(x) = B0 / (1 + ((x - x0)/a)^2), B0 = 300 µT, a = 8 m, x0 = 3 m, limit 100 µT:
    # crossings at x0 +/- a*sqrt(B0/L - 1) = 3 +/- 8*sqrt(2) -> right 14.3137 m, left 8.3137 m.
    a, x0, b0, lim = 8.0, 3.0, 300.0, 100.0
    x = np.linspace(-40.0, 40.0, 8001)  # 1 cm spacing
    b = b0 / (1 + ((x - x0) / a) ** 2) * 1e-6
    (c,) = evaluate_compliance(profile_result(x, b_t=b), [b_limit(lim)], lateral_offset_m=x)
    half = a * math.sqrt(b0 / lim - 1)
    # Chord error of linear interpolation on a 1 cm grid is far below 1 mm here.
    assert c.distance_right_m == pytest.approx(x0 + half, abs=1e-3)
    assert c.distance_left_m == pytest.approx(half - x0, abs=1e-3)


def test_never_exceeded():
    x = np.linspace(-50, 50, 101)
    b = 20e-6 / (1 + (x / 10) ** 2)
    left, right, note = compliance_distances(x, b, 100e-6)
    assert (left, right) == (0.0, 0.0)
    assert "left: limit not exceeded" in note and "right: limit not exceeded" in note


def test_exceeded_everywhere():
    x = np.linspace(-50, 50, 101)
    left, right, note = compliance_distances(x, np.full(x.shape, 2.0), 1.0)
    assert (left, right) == (None, None)
    assert note.count("widen the profile") == 2


def test_exceeded_at_one_profile_end():
    # Field rising to the right (e.g. profile stops short of a second line): right undetermined.
    x = np.arange(-20.0, 21.0, 1.0)
    v = np.maximum(x + 25.0, 0)  # limit 10 crossed at x = -15 (by hand); 45 > 10 at the right end x = 20
    left, right, note = compliance_distances(x, v, 10.0)
    assert left == pytest.approx(15.0, abs=1e-12)
    assert right is None
    assert "right: limit exceeded at the right profile end (|offset| 20 m); widen the profile" in note


def test_two_separate_humps_take_the_outermost_crossing():
    # Triangular humps centred at |x| = 10, v = 3 - ||x| - 10| (zero outside), limit 1:
    # exceeded for 8 < |x| < 12 and below the limit at the centre; distance 12 m on both sides.
    x = np.arange(-20.0, 21.0, 1.0)
    v = np.maximum(3 - np.abs(np.abs(x) - 10), 0)
    left, right, note = compliance_distances(x, v, 1.0)
    assert (left, right, note) == (pytest.approx(12.0, abs=1e-12), pytest.approx(12.0, abs=1e-12), "")
    # Unequal humps: right hump wider (slope 0.5) -> right crossing 10 + 4 = 14 m.
    v2 = np.where(x < 0, v, np.maximum(3 - 0.5 * np.abs(x - 10), 0))
    assert compliance_distances(x, v2, 1.0)[:2] == (pytest.approx(12.0), pytest.approx(14.0))


def test_exceeded_only_near_centre():
    x = np.arange(-10.0, 11.0, 1.0)
    v = np.maximum(4 - np.abs(x), 0)  # limit 1 -> crossing at |x| = 3
    assert compliance_distances(x, v, 1.0)[:2] == (pytest.approx(3.0), pytest.approx(3.0))


def test_unsorted_input_gives_the_same_answer():
    x = np.arange(-30.0, 30.5, 1.5)
    b = np.maximum(100 - 5 * np.abs(x - 3.0), 0) * 1e-6  # crossings at 3 +/- 12 -> right 15, left 9
    perm = np.random.default_rng(7).permutation(x.size)
    (c,) = evaluate_compliance(profile_result(x[perm], b_t=b[perm]), [b_limit(40)], lateral_offset_m=x[perm])
    assert c.distance_right_m == pytest.approx(15.0, abs=1e-12)
    assert c.distance_left_m == pytest.approx(9.0, abs=1e-12)
    assert x[perm][c.max_index] == 3.0  # max_index refers to the caller's point order


def test_single_point():
    # On the centre line: neither side extends beyond it.
    left, right, note = compliance_distances(np.array([0.0]), np.array([5.0]), 1.0)
    assert (left, right) == (None, None) and "does not extend" in note
    # One point right of centre, below the limit: right 0.0 (with the partial-coverage note); left unknown.
    left, right, note = compliance_distances(np.array([3.0]), np.array([0.5]), 1.0)
    assert (left, right) == (None, 0.0)
    assert "profile starts at |offset| 3 m" in note
    # One point right of centre, above the limit: exceeded at the profile end.
    assert compliance_distances(np.array([3.0]), np.array([5.0]), 1.0)[1] is None


def test_crossing_interpolated_across_the_centre_line():
    # Points at -1 (2x limit) and +1 (0.5x limit): the interpolant crosses at -1 + (1/1.5)*2 = +1/3 m
    # (by hand), so the right distance is 1/3 m although no right-side point exceeds.
    left, right, _ = compliance_distances(np.array([-1.0, 1.0]), np.array([2.0, 0.5]), 1.0)
    assert right == pytest.approx(1 / 3, abs=1e-12)
    assert left is None  # exceeded at the left profile end


def test_exceedance_only_on_the_other_side():
    x = np.arange(-10.0, 11.0, 1.0)
    v = np.maximum(3 - np.abs(x + 6), 0)  # exceeded for -8 < x < -4 only (limit 1)
    left, right, note = compliance_distances(x, v, 1.0)
    assert left == pytest.approx(8.0) and right == 0.0
    assert "right: limit not exceeded right of the centre line" in note


def test_repeated_offsets_use_the_largest_value():
    # Two heights on each vertical: the envelope (max) decides -> profile (-2, 0), (0, 3), (2, 1).
    # Limit 1 (a value equal to the limit is not an exceedance): right crossing 0 + (2/2)*2 = 2 m,
    # left crossing 0 + (2/3)*2 = 4/3 m (by hand).
    x = np.array([-2.0, -2.0, 0.0, 0.0, 2.0, 2.0])
    v = np.array([0.0, 0.0, 1.0, 3.0, 0.0, 1.0])
    assert compliance_distances(x, v, 1.0)[:2] == (pytest.approx(4 / 3, abs=1e-12), pytest.approx(2.0, abs=1e-12))


# --------------------------------------------------------------------------- properties and a physical profile


def _check_side(x, v, limit, d):
    """Check one side (x > 0 is "this side") of the definition in compliance_distances against np.interp."""
    if x.max() <= 0:
        assert d is None
        return
    end = int(np.argmax(x))
    if v[end] > limit:
        assert d is None
        return
    assert d is not None and d >= 0
    order = np.argsort(x)
    xs, vs = x[order], v[order]
    # Beyond d every sample is at or below the limit, and so is the interpolant at d.
    assert np.all(vs[xs > d] <= limit)
    if xs[0] <= d:
        assert np.interp(d, xs, vs) <= limit * (1 + 1e-9)
    if d > 0:
        # d is a crossing: the interpolant equals the limit there and some sample inside d exceeds it.
        assert np.interp(d, xs, vs) == pytest.approx(limit, rel=1e-9)
        assert np.any(vs[xs < d] > limit)
    elif xs[0] <= 0:
        assert np.interp(0.0, xs, vs) <= limit * (1 + 1e-9)


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.integers(-400, 400), min_size=1, max_size=25, unique=True),
    st.data(),
    st.floats(0.5, 9.5),
)
def test_distances_satisfy_the_definition(offsets_dm, data, limit):
    # Property check of the docstring definition d = sup{x >= 0 : v(x) > limit} against numpy's
    # linear interpolation (an independent implementation of the interpolant).
    x = np.array(offsets_dm, dtype=float) / 10.0
    v = np.array(data.draw(st.lists(st.floats(0, 10), min_size=x.size, max_size=x.size)))
    left, right, _ = compliance_distances(x, v, limit)
    _check_side(x, v, limit, right)
    _check_side(-x, v, limit, left)


def test_single_conductor_profile_crossing_from_amperes_law():
    # Ampere's law for an infinite straight conductor: |B| = mu0 I / (2 pi r).  Conductor at 12 m height
    # carrying 1000 A, profile at 1 m: r^2 = x^2 + 11^2, so B = L at |x| = sqrt((mu0 I / (2 pi L))^2 - 11^2).
    # With L = 10 µT: mu0 I/(2 pi L) = 20.0 m (mu0 = 4 pi e-7, the traditional value, fine at 1e-9), |x| = 16.703 m.
    mu0, current, dh, lim_t = 4e-7 * math.pi, 1000.0, 11.0, 10e-6
    x = np.linspace(-60.0, 60.0, 12001)
    r2 = x**2 + dh**2
    b = mu0 * current / (2 * math.pi * np.sqrt(r2))
    # Field direction perpendicular to the radius vector (single-phase phasor, real): (-(y - h), x) / r.
    bx = mu0 * current / (2 * math.pi) * dh / r2
    by = mu0 * current / (2 * math.pi) * x / r2
    result = FieldResult(np.column_stack([x, np.ones_like(x)]), 50.0,
                         np.zeros((x.size, 2), complex), np.column_stack([bx, by]).astype(complex))
    assert np.allclose(result.b_rms_t, b, rtol=1e-12)
    (c,) = evaluate_compliance(result, [b_limit(10)], lateral_offset_m=x)
    expected = math.sqrt((mu0 * current / (2 * math.pi * lim_t)) ** 2 - dh**2)
    assert c.distance_left_m == pytest.approx(expected, abs=1e-3)
    assert c.distance_right_m == pytest.approx(expected, abs=1e-3)
    assert c.max_value_si == pytest.approx(mu0 * current / (2 * math.pi * dh), rel=1e-12)
    assert result.points_m[c.max_index, 0] == 0.0


@pytest.mark.parametrize(
    ("x", "v", "limit", "field"),
    [
        pytest.param([0.0, 1.0], [1.0], 1.0, "lateral_offset_m", id="length"),
        pytest.param([], [], 1.0, "lateral_offset_m", id="empty"),
        pytest.param([0.0, math.inf], [1.0, 1.0], 1.0, "lateral_offset_m", id="inf-offset"),
        pytest.param([0.0, 1.0], [1.0, math.nan], 1.0, "values", id="nan-value"),
        pytest.param([0.0, 1.0], [1.0, 1.0], 0.0, "limit", id="zero-limit"),
        pytest.param([0.0, 1.0], [1.0, 1.0], math.nan, "limit", id="nan-limit"),
    ],
)
def test_compliance_distances_input_errors(x, v, limit, field):
    with pytest.raises(EngineInputError) as info:
        compliance_distances(np.array(x), np.array(v), limit)
    assert info.value.field == field
