"""Evaluation sets of a cross-section and :func:`evaluate_section`, its evaluator.

A cross-section is evaluated along a lateral profile (:class:`SectionProfile`) or at
given points (:class:`SectionPoint`), and optionally at the two right-of-way edges
(:class:`SectionRightOfWay`).  :func:`evaluate_section` computes them in one engine
call and returns an :class:`models.evaluation.Evaluation` like the route engine does:
set ``"points"`` (role ``lateral_profile`` or ``points``) and, with a right-of-way,
set ``"right_of_way"`` (two points, not part of "every evaluated point": they are
judged as edge values only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .cross_section import evaluate_cross_section
from .errors import EngineInputError
from .evaluation import DEFAULT_EDGE_HEIGHT_M, EDGES, Evaluation, EvaluationSet, sub_result
from .geometry import CrossSection

__all__ = ["SectionPoint", "SectionProfile", "SectionRightOfWay", "SectionSets", "edge_height", "evaluate_section",
           "profile_point_count", "section_points"]


@dataclass(frozen=True)
class SectionProfile:
    """Lateral profile: offsets from ``from_m`` to ``to_m`` (both included) every ``step_m``, at ``height_m``."""

    from_m: float
    to_m: float
    step_m: float
    height_m: float


@dataclass(frozen=True)
class SectionPoint:
    """One observation point: offset across the line (+ right) and height above ground [m]."""

    offset_m: float
    height_m: float


@dataclass(frozen=True)
class SectionRightOfWay:
    """Right-of-way edges: offsets across the line [m], positive to the right, ``left_m < right_m``."""

    left_m: float
    right_m: float


@dataclass(frozen=True)
class SectionSets:
    """What to evaluate on a cross-section: exactly one of ``profile`` and ``points``, and optionally the edges."""

    profile: SectionProfile | None = None
    points: tuple[SectionPoint, ...] | None = None
    right_of_way: SectionRightOfWay | None = None


def profile_point_count(from_m: float, to_m: float, step_m: float) -> float:
    """Number of points of a lateral profile (both ends included), as float (may be huge).

    Offsets are ``from_m + k * step_m`` for ``k = 0, 1, ...`` up to ``to_m``; if the
    last one falls short of ``to_m`` (beyond a 1e-9 relative tolerance), ``to_m`` is
    added as the final point.

    >>> profile_point_count(-50.0, 50.0, 0.5), profile_point_count(0.0, 1.0, 0.3)
    (201.0, 5.0)
    """
    span = (to_m - from_m) / step_m
    whole = math.floor(span + 1e-9)
    return float(whole + 1 + (1 if span - whole > 1e-9 else 0))


def section_points(sets: SectionSets) -> tuple[np.ndarray, np.ndarray]:
    """Offsets and heights [m] of the profile or the given points, in order.

    A profile gives ``from_m + k * step_m`` up to ``to_m``, with ``to_m`` appended when
    the steps do not land on it (:func:`profile_point_count`).

    >>> section_points(SectionSets(profile=SectionProfile(0.0, 1.0, 0.3, 1.0)))[0].tolist()
    [0.0, 0.3, 0.6, 0.9, 1.0]
    """
    if sets.profile is not None:
        p = sets.profile
        n = int(profile_point_count(p.from_m, p.to_m, p.step_m))
        # Rounded to 1 nm so that 0.1 m steps print as 0.1, not 0.30000000000000004.
        offsets = np.round(p.from_m + p.step_m * np.arange(n, dtype=float), 9)
        offsets[-1] = p.to_m
        return offsets, np.full(n, p.height_m)
    if not sets.points:
        raise EngineInputError("profile", "Give exactly one of profile or points.")
    return (np.array([pt.offset_m for pt in sets.points], dtype=float),
            np.array([pt.height_m for pt in sets.points], dtype=float))


_HEIGHT_NOTES = {
    "profile": "Edges evaluated at the height of the lateral profile.",
    "points": "Edges evaluated at the common height of the given points.",
    "default": "The given points lie at several heights; edges evaluated at the default 1 m above ground.",
}


def edge_height(sets: SectionSets) -> tuple[float, str]:
    """Height [m] at which the right-of-way edges are evaluated, and its basis.

    The profile's ``height_m``; for explicit points their height if they all share
    one, else :data:`models.evaluation.DEFAULT_EDGE_HEIGHT_M`.  Basis: "profile",
    "points" or "default".

    >>> edge_height(SectionSets(points=(SectionPoint(0.0, 1.5), SectionPoint(9.0, 2.0))))
    (1.0, 'default')
    """
    if sets.profile is not None:
        return sets.profile.height_m, "profile"
    heights = {pt.height_m for pt in sets.points or ()}
    if len(heights) == 1:
        return heights.pop(), "points"
    return DEFAULT_EDGE_HEIGHT_M, "default"


def _point_error(exc: EngineInputError, sets: SectionSets, n_main: int) -> EngineInputError:
    """Name the request member behind a kernel error on ``points[i]`` of the combined points."""
    if not exc.field.startswith("points["):
        return exc
    i = int(exc.field[len("points["):].split("]", 1)[0])
    if i >= n_main:
        key = f"{EDGES[i - n_main]}_m"
        return type(exc)(f"right_of_way.{key}", f"{exc.message} (the right-of-way edge point)")
    if sets.profile is not None:
        return type(exc)("profile", f"{exc.message} (a point of the requested profile)")
    return exc


def evaluate_section(section: CrossSection, frequency_hz: float, sets: SectionSets, *,
                     soil_resistivity_ohm_m: float | None = None) -> Evaluation:
    """Fields of a cross-section on its evaluation sets.

    Parameters
    ----------
    section : CrossSection
    frequency_hz : float
        [Hz].
    sets : SectionSets
        The profile or the points, and optionally the right-of-way edges (evaluated at
        :func:`edge_height`, at exactly the edge offsets).
    soil_resistivity_ohm_m : float, optional
        See :func:`models.cross_section.evaluate_cross_section`.

    Returns
    -------
    Evaluation
        ``geometry == "cross_section"``; set ``"points"`` (role ``lateral_profile``
        for a profile, else ``points``) and, with edges, set ``"right_of_way"`` (left
        edge first; ``details["height_basis"]``).

    Raises
    ------
    EngineInputError
        Bad geometry or loading; a point inside a conductor names ``profile``,
        ``points[i]`` or ``right_of_way.left_m`` / ``right_of_way.right_m``.

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor
    >>> line = CrossSection((Circuit("c1", "overhead", 132.0, 400.0,
    ...     (Conductor("L1", -5.0, 12.0), Conductor("L2", 0.0, 12.0), Conductor("L3", 5.0, 12.0)),
    ...     Bundle(0.025)),))
    >>> ev = evaluate_section(line, 50.0, SectionSets(SectionProfile(-20.0, 20.0, 10.0, 1.0),
    ...                                                right_of_way=SectionRightOfWay(-15.0, 15.0)))
    >>> list(ev.sets), len(ev.sets["points"]), len(ev.everywhere().points_m)
    (['points', 'right_of_way'], 5, 5)
    """
    offsets, heights = section_points(sets)
    n_main = len(offsets)
    row = sets.right_of_way
    if row is not None:
        height_m, basis = edge_height(sets)
        offsets = np.concatenate([offsets, [row.left_m, row.right_m]])
        heights = np.concatenate([heights, [height_m, height_m]])
    try:
        combined = evaluate_cross_section(section, offsets, heights, frequency_hz,
                                          soil_resistivity_ohm_m=soil_resistivity_ohm_m)
    except EngineInputError as exc:
        raise _point_error(exc, sets, n_main) from None
    main = slice(0, n_main)
    out = {"points": EvaluationSet("points", "lateral_profile" if sets.profile is not None else "points", main,
                                   sub_result(combined, main), offset_m=combined.points_m[main, 0])}
    if row is not None:
        edge_rows = slice(n_main, n_main + 2)
        out["right_of_way"] = EvaluationSet(
            "right_of_way", "right_of_way", edge_rows, sub_result(combined, edge_rows), everywhere=False,
            offset_m=combined.points_m[edge_rows, 0], edges=EDGES, note=_HEIGHT_NOTES[basis],
            details={"height_m": float(height_m), "height_basis": basis})
    return Evaluation("cross_section", combined.frequency_hz, combined, out, combined.assumptions)
