"""Harmonics (models.harmonics): fields at each harmonic frequency and the multiple-frequency sum rule.

References: Ampère's law for a long straight wire, B = mu0 I / (2 pi r) (mu0 from
scipy.constants), summed over in-phase (zero-sequence) currents; superposition
(linearity of the quasi-static fields in currents and voltages); the ICNIRP 2010
multiple-frequency rule sum_j X_j / X_R,j <= 1 (ICNIRP 2010, Health Phys. 99(6):818-836,
from memory) with reference levels typed from ICNIRP 2010 Table 4 (general public:
E 5 kV/m at 50 Hz, 250/f kV/m from 50 Hz to 3 kHz; B 200 µT from 25 Hz to 400 Hz; table
number from memory) and ICNIRP 1998 Table 7 (general public: E 250/f kV/m and B 5/f mT
from 25 Hz to 800 Hz; table number from memory).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import scipy.constants

from models.catalogue import custom_threshold, get_level, list_levels, thresholds_for
from models.errors import LoadingError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, Harmonic
from models.harmonics import evaluate_harmonics, harmonic_compliance, harmonic_line, sum_rule
from models.section_sets import SectionProfile, SectionRightOfWay, SectionSets, evaluate_section

SETS = SectionSets(SectionProfile(-30.0, 30.0, 2.5, 1.0), right_of_way=SectionRightOfWay(-20.0, 20.0))
XS = (-5.0, 0.0, 5.0)


def circuit(cid="c1", x0=0.0, harmonics=None, current_a=800.0, voltage_kv=132.0) -> Circuit:
    return Circuit(cid, "overhead", voltage_kv, current_a,
                   tuple(Conductor(p, x0 + x, 14.0) for p, x in zip(("L1", "L2", "L3"), XS)),
                   Bundle(0.03), harmonics=harmonics)


def evaluate(line, f):
    return evaluate_section(line, f, SETS)


def test_triplen_harmonic_is_zero_sequence_and_matches_amperes_law():
    # 3rd harmonic, 10 % current: every phase carries 80 A in phase (n x 0, n x -120, n x 120 deg)
    line = CrossSection((circuit(harmonics=(Harmonic(3, 0.1, 0.0),)),))
    loaded = harmonic_line(line, 3)
    assert [k.current.magnitude_a for k in loaded.circuits[0].conductors] == pytest.approx([80.0] * 3)
    assert [math.cos(math.radians(k.current.angle_deg)) for k in loaded.circuits[0].conductors] == pytest.approx([1.0] * 3)
    [(n, ev)] = evaluate_harmonics(line, 50.0, evaluate)
    assert n == 3 and ev.frequency_hz == 150.0
    pts = ev.combined.points_m
    # Ampère: in-phase currents, B vectors add (direction perpendicular to the radius), free space (no soil given)
    b = np.zeros((len(pts), 2))
    for x in XS:
        d = pts - np.array([x, 14.0])
        r2 = (d ** 2).sum(axis=1)
        b += scipy.constants.mu_0 * 80.0 / (2 * np.pi * r2)[:, None] * np.column_stack([-d[:, 1], d[:, 0]])
    np.testing.assert_allclose(ev.combined.b_rms_t, np.hypot(b[:, 0], b[:, 1]), rtol=1e-9)


def test_fifth_harmonic_is_negative_sequence():
    # n x (0, -120, 120) = (0, -600, 600) = (0, 120, -120) deg: the reverse-sequence fundamental scaled by the fraction
    line = CrossSection((circuit(harmonics=(Harmonic(5, 0.2, 0.1),)),))
    [(_, ev)] = evaluate_harmonics(line, 50.0, evaluate)
    reverse = CrossSection((dataclasses.replace(circuit(current_a=160.0, voltage_kv=13.2), reverse_sequence=True),))
    ref = evaluate_section(reverse, 250.0, SETS)
    np.testing.assert_allclose(ev.combined.b_rms_t, ref.combined.b_rms_t, rtol=1e-9)
    np.testing.assert_allclose(ev.combined.e_rms_v_per_m, ref.combined.e_rms_v_per_m, rtol=1e-9)


def test_harmonic_fields_are_linear_in_the_fractions():
    one = CrossSection((circuit(harmonics=(Harmonic(7, 0.05, 0.01),)),))
    two = CrossSection((circuit(harmonics=(Harmonic(7, 0.10, 0.02),)),))
    [(_, a)], [(_, b)] = evaluate_harmonics(one, 50.0, evaluate), evaluate_harmonics(two, 50.0, evaluate)
    np.testing.assert_allclose(b.combined.b_rms_t, 2 * a.combined.b_rms_t, rtol=1e-12)
    np.testing.assert_allclose(b.combined.e_rms_v_per_m, 2 * a.combined.e_rms_v_per_m, rtol=1e-12)


def test_a_circuit_without_the_order_contributes_nothing_and_each_order_is_evaluated_once():
    calls = []

    def counting(line, f):
        calls.append(f)
        return evaluate(line, f)

    west = circuit("west", -20.0, harmonics=(Harmonic(5, 0.1, 0.0), Harmonic(3, 0.05, 0.0)))
    east = circuit("east", 20.0, harmonics=(Harmonic(3, 0.05, 0.0),))
    results = dict(evaluate_harmonics(CrossSection((west, east)), 50.0, counting))
    assert calls == [150.0, 250.0] and sorted(results) == [3, 5]
    # superposition: the 5th-harmonic field of both circuits = that of the west circuit alone
    alone = dict(evaluate_harmonics(CrossSection((west,)), 50.0, evaluate))
    np.testing.assert_allclose(results[5].combined.b_rms_t, alone[5].combined.b_rms_t, rtol=1e-12)


def test_summed_index_equals_the_icnirp_formula_by_hand():
    line = CrossSection((circuit(harmonics=(Harmonic(3, 0.15, 0.03), Harmonic(5, 0.10, 0.02))),))
    fundamental = evaluate(line, 50.0)
    harmonics = evaluate_harmonics(line, 50.0, evaluate)
    limits = thresholds_for(["icnirp-2010-public", "icnirp-1998-public"], 50.0)
    judged = {(h.threshold.level_id, h.threshold.quantity): h for h in harmonic_compliance(fundamental, harmonics,
                                                                                              limits)}
    # reference levels typed from the tables (see the module docstring), SI
    typed = {("icnirp-2010-public", "E"): (5000.0, 250e3 / 150, 250e3 / 250),
             ("icnirp-2010-public", "B"): (200e-6, 200e-6, 200e-6),
             ("icnirp-1998-public", "E"): (250e3 / 50, 250e3 / 150, 250e3 / 250),
             ("icnirp-1998-public", "B"): (5e-3 / 50, 5e-3 / 150, 5e-3 / 250)}
    every = fundamental.everywhere_rows()
    evs = [fundamental] + [ev for _, ev in harmonics]
    for key, levels in typed.items():
        q = key[1]
        fields_ = [(ev.combined.e_rms_v_per_m if q == "E" else ev.combined.b_rms_t)[every] for ev in evs]
        by_hand = sum(f / x for f, x in zip(fields_, levels))
        h = judged[key]
        assert h.rule in ("icnirp-2010-sum", "icnirp-1998-sum")
        assert h.summed_index == pytest.approx(float(by_hand.max()), rel=1e-12)
        assert h.fundamental_index == pytest.approx(float((fields_[0] / levels[0]).max()), rel=1e-12)
        assert sum(c.ratio for c in h.components) == pytest.approx(h.summed_index, rel=1e-12)
        assert [c.limit_si for c in h.components] == pytest.approx(list(levels), rel=1e-12)
        assert h.passes == (h.summed_index <= 1.0) and h.summed_index > h.fundamental_index


def test_single_frequency_and_custom_limits_are_not_assessed_and_edge_levels_use_the_edges():
    line = CrossSection((circuit(harmonics=(Harmonic(3, 0.1, 0.0),)),))
    fundamental = evaluate(line, 60.0)
    harmonics = evaluate_harmonics(line, 60.0, evaluate)
    limits = thresholds_for(["us-ny-psc-row-edge"], 60.0) + [custom_threshold("policy", "B", 0.4, "uT", 60.0)]
    out = harmonic_compliance(fundamental, harmonics, limits)
    assert [h.rule for h in out] == ["not-assessed", "not-assessed"]
    assert all(h.summed_index is None and h.passes is None for h in out)
    assert out[0].basis == "right_of_way_edges"
    edge = fundamental.by_role("right_of_way").field.b_rms_t.max()
    assert out[0].fundamental_index == pytest.approx(edge / 20e-6, rel=1e-12)


def test_every_catalogue_entry_states_its_rule():
    for level in list_levels():
        for qd in level.quantities:
            f = qd.f_min_hz if qd.f_min_hz == qd.f_max_hz else max(qd.f_min_hz, 50.0)
            t = [x for x in thresholds_for([level.id], f) if x.quantity == qd.quantity][0]
            rule, note = sum_rule(t)
            assert note
            assert (rule == "not-assessed") == (qd.f_min_hz == qd.f_max_hz), level.id
    assert sum_rule(thresholds_for(["eu-2013-35-low-al"], 50.0)[0])[0] == "default-sum"
    assert get_level("icnirp-2010-public").quantity("B") is not None


def test_a_harmonic_above_the_engine_range_names_the_order():
    line = CrossSection((circuit(), circuit("c2", 30.0, harmonics=(Harmonic(3, 0.1), Harmonic(50, 0.01)))))
    with pytest.raises(LoadingError) as exc:
        evaluate_harmonics(line, 100.0, evaluate)
    assert exc.value.field == "cross_section.circuits[1].harmonics[1].order"
