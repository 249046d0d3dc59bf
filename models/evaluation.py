"""One evaluation model for both geometries: named point sets and their fields.

A cross-section (:func:`models.section_sets.evaluate_section`) and a route
(:func:`models.route.evaluate_route`) both return an :class:`Evaluation`: the fields at
every evaluated point in one :class:`~models.results.FieldResult` (``combined``), and
the evaluation sets that cut it into named slices, each with a *role*:

========================  =====================================================
role                      what the set is
========================  =====================================================
``lateral_profile``       points across the line at one place; gives the
                          compliance distances (``offset_m`` per point)
``points``                points given one by one (cross-section)
``path``                  a polyline sampled along its length (route)
``receptors``             named points ("house 12"), each at its own height
``grid``                  a regular plan grid (route; the source of zones)
``right_of_way``          the right-of-way edges; levels that apply at the
                          edge are judged on these points only
========================  =====================================================

The judging rules that work on an evaluation (which points each threshold is judged
on, edge values, compliance distances, governing load case) are in
:mod:`models.judging`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .results import FieldResult

__all__ = ["DEFAULT_EDGE_HEIGHT_M", "EDGES", "ROLES", "Evaluation", "EvaluationSet", "sub_result"]

ROLES = ("lateral_profile", "points", "path", "receptors", "grid", "right_of_way")

EDGES = ("left", "right")
"""Right-of-way edges, in set order (the left edge's rows come first)."""

DEFAULT_EDGE_HEIGHT_M = 1.0
"""Height [m] of right-of-way edge values unless the request says otherwise (common practice: 1 m above ground)."""


def sub_result(result: FieldResult, rows: slice | np.ndarray) -> FieldResult:
    """The rows ``rows`` of a field result (same frequency and assumptions)."""
    return FieldResult(result.points_m[rows], result.frequency_hz, result.e_phasor_v_per_m[rows],
                       result.b_phasor_t[rows], result.assumptions)


@dataclass(frozen=True)
class EvaluationSet:
    """One named set of evaluated points: its rows of :attr:`Evaluation.combined` and what locates them.

    Attributes
    ----------
    name : str
        Key in :attr:`Evaluation.sets` (``"points"``, ``"lateral_profile"``, ``"path"``,
        ``"receptors"``, ``"grid"``, ``"right_of_way"``).
    role : str
        One of :data:`ROLES`.
    rows : slice
        Rows of the combined result.
    field : FieldResult
        The fields on this set (``combined`` restricted to ``rows``).
    everywhere : bool
        Part of "every evaluated point" (maxima, levels judged on all points).  A
        cross-section's two right-of-way edge points are not: they are judged only as
        edge values.
    x, y : ndarray or None
        Route: positions in the request CRS (metres, or longitude/latitude in degrees).
    offset_m : ndarray or None
        Lateral profile: offset from the centre line, + right [m]; right-of-way: the
        offset of the point's edge.
    distance_m : ndarray or None
        Path: distance along the path; right-of-way (route): along the edge [m].
    chainage_m : ndarray or None
        Right-of-way (route): chainage of the nearest centre-line point [m].
    ids, names : tuple of str or None
        Receptors: id and name of each point.
    edges : tuple of str or None
        Right-of-way: ``"left"`` or ``"right"`` per point (left edge first).
    grid : object or None
        Grid: its axes (:class:`models.route.sets.GridAxes`).
    edge_samples : tuple or None
        Right-of-way (route): both sampled edges (:class:`models.route.right_of_way.EdgeSamples`).
    note : str
        How the set was placed, in plain language ("" when there is nothing to say).
    details : dict
        Anything else a geometry records about the set (e.g. the edge height basis).
    """

    name: str
    role: str
    rows: slice
    field: FieldResult
    everywhere: bool = True
    x: np.ndarray | None = None
    y: np.ndarray | None = None
    offset_m: np.ndarray | None = None
    distance_m: np.ndarray | None = None
    chainage_m: np.ndarray | None = None
    ids: tuple[str, ...] | None = None
    names: tuple[str, ...] | None = None
    edges: tuple[str, ...] | None = None
    grid: Any = None
    edge_samples: tuple | None = None
    note: str = ""
    details: dict = field(default_factory=dict)

    @property
    def kind(self) -> str:
        """The set's role (kept as ``kind`` for readers of route results)."""
        return self.role

    def __len__(self) -> int:
        return self.rows.stop - self.rows.start

    def edge_rows(self) -> dict[str, slice]:
        """Right-of-way: rows of each edge within this set, ``{"left": slice, "right": slice}``."""
        if self.edges is None:
            raise ValueError(f"set {self.name!r} has no right-of-way edges")
        n_left = sum(1 for e in self.edges if e == EDGES[0])
        return {EDGES[0]: slice(0, n_left), EDGES[1]: slice(n_left, len(self.edges))}


@dataclass(frozen=True)
class Evaluation:
    """Fields of one line on all its evaluation sets.

    Attributes
    ----------
    geometry : {"cross_section", "route"}
    frequency_hz : float
    combined : FieldResult
        Every evaluated point of every set, in set order.
    sets : dict of str -> EvaluationSet
        In set order; their ``rows`` tile ``combined``.
    assumptions : tuple of str
    frame, route_m, zone_thresholds, zones, segment_counts
        Route only: the working frame (:class:`models.route.crs.WorkingFrame`), the
        route with supports in the working plane, resolved zone thresholds, zones as a
        GeoJSON FeatureCollection in the request CRS, and the segment counts for B and E.
    """

    geometry: str
    frequency_hz: float
    combined: FieldResult
    sets: dict
    assumptions: tuple[str, ...] = ()
    frame: Any = None
    route_m: Any = None
    zone_thresholds: tuple = ()
    zones: dict | None = None
    segment_counts: dict = field(default_factory=dict)

    @property
    def slices(self) -> dict[str, slice]:
        """Rows of ``combined`` per set name."""
        return {name: s.rows for name, s in self.sets.items()}

    def locate(self, index: int) -> tuple[str, int]:
        """(set name, index within the set) of a row of :attr:`combined`."""
        for name, s in self.sets.items():
            if s.rows.start <= index < s.rows.stop:
                return name, index - s.rows.start
        raise IndexError(index)

    def everywhere_rows(self) -> np.ndarray:
        """Rows of ``combined`` that are "every evaluated point" (sets with ``everywhere``)."""
        parts = [np.arange(s.rows.start, s.rows.stop) for s in self.sets.values() if s.everywhere]
        return np.concatenate(parts) if parts else np.zeros(0, dtype=int)

    def everywhere(self) -> FieldResult:
        """The fields at every evaluated point (``combined`` when every set counts)."""
        if all(s.everywhere for s in self.sets.values()):
            return self.combined
        return sub_result(self.combined, self.everywhere_rows())

    def by_role(self, role: str) -> EvaluationSet | None:
        """The first set with this role, or None."""
        return next((s for s in self.sets.values() if s.role == role), None)
