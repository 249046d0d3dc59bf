"""Phase arrangement ranking (models.studies.phase_arrangement).

References: a brute-force re-computation of every arrangement with the plain engine
(models.section_sets.evaluate_section on the relabelled line: its own validation, phase
angles, bundles, charge simulation and Biot–Savart); the far-field laws of line
currents: a circuit whose currents sum to zero has a dipole far field (B ~ 1/r^2), and two
such dipoles in opposition leave a quadrupole (B ~ 1/r^3), which is why a vertical double
circuit phased in mirror image (L1-L2-L3 / L3-L2-L1, "reverse phased" or "low reactance")
has the lower far field than "like phased" (L1-L2-L3 / L1-L2-L3) -- common practice in
the trade, stated here without a published source; the test checks the decay law itself.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from models.errors import EngineInputError
from models.geometry import Bundle, CableScreen, Circuit, Conductor, CrossSection, CurrentPhasor, EarthWire
from models.section_sets import SectionPoint, SectionProfile, SectionRightOfWay, SectionSets, evaluate_section
from models.studies.phase_arrangement import rank_arrangements, ranking_rows, unit_fields

HEIGHTS = (30.0, 23.0, 16.0)


def vertical_double(right=("L3", "L2", "L1"), *, extras=False) -> CrossSection:
    """Invented vertical double circuit (no real line); ``extras`` adds fixed sources and asymmetries."""
    left = Circuit("w", "overhead", 400.0, 1500.0, tuple(Conductor(p, -8.0, h) for p, h in zip(("L1", "L2", "L3"),
                                                                                           HEIGHTS)),
                   Bundle(0.0318, 2, 0.45))
    east = Circuit("e", "overhead", 400.0, 1200.0 if extras else 1500.0,
                   tuple(Conductor(p, 8.0, h) for p, h in zip(right, HEIGHTS)), Bundle(0.0318, 2, 0.45),
                   reverse_sequence=extras, angle_offset_deg=30.0 if extras else 0.0)
    wires = (EarthWire(0.0, 38.0, 0.02, CurrentPhasor(40.0, 170.0) if extras else None),)
    if extras:   # a third, single-phase-plus-neutral circuit with a fixed neutral current
        third = Circuit("n", "overhead", 20.0, 200.0, (Conductor("L1", -2.0, 12.0), Conductor("L2", 2.0, 12.0),
                                                       Conductor("N", 0.0, 10.0, current=CurrentPhasor(30.0, 60.0))),
                        Bundle(0.02))
        return CrossSection((left, east, third), wires)
    return CrossSection((left, east), wires)


def relabel(section: CrossSection, labels: dict) -> CrossSection:
    circuits = tuple(dataclasses.replace(c, conductors=tuple(dataclasses.replace(k, phase=p)
                                                             for k, p in zip(c.conductors, labels[c.id])))
                     for c in section.circuits)
    return dataclasses.replace(section, circuits=circuits)


def brute_force(section, sets, rank_by, soil=None):
    """Ranked value of every arrangement from the plain engine, in the study's enumeration order."""
    ev = evaluate_section(section, 50.0, sets, soil_resistivity_ohm_m=soil)
    rows = ranking_rows(ev, rank_by)
    ranking = rank_arrangements(section, ev, rank_by, soil_resistivity_ohm_m=soil)
    values = []
    for arrangement in ranking.arrangements:
        plain = evaluate_section(relabel(section, arrangement.labels), 50.0, sets, soil_resistivity_ohm_m=soil)
        f = plain.combined
        values.append((f.e_rms_v_per_m if rank_by == "e_max" else f.b_rms_t)[rows].max())
    return ranking, np.array(values)


def cable_trench() -> CrossSection:
    """Invented trench: two flat cable circuits, one with both-end bonded screens, one single-point bonded."""
    def circuit(cid, x0, bonding):
        return Circuit(cid, "underground", 132.0, 900.0,
                       tuple(Conductor(p, x0 + dx, -1.4) for p, dx in zip(("L1", "L2", "L3"), (-0.25, 0.0, 0.25))),
                       Bundle(0.04), screen=CableScreen(bonding, 0.07, 0.09))
    return CrossSection((circuit("a", -0.6, "both_ends"), circuit("b", 0.6, "single_point")))


def test_cable_screens_enter_the_unit_fields():
    # the screen currents are linear in the conductor currents, so the unit fields carry them exactly
    sets = SectionSets(SectionProfile(-10.0, 10.0, 0.5, 1.0))
    ranking, plain = brute_force(cable_trench(), sets, "b_max")
    np.testing.assert_allclose(ranking.values_si, plain, rtol=1e-9)


PROFILE = SectionSets(SectionProfile(-60.0, 60.0, 1.0, 1.0), right_of_way=SectionRightOfWay(-25.0, 25.0))
POINTS = SectionSets(points=(SectionPoint(-40.0, 1.5), SectionPoint(35.0, 4.0), SectionPoint(70.0, 1.0)))


@pytest.mark.parametrize("extras, sets, rank_by, soil", [
    (False, PROFILE, "b_max", None),
    (False, PROFILE, "b_edge", None),
    (False, PROFILE, "e_max", None),
    (False, POINTS, "b_receptors", None),
    (True, PROFILE, "b_max", 100.0),
    (True, PROFILE, "e_max", None),
])
def test_exhaustive_optimum_equals_brute_force_over_every_arrangement(extras, sets, rank_by, soil):
    section = vertical_double(extras=extras)
    ranking, plain = brute_force(section, sets, rank_by, soil)
    assert len(ranking.arrangements) == (6 * 6 * 2 if extras else 36)    # 3! per circuit, 2! for the L1/L2 pair
    assert len({a.text() for a in ranking.arrangements}) == len(ranking.arrangements)
    np.testing.assert_allclose(ranking.values_si, plain, rtol=1e-9)
    assert plain[ranking.best_index] <= plain.min() * (1 + 1e-9)
    assert ranking.arrangements[0].labels == {c.id: tuple(k.phase for k in c.conductors) for c in section.circuits}
    assert ranking.reduction == pytest.approx(1 - plain.min() / plain[0], abs=1e-9)


def test_unit_fields_are_reused_across_loadings():
    section = vertical_double()
    ev = evaluate_section(section, 50.0, PROFILE)
    units = unit_fields(section, ev.combined.points_m, 50.0)
    loaded = dataclasses.replace(section, circuits=tuple(dataclasses.replace(c, current_a=c.current_a * (k + 1))
                                                         for k, c in enumerate(section.circuits)))
    with_units = rank_arrangements(loaded, ev, "b_max", units=units)
    plain = evaluate_section(loaded, 50.0, PROFILE).combined.b_rms_t[ranking_rows(ev, "b_max")].max()
    assert with_units.values_si[0] == pytest.approx(plain, rel=1e-9)


def far_field(right, x_m):
    section = vertical_double(right)
    ev = evaluate_section(section, 50.0, SectionSets(points=(SectionPoint(x_m, 1.0),)))
    return rank_arrangements(section, ev, "b_receptors").values_si[0]


def test_reverse_phased_vertical_double_circuit_has_the_lower_far_field():
    like, reverse = ("L1", "L2", "L3"), ("L3", "L2", "L1")
    for x in (100.0, 200.0, 400.0):
        assert far_field(reverse, x) < far_field(like, x)
    # decay laws: like phased ~ 1/r^2 (dipole), reverse phased ~ 1/r^3 (quadrupole), far from the line
    like_ratio = far_field(like, 200.0) / far_field(like, 400.0)
    reverse_ratio = far_field(reverse, 200.0) / far_field(reverse, 400.0)
    assert like_ratio == pytest.approx(4.0, rel=0.05)
    assert reverse_ratio == pytest.approx(8.0, rel=0.05)


def test_ranking_of_far_field_puts_a_mirrored_arrangement_first():
    section = vertical_double(("L1", "L2", "L3"))       # given like phased
    ev = evaluate_section(section, 50.0, SectionSets(points=(SectionPoint(300.0, 1.0),)))
    r = rank_arrangements(section, ev, "b_receptors")
    best = r.arrangements[r.best_index].labels
    # mirror image: the same phase at top and bottom swaps between the circuits (top of w is bottom of e)
    assert best["w"][0] == best["e"][2] and best["w"][2] == best["e"][0] and best["w"][1] == best["e"][1]
    assert r.reduction > 0.5


@pytest.mark.parametrize("section, sets, rank_by, field", [
    (CrossSection(vertical_double().circuits[:1]), PROFILE, "b_max", "study.kind"),
    (vertical_double(), SectionSets(SectionProfile(-10.0, 10.0, 1.0, 1.0)), "b_edge", "study.rank_by"),
    (vertical_double(), PROFILE, "b_receptors", "study.rank_by"),
    (vertical_double(), PROFILE, "b_average", "study.rank_by"),
])
def test_what_cannot_be_ranked_names_the_field(section, sets, rank_by, field):
    ev = evaluate_section(section, 50.0, sets)
    with pytest.raises(EngineInputError) as info:
        rank_arrangements(section, ev, rank_by)
    assert info.value.field == field


def test_too_many_arrangements_are_refused():
    base = vertical_double()
    circuits = tuple(dataclasses.replace(c, id=f"c{k}", conductors=tuple(
        dataclasses.replace(cond, offset_m=cond.offset_m + 40.0 * k) for cond in c.conductors))
        for k, c in enumerate(base.circuits * 3))       # 6 circuits: 6^6 arrangements
    section = CrossSection(circuits)
    ev = evaluate_section(section, 50.0, SectionSets(points=(SectionPoint(0.0, 1.0),)))
    with pytest.raises(EngineInputError) as info:
        rank_arrangements(section, ev, "b_max")
    assert info.value.field == "study.kind" and str(math.prod([6] * 6)) in info.value.message
