"""Clearance needed (models.studies.clearance).

References: Ampère's law for one long straight conductor, B = mu0 I / (2 pi r) (mu0 from
scipy.constants, CODATA); the field of a line charge over a conducting plane (image
method), E = 2 V / (h ln(2h / r)) on the ground below one conductor, solved for h with
scipy.optimize.brentq (an independent root finder); the plain engine
(models.cross_section.evaluate_cross_section) for the binding-point checks.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants
import scipy.optimize

from models.cross_section import evaluate_cross_section
from models.errors import EngineInputError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
from models.section_sets import SectionProfile, SectionRightOfWay, SectionSets, evaluate_section
from models.studies.clearance import clearance_needed, lowest_clearance_m, raise_section, study_offsets

MU0 = scipy.constants.mu_0


def one_conductor(height_m=10.0, current_a=1000.0, voltage_kv=0.0, diameter_m=0.03) -> CrossSection:
    return CrossSection((Circuit("c", "overhead", voltage_kv, current_a, (Conductor("L1", 0.0, height_m),),
                                 Bundle(diameter_m)),))


def double_circuit(dz=0.0) -> CrossSection:
    """Invented vertical double circuit with an earth wire (demo-like, no real line)."""
    def circuit(cid, x, labels):
        return Circuit(cid, "overhead", 400.0, 1500.0,
                       tuple(Conductor(p, x, h + dz) for p, h in zip(labels, (30.0, 23.0, 16.0))),
                       Bundle(0.0318, 2, 0.45))
    return CrossSection((circuit("w", -8.0, ("L1", "L2", "L3")), circuit("e", 8.0, ("L3", "L2", "L1"))),
                        (EarthWire(0.0, 38.0 + dz, 0.02),))


OFFSETS = np.arange(-60.0, 60.5, 0.5)


def test_everywhere_clearance_of_one_conductor_follows_amperes_law():
    # B max at 1 m over the conductor: mu0 I / (2 pi (h - 1)) = limit  =>  h = 1 + mu0 I / (2 pi limit)
    limit = 10e-6
    expected = 1.0 + MU0 * 1000.0 / (2 * math.pi * limit)          # 20.999... m
    r = clearance_needed(one_conductor(), 50.0, "B", limit, OFFSETS, 1.0, 5.0, 40.0, tolerance_m=0.005)
    assert r.achieved
    assert expected <= r.clearance_m + 1e-9 and r.clearance_m - 0.005 <= expected
    assert r.below_clearance_m < expected and r.clearance_m - r.below_clearance_m <= 0.005
    assert r.binding_offset_m == 0.0


def test_clearance_beyond_an_offset_follows_amperes_law():
    # beyond |x| >= 12 m the field binds at x = 12: sqrt(12^2 + (h - 1)^2) = mu0 I / (2 pi limit)
    limit = 10e-6
    radius = MU0 * 1000.0 / (2 * math.pi * limit)
    expected = 1.0 + math.sqrt(radius ** 2 - 12.0 ** 2)
    xs = np.arange(-60.0, 61.0, 3.0)
    offsets = xs[np.abs(xs) >= 12.0]             # as study_offsets gives them: +-12 m included
    r = clearance_needed(one_conductor(), 50.0, "B", limit, offsets, 1.0, 2.0, 40.0, tolerance_m=0.005)
    assert r.clearance_m == pytest.approx(expected, abs=0.005)
    assert abs(r.binding_offset_m) == 12.0


def test_electric_clearance_equals_an_independent_root_of_the_image_formula():
    # E on the ground below one conductor at V to ground: 2 V / (h ln(2 h / r)) (image method)
    v = 132e3 / math.sqrt(3)
    radius = 0.015
    limit = 2000.0
    expected = scipy.optimize.brentq(lambda h: 2 * v / (h * math.log(2 * h / radius)) - limit, 1.0, 100.0,
                                     xtol=1e-9)
    line = one_conductor(voltage_kv=132.0, current_a=0.0)
    r = clearance_needed(line, 50.0, "E", limit, OFFSETS, 0.0, 2.0, 50.0, tolerance_m=0.002)
    assert r.clearance_m == pytest.approx(expected, abs=0.002)
    assert r.clearance_m >= expected - 1e-9


def test_found_height_meets_the_limit_at_the_binding_point_and_0_1_m_lower_exceeds_it():
    # the check of the issue: exactly the threshold (to tolerance) at the binding point; 0.1 m lower exceeds it
    line = double_circuit()
    sets = SectionSets(SectionProfile(-80.0, 80.0, 0.5, 1.0), right_of_way=SectionRightOfWay(-25.0, 25.0))
    ev = evaluate_section(line, 50.0, sets)
    offsets = study_offsets(ev, 25.0)
    assert offsets.min() == -80.0 and np.all(np.abs(offsets) >= 25.0) and {-25.0, 25.0} <= set(offsets)
    limit = 1e-6
    r = clearance_needed(line, 50.0, "B", limit, offsets, 1.0, 5.0, 80.0, tolerance_m=0.005)
    assert r.achieved and r.given_clearance_m == 16.0
    raised = raise_section(line, r.clearance_m - 16.0)
    assert lowest_clearance_m(raised) == pytest.approx(r.clearance_m)
    assert raised.earth_wires[0].height_m == pytest.approx(38.0 + r.clearance_m - 16.0)

    def plain_max(h):
        res = evaluate_cross_section(raise_section(line, h - 16.0), offsets, 1.0, 50.0)
        return res.b_rms_t.max(), res.points_m[np.argmax(res.b_rms_t), 0]

    at, x_at = plain_max(r.clearance_m)
    assert at <= limit and at == pytest.approx(limit, rel=2e-3)      # to the 5 mm tolerance
    assert x_at == r.binding_offset_m and abs(x_at) == 25.0
    assert plain_max(r.clearance_m - 0.1)[0] > limit
    assert plain_max(r.below_clearance_m)[0] > limit


def test_no_height_in_the_range_is_a_clear_answer():
    r = clearance_needed(one_conductor(), 50.0, "B", 10e-6, OFFSETS, 1.0, 5.0, 15.0)
    assert not r.achieved and r.clearance_m is None and r.raise_m is None
    # the scan's best is the top of the range (B falls with height here): Ampère's law there
    assert r.best_clearance_m == 15.0
    assert r.best_value_si == pytest.approx(MU0 * 1000.0 / (2 * math.pi * 14.0), rel=1e-9)
    assert "No clearance" in r.note


def test_a_limit_met_at_the_bottom_of_the_range_gives_that_height():
    r = clearance_needed(one_conductor(), 50.0, "B", 10e-6, OFFSETS, 1.0, 25.0, 30.0)
    assert r.achieved and r.clearance_m == 25.0 and r.below_clearance_m is None


@pytest.mark.parametrize("kwargs, field", [
    ({"min_clearance_m": 0.5}, "study.min_clearance_m"),                 # below the observation height
    ({"max_clearance_m": 4.0}, "study.max_clearance_m"),                 # empty range
    ({"tolerance_m": 0.0}, "study.tolerance_m"),
    ({"min_clearance_m": 0.1, "height_m": 0.0}, "study.min_clearance_m"),   # the bundle would reach the ground
])
def test_bad_ranges_name_the_field(kwargs, field):
    args = {"min_clearance_m": 5.0, "max_clearance_m": 30.0, "tolerance_m": 0.01, "height_m": 1.0, **kwargs}
    line = CrossSection((Circuit("c", "overhead", 0.0, 1000.0, (Conductor("L1", 0.0, 10.0),),
                                 Bundle(0.03, 2, 0.4)),))
    with pytest.raises(EngineInputError) as info:
        clearance_needed(line, 50.0, "B", 10e-6, OFFSETS, args["height_m"], args["min_clearance_m"], args["max_clearance_m"],
                         tolerance_m=args["tolerance_m"])
    assert info.value.field == field


def test_underground_circuits_stay_and_a_line_without_overhead_circuits_is_refused():
    cable = Circuit("u", "underground", 0.0, 100.0, (Conductor("L1", 0.0, -1.0),), Bundle(0.05))
    mixed = CrossSection((cable,) + one_conductor().circuits)
    assert raise_section(mixed, 3.0).circuits[0].conductors[0].height_m == -1.0
    assert raise_section(mixed, 3.0).circuits[1].conductors[0].height_m == 13.0
    with pytest.raises(EngineInputError) as info:
        lowest_clearance_m(CrossSection((cable,)))
    assert info.value.field == "study.kind"
