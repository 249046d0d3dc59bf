"""Clearance needed: the lowest conductor height at which a field stays below a threshold.

The whole tower head moves rigidly: every overhead conductor and every earth wire of
the section is raised by the same ``dz`` (underground cables stay where they are).
The reported clearance is the height of the lowest overhead phase position (bundle
centre) above ground.  The field is the resultant rms E or B at one observation
height, at every offset the study looks at (:func:`study_offsets`).

Solve: ``g(h) = max field(h) - limit``.  The range ``[min_clearance_m,
max_clearance_m]`` is scanned at steps of at most :data:`SCAN_STEP_M`; the first
scan interval where ``g`` changes from > 0 to <= 0 is then bisected until it is no
wider than ``tolerance_m``.  The answer is the upper end of that interval: the field
meets the limit there, and exceeds it at the lower end, less than ``tolerance_m``
below.  Bisection needs no derivative and cannot leave its bracket, so it holds for
fields that are not monotonic in height (E far from the line can grow as the line
rises); the scan finds the lowest crossing to within its step.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from ..cross_section import evaluate_cross_section
from ..errors import EngineInputError, must_be
from ..evaluation import Evaluation
from ..geometry import CrossSection

__all__ = ["SCAN_STEP_M", "ClearanceResult", "clearance_needed", "field_maximum", "lowest_clearance_m",
           "raise_section", "study_offsets"]

SCAN_STEP_M = 0.5
"""Largest step [m] of the scan that looks for the first crossing before bisection."""

MAX_SCAN_POINTS = 201
"""Most heights of the scan (a wider range gets a coarser step)."""


def lowest_clearance_m(section: CrossSection, field: str = "study") -> float:
    """Height [m] of the lowest overhead phase position (bundle centre) of the section."""
    heights = [k.height_m for c in section.circuits if c.kind == "overhead" for k in c.conductors]
    if not heights:
        raise EngineInputError(f"{field}.kind", "A clearance study needs at least one overhead circuit.")
    return float(min(heights))


def raise_section(section: CrossSection, dz_m: float) -> CrossSection:
    """The section with every overhead conductor and earth wire raised by ``dz_m`` (lowered when negative)."""
    circuits = tuple(dataclasses.replace(c, conductors=tuple(dataclasses.replace(k, height_m=k.height_m + dz_m)
                                                             for k in c.conductors))
                     if c.kind == "overhead" else c for c in section.circuits)
    wires = tuple(dataclasses.replace(w, height_m=w.height_m + dz_m) for w in section.earth_wires)
    return dataclasses.replace(section, circuits=circuits, earth_wires=wires)


def study_offsets(evaluation: Evaluation, beyond_offset_m: float | None) -> np.ndarray:
    """Offsets [m] a study looks at: those of every evaluated point and of the right-of-way edges.

    With ``beyond_offset_m``, only offsets with ``|offset| >= beyond_offset_m``, plus
    ``-beyond_offset_m`` and ``+beyond_offset_m`` themselves (the field usually binds
    at the nearest allowed point).  Sorted, without repeats.
    """
    parts = [evaluation.everywhere().points_m[:, 0]]
    edges = evaluation.by_role("right_of_way")
    if edges is not None:
        parts.append(edges.field.points_m[:, 0])
    offsets = np.concatenate(parts)
    if beyond_offset_m is not None:
        d = abs(float(beyond_offset_m))
        offsets = np.concatenate([offsets[np.abs(offsets) >= d], [-d, d]])
    return np.unique(offsets)


def field_maximum(section: CrossSection, frequency_hz: float, quantity: str, offsets_m, height_m: float, *,
                  soil_resistivity_ohm_m: float | None = None) -> tuple[float, float]:
    """Largest resultant rms E [V/m] or B [T] over ``offsets_m`` at ``height_m``, and its offset (first if tied)."""
    res = evaluate_cross_section(section, offsets_m, height_m, frequency_hz,
                                 soil_resistivity_ohm_m=soil_resistivity_ohm_m)
    values = res.e_rms_v_per_m if quantity == "E" else res.b_rms_t
    k = int(np.argmax(values))
    return float(values[k]), float(res.points_m[k, 0])


@dataclass(frozen=True)
class ClearanceResult:
    """Outcome of :func:`clearance_needed` (SI: heights [m], values [V/m] or [T]).

    ``achieved`` False: no clearance in the range meets the limit; ``clearance_m`` is
    then None and ``best_*`` say where in the scan the field was lowest.
    """

    achieved: bool
    clearance_m: float | None
    raise_m: float | None
    given_clearance_m: float
    given_value_si: float
    given_offset_m: float
    value_si: float | None
    binding_offset_m: float | None
    below_clearance_m: float | None
    below_value_si: float | None
    best_clearance_m: float
    best_value_si: float
    tolerance_m: float
    evaluations: int
    note: str


def clearance_needed(section: CrossSection, frequency_hz: float, quantity: str, limit_si: float, offsets_m,
                     height_m: float, min_clearance_m: float, max_clearance_m: float, *, tolerance_m: float = 0.01,
                     soil_resistivity_ohm_m: float | None = None, field: str = "study") -> ClearanceResult:
    """The lowest clearance of the lowest conductor at which ``quantity`` <= ``limit_si`` at every offset.

    Parameters
    ----------
    section : CrossSection
        The line as given (validated); its lowest overhead phase position is the clearance.
    frequency_hz : float
    quantity : {"E", "B"}
    limit_si : float
        [V/m] or [T].
    offsets_m : array_like
        Offsets looked at [m] (:func:`study_offsets`), all at ``height_m``.
    height_m : float
        Observation height above ground [m]; must lie below ``min_clearance_m``.
    min_clearance_m, max_clearance_m : float
        Range searched [m].
    tolerance_m : float
        Width of the final bracket [m]: the limit is crossed between
        ``clearance_m - tolerance_m`` and ``clearance_m``.
    soil_resistivity_ohm_m : float, optional
    field : str
        Error field prefix.

    Raises
    ------
    EngineInputError
        A range that puts conductors into the ground or the observation points
        (field ``{field}.min_clearance_m``), an empty range or a bad tolerance.
    """
    lo, hi, tol = float(min_clearance_m), float(max_clearance_m), float(tolerance_m)
    if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
        raise must_be(f"{field}.max_clearance_m", f"greater than min_clearance_m = {lo!r} m", max_clearance_m,
                      EngineInputError)
    if not (math.isfinite(tol) and 0.0 < tol <= 1.0):
        raise must_be(f"{field}.tolerance_m", "between 0 and 1 m (greater than 0)", tolerance_m, EngineInputError)
    if not lo > height_m:
        raise must_be(f"{field}.min_clearance_m", f"above the observation height ({height_m!r} m)", min_clearance_m,
                      EngineInputError)
    offsets = np.asarray(offsets_m, dtype=float)
    h0 = lowest_clearance_m(section, field)
    count = [0]

    def value(h: float) -> tuple[float, float]:
        count[0] += 1
        try:
            return field_maximum(raise_section(section, h - h0), frequency_hz, quantity, offsets, height_m,
                                 soil_resistivity_ohm_m=soil_resistivity_ohm_m)
        except EngineInputError as exc:
            raise EngineInputError(f"{field}.min_clearance_m",
                                   f"At a clearance of {h!r} m the line is not possible: {exc.message}") from None

    given_value, given_offset = value(h0)
    n = min(MAX_SCAN_POINTS, int(math.ceil((hi - lo) / SCAN_STEP_M)) + 1)
    scan = np.linspace(lo, hi, max(n, 2))
    best = (math.inf, lo)
    prev = None
    for h in scan:
        v, x = value(float(h))
        best = min(best, (v, float(h)))
        if v <= limit_si:
            if prev is None:
                return ClearanceResult(True, float(h), float(h) - h0, h0, given_value, given_offset, v, x, None,
                                       None, float(h), v, tol, count[0],
                                       "The limit is met already at the lowest clearance of the range.")
            a, b, vb, xb = prev[0], float(h), v, x
            va = prev[1]
            while b - a > tol:
                m = 0.5 * (a + b)
                vm, xm = value(m)
                if vm <= limit_si:
                    b, vb, xb = m, vm, xm
                else:
                    a, va = m, vm
            return ClearanceResult(True, b, b - h0, h0, given_value, given_offset, vb, xb, a, va, b, vb, tol,
                                   count[0], "The limit is crossed between below_clearance_m and clearance_m.")
        prev = (float(h), v)
    return ClearanceResult(False, None, None, h0, given_value, given_offset, None, None, None, None, best[1],
                           best[0], tol, count[0],
                           "No clearance in the range keeps the field at or below the limit; best_clearance_m is "
                           "where the scan found the lowest field.")
