"""Judging an evaluation against thresholds: the rules both geometries share.

* A threshold is judged on **every evaluated point** (the sets with
  ``everywhere``), except a level that applies at the edge of the right-of-way
  (``Threshold.applies_at == "right_of_way_edge"``): when the evaluation has a
  right-of-way set, that level is judged on the edge points only; without one it is
  judged on every point, which can only overstate the edge value (basis
  ``all_points_conservative``).  :data:`BASIS_NOTES` says this in words.
* **Compliance distances** come from the lateral-profile set when there is one.
* **Edge values**: per right-of-way edge, the largest E and B along it and the
  exposure index of each threshold there (:func:`edge_maxima`).
* **Load cases**: the governing case of each threshold is the one with the largest
  exposure index (first if tied), :func:`governing_cases`.

All quantities are resultants (:data:`COMPLIANCE_QUANTITY`), SI units.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .catalogue import Threshold
from .compliance import ThresholdCompliance, evaluate_compliance
from .evaluation import Evaluation

__all__ = ["BASIS_NOTES", "COMPLIANCE_QUANTITY", "EdgeMaximum", "Judgement", "basis_for", "edge_maxima",
           "governing_cases", "judge"]

COMPLIANCE_QUANTITY = "resultant"
"""The field quantity compared with thresholds: the resultant rms (root-sum-square of components)."""

BASIS_NOTES = {
    "all_points": "Compared with the maximum over every evaluated point.",
    "right_of_way_edges": "This level applies at the edge of the right-of-way: compared with the largest value "
                          "computed on the right-of-way edges (for a cross-section, the two edge offsets; for a "
                          "route, every sample along both edges).",
    "all_points_conservative": "This level applies at the edge of the right-of-way, but no right-of-way edge was "
                               "evaluated: compared with the maximum over every evaluated point, which can only "
                               "overstate the edge value. Give right_of_way (cross-section or route) to compare "
                               "at the edges.",
}
"""What each compliance basis means."""


def basis_for(threshold: Threshold, edges_evaluated: bool) -> str:
    """Where a threshold is judged: a key of :data:`BASIS_NOTES`.

    >>> from models.catalogue import custom_threshold
    >>> basis_for(custom_threshold("x", "B", 1, "uT", 50.0), True)
    'all_points'
    """
    if threshold.applies_at != "right_of_way_edge":
        return "all_points"
    return "right_of_way_edges" if edges_evaluated else "all_points_conservative"


@dataclass(frozen=True)
class Judgement:
    """One threshold judged on an evaluation.

    Attributes
    ----------
    compliance : ThresholdCompliance
        Maximum, exposure index, verdict and margin on the points of the basis;
        ``compliance.max_index`` indexes those points.
    basis : str
        Key of :data:`BASIS_NOTES`.
    row : int
        Row of :attr:`Evaluation.combined` where the maximum is.
    distances : ThresholdCompliance or None
        Compliance distances from the lateral-profile set (its ``distance_*``
        members); None when the evaluation has no lateral profile.
    """

    compliance: ThresholdCompliance
    basis: str
    row: int
    distances: ThresholdCompliance | None

    @property
    def passes(self) -> bool:
        return self.compliance.passes

    @property
    def exposure_index(self) -> float:
        return self.compliance.exposure_index


def judge(evaluation: Evaluation, thresholds: Sequence[Threshold]) -> list[Judgement]:
    """Judge every threshold on the points its basis names (see the module notes).

    Parameters
    ----------
    evaluation : Evaluation
    thresholds : sequence of Threshold
        At ``evaluation.frequency_hz``.

    Returns
    -------
    list of Judgement
        One per threshold, in order.
    """
    thresholds = list(thresholds)
    every_rows = evaluation.everywhere_rows()
    edges = evaluation.by_role("right_of_way")
    edge_checks = (evaluate_compliance(edges.field, thresholds, quantity_kind=COMPLIANCE_QUANTITY)
                   if edges is not None else None)
    profile = evaluation.by_role("lateral_profile")
    lateral = None
    if profile is not None and len(profile) == len(every_rows) and profile.rows.start == every_rows[0]:
        # the profile is every point (a cross-section): one pass gives maxima and distances
        checks = lateral = evaluate_compliance(profile.field, thresholds, lateral_offset_m=profile.offset_m,
                                               quantity_kind=COMPLIANCE_QUANTITY)
    else:
        checks = evaluate_compliance(evaluation.everywhere(), thresholds, quantity_kind=COMPLIANCE_QUANTITY)
        if profile is not None:
            lateral = evaluate_compliance(profile.field, thresholds, lateral_offset_m=profile.offset_m,
                                          quantity_kind=COMPLIANCE_QUANTITY)
    out = []
    for k, c in enumerate(checks):
        basis = basis_for(c.threshold, edges is not None)
        if basis == "right_of_way_edges":
            c, row = edge_checks[k], edges.rows.start + edge_checks[k].max_index
        else:
            row = int(every_rows[c.max_index])
        out.append(Judgement(c, basis, row, lateral[k] if lateral is not None else None))
    return out


def with_distances(judgement: Judgement) -> ThresholdCompliance:
    """The judgement's compliance with the lateral profile's distances (or none, when there is no profile)."""
    d = judgement.distances
    if d is None:
        return dataclasses.replace(judgement.compliance, distance_left_m=None, distance_right_m=None,
                                   distance_note="")
    return dataclasses.replace(judgement.compliance, distance_left_m=d.distance_left_m,
                               distance_right_m=d.distance_right_m, distance_note=d.distance_note)


@dataclass(frozen=True)
class EdgeMaximum:
    """The largest E and B along one right-of-way edge and the exposure index of each threshold there.

    ``e_row``/``b_row`` are rows of :attr:`Evaluation.combined`; ``rows`` the edge's rows;
    ``exposure`` holds ``(threshold, exposure index)`` pairs in threshold order.
    """

    edge: str
    rows: slice
    e_v_per_m: float
    b_t: float
    e_row: int
    b_row: int
    exposure: tuple[tuple[Threshold, float], ...]


def edge_maxima(evaluation: Evaluation, thresholds: Sequence[Threshold]) -> list[EdgeMaximum] | None:
    """Per right-of-way edge (left, then right): largest resultant E and B and the exposure indices; None without edges."""
    s = evaluation.by_role("right_of_way")
    if s is None:
        return None
    out = []
    for edge, sl in s.edge_rows().items():
        e_si, b_si = s.field.e_rms_v_per_m[sl], s.field.b_rms_t[sl]
        ke, kb = int(np.argmax(e_si)), int(np.argmax(b_si))
        values = {"E": e_si[ke], "B": b_si[kb]}
        exposure = tuple((t, float(values[t.quantity] / t.limit_si)) for t in thresholds)
        start = s.rows.start + sl.start
        out.append(EdgeMaximum(edge, slice(start, s.rows.start + sl.stop), float(values["E"]), float(values["B"]),
                               start + ke, start + kb, exposure))
    return out


def governing_cases(cases: Sequence[tuple[str, Sequence[Judgement]]]) -> list[tuple[str, Judgement]]:
    """Per threshold, the load case with the largest exposure index (the first such case if tied).

    ``cases`` pairs a case id with its judgements (same thresholds, same order);
    returns ``(case id, judgement)`` per threshold.
    """
    out = []
    for k in range(len(cases[0][1])):
        case_id, judgements = max(cases, key=lambda c: c[1][k].exposure_index)
        out.append((case_id, judgements[k]))
    return out
