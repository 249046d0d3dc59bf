"""Phase arrangement: every way of placing each circuit's phases on its positions, ranked by a field.

For each circuit, the phase labels of its permutable positions (labelled phases
without a current or voltage override; neutrals and overridden conductors stay as
given) are permuted over those positions: ``3! = 6`` per three-phase circuit, which
covers both sequences.  Every combination over the circuits is evaluated; no circuit
is held fixed, because fixed currents (earth wires, overrides) and a circuit's
``angle_offset_deg`` break the symmetry that would make that safe.  Relabelling
every circuit by the same cyclic shift rotates every phasor by 120 deg and leaves
rms fields unchanged (and, with no angle offsets or fixed currents, swapping the
second and third phase everywhere conjugates every phasor, likewise), so the ranking
holds groups of equal values; values within :data:`TIE_RTOL` rank as equal, in
enumeration order (the given arrangement is enumeration index 0).

B is linear in the currents and E in the voltages (charges ``Q = P^-1 V``), so the
field of every arrangement is ``F_fixed + sum_p G_p u_p``: ``G_p`` the field of a
unit phasor (1 A, or 1 V) on position ``p`` (its subconductors), computed once with
the engine's kernels (:mod:`models.magnetic`, :mod:`models.electric`), ``u_p`` the
arrangement's phasor there.  All arrangements are combined in one array operation.

What is ranked (resultant rms, the largest over the points named):

* ``b_max``: B over every evaluated point inside the right-of-way (every evaluated
  point when there is no right-of-way);
* ``b_edge``: B at the right-of-way edges;
* ``b_receptors``: B at the points given one by one (set role ``points`` or ``receptors``);
* ``e_max``: E over every evaluated point.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from dataclasses import dataclass

import numpy as np

from ..electric import electric_field_phasors, potential_coefficients
from ..errors import EngineInputError
from ..evaluation import Evaluation
from ..geometry import CrossSection
from ..magnetic import complex_depth_m, earth_return_phasors, flux_density_phasors
from ..cable_screens import section_screen_transfer
from ..sources import NEUTRAL_LABEL, build_sources, circuit_phase_angles_deg
from ..units import SQRT3, V_PER_KV
from . import RANK_BY

__all__ = ["MAX_ARRANGEMENTS", "Arrangement", "PhaseRanking", "UnitFields", "arrangements", "rank_arrangements",
           "ranking_rows", "unit_fields"]

MAX_ARRANGEMENTS = 1296
"""Most arrangements one study evaluates (6^4: four three-phase circuits)."""


def ranking_rows(evaluation: Evaluation, rank_by: str, field: str = "study") -> np.ndarray:
    """Rows of ``evaluation.combined`` that ``rank_by`` looks at (see the module notes)."""
    if rank_by not in RANK_BY:
        raise EngineInputError(f"{field}.rank_by", f"Input {field}.rank_by must be one of {', '.join(RANK_BY)}.")
    every = evaluation.everywhere_rows()
    edges = evaluation.by_role("right_of_way")
    if rank_by == "b_edge":
        if edges is None:
            raise EngineInputError(f"{field}.rank_by", "Ranking by b_edge needs right_of_way in the request.")
        return np.arange(edges.rows.start, edges.rows.stop)
    if rank_by == "b_receptors":
        s = evaluation.by_role("receptors") or evaluation.by_role("points")
        if s is None:
            raise EngineInputError(f"{field}.rank_by", "Ranking by b_receptors needs points given one by one "
                                                       "(points, not profile).")
        return np.arange(s.rows.start, s.rows.stop)
    if rank_by == "b_max" and edges is not None:
        lo, hi = np.sort(edges.field.points_m[:, 0])[[0, -1]]
        x = evaluation.combined.points_m[every, 0]
        inside = every[(x >= lo) & (x <= hi)]
        return inside if inside.size else every
    return every


@dataclass(frozen=True)
class Arrangement:
    """Phase labels per circuit (circuit id -> labels of its conductors, in conductor order)."""

    labels: dict

    def text(self) -> str:
        return " / ".join(f"{cid}: {'-'.join(labels)}" for cid, labels in self.labels.items())


def arrangements(section: CrossSection) -> tuple[list[list[tuple[str, ...]]], list[list[int]]]:
    """Per circuit, its distinct label permutations (the given one first) and its permutable conductor indices."""
    perms, movable = [], []
    for c in section.circuits:
        idx = [k for k, cond in enumerate(c.conductors)
               if cond.phase.strip().upper() != NEUTRAL_LABEL and cond.current is None
               and cond.voltage_to_ground is None]
        given = tuple(c.conductors[k].phase for k in idx)
        options = list(dict.fromkeys(itertools.permutations(given)))
        options.remove(given)
        perms.append([tuple(cond.phase for cond in c.conductors)] +
                     [_relabel(c, idx, p) for p in options])
        movable.append(idx)
    return perms, movable


def _relabel(circuit, idx, labels) -> tuple[str, ...]:
    out = [cond.phase for cond in circuit.conductors]
    for k, label in zip(idx, labels):
        out[k] = label
    return tuple(out)


@dataclass(frozen=True)
class UnitFields:
    """Per permutable position: B of 1 A and E of 1 V (shared equally / held on its subconductors).

    ``b``, ``e``: complex (positions, points, 2); ``positions``: (circuit index, conductor index).
    """

    positions: tuple
    b: np.ndarray
    e: np.ndarray


def _b(ox, oy, src, current, p):
    out = flux_density_phasors(ox, oy, src.x_m, src.y_m, current)
    if p is not None:
        oh = src.overhead
        out += earth_return_phasors(ox, oy, src.x_m[oh], src.y_m[oh], current[oh], p)
    return out


def _e(ox, oy, src, voltage):
    oh = src.overhead
    if not oh.any():
        return np.zeros((ox.size, 2), dtype=complex)
    pm = potential_coefficients(src.x_m[oh], src.y_m[oh], src.radius_m[oh])
    v = voltage[oh]
    q = np.linalg.solve(pm, np.column_stack([v.real, v.imag]))
    return electric_field_phasors(ox, oy, src.x_m[oh], src.y_m[oh], q[:, 0] + 1j * q[:, 1])


def unit_fields(section: CrossSection, points_m: np.ndarray, frequency_hz: float, *,
                soil_resistivity_ohm_m: float | None = None) -> UnitFields:
    """Unit-phasor fields of every permutable position at ``points_m`` (n, 2) = (offset, height)."""
    src = build_sources(section)
    screens = _with_screens(section, src, frequency_hz)
    ox, oy = np.ascontiguousarray(points_m[:, 0]), np.ascontiguousarray(points_m[:, 1])
    p = None if soil_resistivity_ohm_m is None else complex_depth_m(soil_resistivity_ohm_m, frequency_hz)
    _, movable = arrangements(section)
    positions, bs, es = [], [], []
    for i, idx in enumerate(movable):
        for k in idx:
            mask = np.array([f == f"cross_section.circuits[{i}].conductors[{k}]" for f in src.fields])
            current = np.where(mask, 1.0 / mask.sum(), 0.0).astype(complex)
            bs.append(_b(ox, oy, src, screens(current), p))
            es.append(_e(ox, oy, src, mask.astype(complex)))
            positions.append((i, k))
    return UnitFields(tuple(positions), np.array(bs), np.array(es))


def _with_screens(section, src, frequency_hz):
    """Wire currents -> the same plus the screen currents they induce (both-end bonded cables; linear)."""
    t = section_screen_transfer(section, src, frequency_hz)
    return (lambda current: current) if t is None else (lambda current: current + t @ current)


def _fixed_fields(section, points_m, movable, frequency_hz, soil):
    """B and E of everything that is not permuted (overrides, neutrals, earth-wire currents)."""
    src = build_sources(section)
    keep = np.array([not any(f == f"cross_section.circuits[{i}].conductors[{k}]"
                             for i, idx in enumerate(movable) for k in idx) for f in src.fields])
    ox, oy = np.ascontiguousarray(points_m[:, 0]), np.ascontiguousarray(points_m[:, 1])
    p = None if soil is None else complex_depth_m(soil, frequency_hz)
    return (_b(ox, oy, src, _with_screens(section, src, frequency_hz)(np.where(keep, src.current_a, 0)), p),
            _e(ox, oy, src, np.where(keep, src.voltage_v, 0)))


def _phasors(circuit, labels, idx):
    """Current [A] and voltage [V] phasors of the permutable positions under these labels."""
    relabelled = dataclasses.replace(circuit, conductors=tuple(dataclasses.replace(c, phase=lab)
                                                               for c, lab in zip(circuit.conductors, labels)))
    angles = circuit_phase_angles_deg(relabelled)
    rot = np.exp(1j * np.radians([angles[k] for k in idx]))
    return circuit.current_a * rot, circuit.voltage_kv * V_PER_KV / SQRT3 * rot


@dataclass(frozen=True)
class PhaseRanking:
    """Every arrangement and its ranked value, best first (ties kept in enumeration order).

    ``values_si`` [T] or [V/m] per arrangement in enumeration order (index 0 = as
    given); ``order`` the ranking; ``arrangements`` the labels per enumeration index.
    """

    rank_by: str
    quantity: str
    arrangements: tuple
    values_si: np.ndarray
    order: np.ndarray
    given_index: int = 0

    @property
    def best_index(self) -> int:
        return int(self.order[0])

    @property
    def reduction(self) -> float:
        """1 - best / given (0 when the given arrangement ranks as good as the best)."""
        if self.best_index == self.given_index:
            return 0.0
        given = float(self.values_si[self.given_index])
        return 0.0 if given == 0.0 else 1.0 - float(self.values_si[self.best_index]) / given


def rank_arrangements(section: CrossSection, evaluation: Evaluation, rank_by: str, *,
                      soil_resistivity_ohm_m: float | None = None, units: UnitFields | None = None,
                      field: str = "study") -> PhaseRanking:
    """Every phase arrangement of ``section`` ranked by ``rank_by`` on the points of ``evaluation``.

    ``units`` (:func:`unit_fields` at ``evaluation.combined.points_m``) may be passed
    in when several loadings of the same geometry are ranked.

    :raise EngineInputError: fewer than two circuits, more than :data:`MAX_ARRANGEMENTS`
        arrangements, or a ``rank_by`` the evaluation has no points for.
    """
    if len(section.circuits) < 2:
        raise EngineInputError(f"{field}.kind", "A phase-arrangement study needs two or more circuits.")
    rows = ranking_rows(evaluation, rank_by, field)
    perms, movable = arrangements(section)
    total = math.prod(len(p) for p in perms)
    if total > MAX_ARRANGEMENTS:
        raise EngineInputError(f"{field}.kind", f"The line has {total} phase arrangements; at most "
                                                f"{MAX_ARRANGEMENTS} are evaluated.")
    pts = evaluation.combined.points_m[rows]
    freq = evaluation.frequency_hz
    if units is None:
        units = unit_fields(section, evaluation.combined.points_m, freq, soil_resistivity_ohm_m=soil_resistivity_ohm_m)
    quantity = "E" if rank_by == "e_max" else "B"
    g = (units.e if quantity == "E" else units.b)[:, rows]
    fixed = _fixed_fields(section, pts, movable, freq, soil_resistivity_ohm_m)[0 if quantity == "B" else 1]
    contributions, start = [], 0
    for c, options, idx in zip(section.circuits, perms, movable):
        u = np.array([_phasors(c, labels, idx)[0 if quantity == "B" else 1] for labels in options])
        if c.kind != "overhead" and quantity == "E":
            u = np.zeros_like(u)
        contributions.append(np.einsum("ap,pnk->ank", u, g[start:start + len(idx)]) if idx
                             else np.zeros((1,) + fixed.shape, dtype=complex))
        start += len(idx)
    grids = np.meshgrid(*[np.arange(len(p)) for p in perms], indexing="ij")
    combo = [gr.ravel() for gr in grids]
    fields_ = fixed[None] + sum(cc[ix] for cc, ix in zip(contributions, combo))
    values = np.sqrt(np.sum(np.abs(fields_) ** 2, axis=2)).max(axis=1)
    labelled = tuple(Arrangement({c.id: perms[i][combo[i][a]] for i, c in enumerate(section.circuits)})
                     for a in range(total))
    return PhaseRanking(rank_by, quantity, labelled, values, ranking_order(values))


TIE_RTOL = 1e-9
"""Values within this fraction of the largest value rank as equal (kept in enumeration order, as given first)."""


def ranking_order(values: np.ndarray) -> np.ndarray:
    """Indices best (smallest) first; values equal to within :data:`TIE_RTOL` keep their enumeration order.

    >>> ranking_order(np.array([2.0, 1.0, 2.0 - 1e-15, 1.0 + 1e-15])).tolist()
    [1, 3, 0, 2]
    """
    scale = float(np.max(values)) if values.size and np.max(values) > 0 else 1.0
    return np.argsort(np.round(values / scale / TIE_RTOL), kind="stable")
