"""Compare computed fields with reference levels: exposure index, margin, compliance distances.

Pure functions on :class:`models.results.FieldResult` and
:class:`models.catalogue.Threshold`; no I/O, no configuration.

Definitions
-----------
* **exposure index** ``X / X_R``: the field (resultant rms by default) divided by the
  limit at the same frequency.  The level is met when the index is <= 1
  (a field exactly at the limit passes).
* **margin** ``X_R - X`` [SI units]; negative when the limit is exceeded.
* **compliance distance** (lateral profile only): see :func:`compliance_distances`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from .catalogue import Threshold, thresholds_for
from .errors import CatalogueError, EngineInputError, must_be
from .results import FieldResult

__all__ = [
    "ThresholdCompliance",
    "compliance_distances",
    "evaluate_compliance",
    "harmonic_exposure_index",
    "multi_frequency_exposure_index",
]

QUANTITY_KINDS = ("resultant", "maximum")
_FREQ_REL_TOL = 1e-9


@dataclass(frozen=True)
class ThresholdCompliance:
    """Outcome of comparing one field quantity with one threshold.

    Attributes
    ----------
    threshold : Threshold
    max_value_si : float
        Largest field value over the points [V/m for E, T for B].
    max_index : int
        Index (in the result's point order) of the first point where it occurs.
    exposure_index : float
        ``max_value_si / threshold.limit_si`` [-].
    passes : bool
        ``exposure_index <= 1``.
    margin_si : float
        ``limit_si - max_value_si`` [V/m or T]; negative when exceeded.
    distance_left_m, distance_right_m : float or None
        Compliance distances from the centre line [m], see :func:`compliance_distances`;
        None when not determinable (or no lateral profile was given).
    distance_note : str
        Why a distance is 0, None or limited; "" when both are plain crossings.
    """

    threshold: Threshold
    max_value_si: float
    max_index: int
    exposure_index: float
    passes: bool
    margin_si: float
    distance_left_m: float | None
    distance_right_m: float | None
    distance_note: str


def _side_distance(x: np.ndarray, v: np.ndarray, limit: float, side: str) -> tuple[float | None, str]:
    """Right-side compliance distance for a profile sorted by increasing x (mirror for the left)."""
    if x[-1] <= 0.0:
        return None, f"{side}: the profile does not extend {side} of the centre line"
    if v[-1] > limit:
        return None, (
            f"{side}: limit exceeded at the {side} profile end (|offset| {abs(x[-1]):g} m); widen the profile"
        )
    over = np.flatnonzero(v > limit)
    partial = "" if x[0] <= 0.0 else f" (profile starts at |offset| {abs(x[0]):g} m, inside not assessed)"
    if over.size == 0:
        return 0.0, f"{side}: limit not exceeded{partial}"
    k = int(over[-1])  # k < len(x) - 1 because v[-1] <= limit
    # Linear interpolation of the crossing between x[k] (v > limit) and x[k+1] (v <= limit).
    crossing = x[k] + (v[k] - limit) / (v[k] - v[k + 1]) * (x[k + 1] - x[k])
    if crossing <= 0.0:
        return 0.0, f"{side}: limit not exceeded {side} of the centre line"
    return float(crossing), ("" if not partial else f"{side}:{partial}")


def compliance_distances(
    offset_m: np.ndarray, values: np.ndarray, limit: float
) -> tuple[float | None, float | None, str]:
    """Distances from the centre line beyond which a lateral profile stays at or below a limit.

    Parameters
    ----------
    offset_m : ndarray, shape (n,)
        Lateral offset of each point from the centre line [m]; negative = left,
        positive = right.  Any order; repeated offsets are merged by taking the
        largest value there (e.g. several heights on one vertical).
    values : ndarray, shape (n,)
        Field at each point [same unit as ``limit``].
    limit : float
        Threshold [same unit], > 0.

    Returns
    -------
    distance_left_m, distance_right_m : float or None
        [m], >= 0.
    note : str
        "; "-joined explanations for the sides that are not plain crossings.

    Notes
    -----
    The field between points is taken as the piecewise-linear interpolant ``v(x)``
    through the sorted points.  On the right side the distance is
    ``d_R = sup{x >= 0 : v(x) > limit}``, i.e. the offset of the outermost crossing
    from above to at-or-below the limit, found by linear interpolation between the
    outermost exceeding point and its outer neighbour.  The left side is the same
    with x -> -x.  Special cases, per side:

    * never exceeded on that side (including exceedance only on the other side of the
      centre line, interpolation included): ``0.0``, with a note;
    * exceeded at the outermost profile point of that side: ``None``, note "widen the
      profile", because the field may stay above the limit beyond the profile;
    * no point strictly beyond the centre line on that side: ``None``, with a note.

    A field exactly equal to the limit is not an exceedance.  Separate humps are
    handled by taking the outermost crossing.  Where the true field is monotone
    between the two points that bracket the crossing, the true crossing lies between
    them, so the error is at most the point spacing there; refine the profile near
    the crossing when that matters.

    Examples
    --------
    >>> x = np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    >>> compliance_distances(x, np.array([0.0, 2.0, 4.0, 2.0, 0.0]), 1.0)[:2]
    (1.5, 1.5)
    """
    x = np.asarray(offset_m, dtype=float).reshape(-1)
    v = np.asarray(values, dtype=float).reshape(-1)
    if x.shape != v.shape:
        raise must_be("lateral_offset_m", f"of shape {v.shape} (one offset per point)", x.shape)
    if x.size == 0:
        raise must_be("lateral_offset_m", "non-empty", x.size)
    if not np.all(np.isfinite(x)):
        raise must_be("lateral_offset_m", "finite", x[~np.isfinite(x)][:3].tolist())
    if not np.all(np.isfinite(v)):
        raise must_be("values", "finite", v[~np.isfinite(v)][:3].tolist())
    if not (math.isfinite(limit) and limit > 0):
        raise must_be("limit", "finite and > 0", limit)
    # Sort and merge duplicates (max per offset).
    xu, inverse = np.unique(x, return_inverse=True)
    vu = np.full(xu.shape, -np.inf)
    np.maximum.at(vu, inverse, v)
    right, note_r = _side_distance(xu, vu, limit, "right")
    left, note_l = _side_distance(-xu[::-1], vu[::-1], limit, "left")
    note = "; ".join(n for n in (note_l, note_r) if n)
    return left, right, note


def _values(result: FieldResult, quantity: str, quantity_kind: str) -> np.ndarray:
    if quantity == "E":
        return result.e_rms_v_per_m if quantity_kind == "resultant" else result.e_max_v_per_m
    return result.b_rms_t if quantity_kind == "resultant" else result.b_max_t


def evaluate_compliance(
    result: FieldResult,
    thresholds: Sequence[Threshold],
    *,
    lateral_offset_m: np.ndarray | None = None,
    quantity_kind: str = "resultant",
) -> list[ThresholdCompliance]:
    """Compare a field result with thresholds.

    Parameters
    ----------
    result : FieldResult
        Field phasors at n points; E thresholds use ``e_rms_v_per_m`` [V/m], B
        thresholds ``b_rms_t`` [T] (or the ellipse semi-major axes with
        ``quantity_kind="maximum"``).
    thresholds : sequence of Threshold
        From :func:`models.catalogue.thresholds_for` or ``custom_threshold``, at
        ``result.frequency_hz``.
    lateral_offset_m : ndarray, shape (n,), optional
        Offset of each point from the centre line [m] (negative = left); when given,
        compliance distances are computed (:func:`compliance_distances`).
    quantity_kind : {"resultant", "maximum"}
        Resultant rms (root-sum-square of components; the usual compliance quantity,
        common practice, IEEE Std 644 from memory) or the maximum (ellipse semi-major).

    Returns
    -------
    list of ThresholdCompliance
        One per threshold, in order.

    Raises
    ------
    EngineInputError
        Bad ``quantity_kind``, empty result, non-finite field values or offsets, or
        ``lateral_offset_m`` of the wrong length.
    CatalogueError
        A threshold evaluated at another frequency than the result (``thresholds[i]``).

    Examples
    --------
    >>> from models.catalogue import custom_threshold
    >>> res = FieldResult(np.zeros((1, 2)), 50.0, np.zeros((1, 2), complex),
    ...                   np.array([[3e-6 + 0j, 4e-6j]]))
    >>> c = evaluate_compliance(res, [custom_threshold("x", "B", 10, "uT", 50.0)])[0]
    >>> round(c.exposure_index, 6), c.passes
    (0.5, True)
    """
    if quantity_kind not in QUANTITY_KINDS:
        raise must_be("quantity_kind", "'resultant' or 'maximum'", quantity_kind)
    n = int(np.asarray(result.points_m).shape[0]) if np.ndim(result.points_m) else 0
    if n == 0:
        raise must_be("points", "at least one observation point", n)
    offsets = None
    if lateral_offset_m is not None:
        offsets = np.asarray(lateral_offset_m, dtype=float).reshape(-1)
        if offsets.shape != (n,):
            raise must_be("lateral_offset_m", f"one offset per point ({n})", int(offsets.size))
    cache: dict[str, np.ndarray] = {}
    out: list[ThresholdCompliance] = []
    for i, t in enumerate(thresholds):
        if not math.isclose(t.frequency_hz, result.frequency_hz, rel_tol=_FREQ_REL_TOL):
            raise CatalogueError(
                f"thresholds[{i}]",
                f"Threshold {t.level_id!r} was evaluated at {t.frequency_hz:g} Hz but the field is at "
                f"{result.frequency_hz:g} Hz.",
            )
        if t.quantity not in cache:
            vals = np.asarray(_values(result, t.quantity, quantity_kind), dtype=float)
            if vals.shape != (n,):
                raise must_be(f"result.{t.quantity}", f"one value per point ({n})", vals.shape)
            if not np.all(np.isfinite(vals)):
                raise must_be(f"result.{t.quantity}", "finite at every point", "non-finite values")
            cache[t.quantity] = vals
        vals = cache[t.quantity]
        k = int(np.argmax(vals))
        vmax = float(vals[k])
        if offsets is not None:
            left, right, note = compliance_distances(offsets, vals, t.limit_si)
        else:
            left, right, note = None, None, ""
        index = vmax / t.limit_si
        out.append(
            ThresholdCompliance(
                threshold=t,
                max_value_si=vmax,
                max_index=k,
                exposure_index=index,
                passes=bool(index <= 1.0),
                margin_si=t.limit_si - vmax,
                distance_left_m=left,
                distance_right_m=right,
                distance_note=note,
            )
        )
    return out


def multi_frequency_exposure_index(
    components: Sequence[tuple[float, float]],
    thresholds_by_frequency: Mapping[float, Threshold] | Sequence[Threshold],
) -> float:
    """Summed exposure index for a field with several frequency components (harmonics).

    Parameters
    ----------
    components : sequence of (frequency_hz, value_si)
        rms amplitude of each spectral component of one quantity [V/m for E, T for B].
    thresholds_by_frequency : mapping frequency_hz -> Threshold, or sequence of Threshold
        The limit of one level at each component's frequency (a sequence is matched
        to ``components`` by position; frequencies must agree).

    Returns
    -------
    float
        ``sum_j X_j / X_R,j`` [-]; the field meets the level when it is <= 1.

    Notes
    -----
    ICNIRP 2010 (Health Phys. 99(6):818-836) requires, for simultaneous exposure at
    several frequencies below 10 MHz, ``sum_j E_j / E_R,j <= 1`` and
    ``sum_j H_j / H_R,j <= 1`` (ICNIRP 2010, eqs. (4) and (5), p. 829, official text; in air
    B = mu0 H, so the B ratios are the H ratios). The sum is
    linear in the amplitudes, i.e. the worst case of all phases aligned; ICNIRP also
    allows a weighted-peak method for non-sinusoidal fields, not implemented here.
    ICNIRP 1998 uses the same linear form below 1 MHz (E) and 150 kHz (H), from
    memory; the catalogue stops at 3 kHz, so the extra high-frequency terms never apply.

    Examples
    --------
    >>> from models.catalogue import thresholds_for
    >>> ts = {f: thresholds_for(["icnirp-2010-public"], f)[1] for f in (50.0, 150.0)}
    >>> round(multi_frequency_exposure_index([(50.0, 50e-6), (150.0, 10e-6)], ts), 6)
    0.3
    """
    comps = list(components)
    if not comps:
        raise must_be("components", "at least one (frequency_hz, value) pair", comps)
    if isinstance(thresholds_by_frequency, Mapping):
        lookup = dict(thresholds_by_frequency)
        matched = []
        for j, (f, _) in enumerate(comps):
            t = lookup.get(f)
            if t is None:
                raise CatalogueError(f"components[{j}]", f"No threshold given for {f:g} Hz.")
            matched.append(t)
    else:
        matched = list(thresholds_by_frequency)
        if len(matched) != len(comps):
            raise must_be("thresholds_by_frequency", f"one threshold per component ({len(comps)})", len(matched))
    quantities = {t.quantity for t in matched}
    if len(quantities) != 1:
        raise CatalogueError("thresholds_by_frequency", f"Mixes quantities {sorted(quantities)}; sum E and B separately.")
    total = 0.0
    for j, ((f, value), t) in enumerate(zip(comps, matched)):
        if not math.isclose(float(f), t.frequency_hz, rel_tol=_FREQ_REL_TOL):
            raise CatalogueError(
                f"components[{j}]", f"Component at {f:g} Hz paired with a threshold at {t.frequency_hz:g} Hz."
            )
        if not (math.isfinite(value) and value >= 0):
            raise must_be(f"components[{j}]", "a finite value >= 0", value)
        total += value / t.limit_si
    return total


def harmonic_exposure_index(level_id: str, quantity: str, components: Sequence[tuple[float, float]]) -> float:
    """:func:`multi_frequency_exposure_index` with the thresholds looked up in the catalogue.

    Parameters
    ----------
    level_id : str
        Catalogue id.
    quantity : {"E", "B"}
    components : sequence of (frequency_hz, value_si)

    Returns
    -------
    float
        Summed exposure index [-].

    Examples
    --------
    >>> round(harmonic_exposure_index("icnirp-1998-public", "B", [(50.0, 50e-6), (150.0, 10e-6)]), 6)
    0.8
    """
    if quantity not in ("E", "B"):
        raise must_be("quantity", "'E' or 'B'", quantity, CatalogueError)
    matched = []
    for j, (f, _) in enumerate(components):
        ts = [t for t in thresholds_for([level_id], f, field="reference_level") if t.quantity == quantity]
        if not ts:
            raise CatalogueError("quantity", f"Reference level {level_id!r} defines no {quantity} limit.")
        matched.append(ts[0])
    return multi_frequency_exposure_index(components, matched)
