"""Catenary of a conductor hanging in one span, level or with uneven attachment heights.

Coordinates in the vertical plane of the span: ``x`` is the horizontal distance
from the first attachment [m] (0 <= x <= L), ``z`` the height relative to the
first attachment [m]; the second attachment is at (L, dh).  With the catenary
constant ``C = H / w`` (horizontal tension H [N] over weight per length w [N/m],
both constant along the span) and the low point at ``x = a``::

    z(x) = C (cosh((x - a) / C) - cosh(a / C))
         = 2 C sinh((x - 2a) / (2C)) sinh(x / (2C))                       (1)

Requiring z(L) = dh and using cosh p - cosh q = 2 sinh((p+q)/2) sinh((p-q)/2)::

    dh = 2 C sinh(L / 2C) sinh((L - 2a) / 2C)
    a  = L/2 - C asinh(k),    k = dh / (2 C sinh(L / 2C))                 (2)

so the low point moves towards the lower support and leaves the span
(a < 0 or a > L) when one support is far below the other.  The sag at
mid-span, measured vertically below the chord, follows from (1) and (2)::

    D_mid = dh/2 - z(L/2) = C (cosh(L / 2C) - 1) sqrt(1 + k^2)            (3)

which for a level span (k = 0) is the handbook formula D = C (cosh(L/2C) - 1).
The arc length is::

    S = C (sinh((L - a)/C) + sinh(a/C)) = sqrt(dh^2 + (2 C sinh(L/2C))^2)  (4)

(level span: S = 2 C sinh(L/2C) ~ L + w^2 L^3 / (24 H^2)).  The parabolic
approximation of the level-span sag is D ~ w L^2 / (8 H) = L^2 / (8 C).

Everything is written with ``cosh u - 1 = 2 sinh^2(u/2)`` so that very taut
spans (C -> infinity, sag -> 0) keep full precision; ``C = inf`` is the straight
chord.

References
----------
.. [1] Catenary, level-span sag and conductor length: engineering handbook
   formulas, e.g. https://engineeringstuffs.com/important-formulas-in-sag-and-tension-calculations/
   (catenary of a uniform flexible cable, common practice (any statics text)).
.. [2] Uneven supports: equations (2)-(4) are derived above from the catenary
   (1); the low-point form (2) is the classical inclined-span result (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import EngineInputError, GeometryError, must_be

__all__ = [
    "CatenarySpan",
    "catenary_constant_from_sag",
    "catenary_height_m",
    "conductor_length_m",
    "level_span_sag_m",
    "low_point_x_m",
    "midspan_sag_m",
    "parabolic_sag_m",
]


def _cosh_minus_1(u):
    """cosh(u) - 1 without cancellation for small u."""
    s = np.sinh(np.asarray(u, dtype=float) / 2.0)
    return 2.0 * s * s


def _k(span_m, height_difference_m, c_m):
    """k = dh / (2 C sinh(L/2C)) of equation (2); 2 C sinh(L/2C) -> L as C -> inf."""
    return height_difference_m / _two_c_sinh(span_m, c_m)


def _finite_c(c_m):
    """C with inf replaced by 1e300 (same limits: 2 C sinh(L/2C) = L, sag 0) so no branch overflows."""
    c = np.asarray(c_m, dtype=float)
    return np.where(np.isinf(c), 1e300, c)


def _two_c_sinh(span_m, c_m):
    """2 C sinh(L / 2C) [m] (the chord-parallel length; L for a straight conductor)."""
    c = _finite_c(c_m)
    return 2.0 * c * np.sinh(np.asarray(span_m, float) / (2.0 * c))


def level_span_sag_m(span_m, c_m):
    """Exact sag of a level span, D = C (cosh(L / 2C) - 1).

    Parameters
    ----------
    span_m : float or ndarray
        Horizontal span length L [m].
    c_m : float or ndarray
        Catenary constant C = H / w [m] (``inf`` for a straight conductor).

    Returns
    -------
    float or ndarray
        Sag at mid-span below the attachment points [m].

    References
    ----------
    Engineering handbook catenary formula (catenary of a uniform flexible cable, common practice (any statics text)).

    Examples
    --------
    >>> round(float(level_span_sag_m(500.0, 10_000.0)), 5)
    3.12516
    """
    c = _finite_c(c_m)
    out = np.where(np.isinf(np.asarray(c_m, float)), 0.0, c * _cosh_minus_1(np.asarray(span_m, float) / (2.0 * c)))
    return out[()] if out.ndim == 0 else out


def parabolic_sag_m(span_m, weight_n_per_m, horizontal_tension_n):
    """Parabolic approximation of the level-span sag, D ~ w L^2 / (8 H).

    Parameters
    ----------
    span_m : float or ndarray
        Horizontal span length L [m].
    weight_n_per_m : float or ndarray
        Conductor weight per unit length w [N/m] (any force unit, consistent with H).
    horizontal_tension_n : float or ndarray
        Horizontal tension H [N].

    Returns
    -------
    float or ndarray
        Approximate sag [m].

    References
    ----------
    Engineering handbook parabolic sag formula (catenary of a uniform flexible cable, common practice (any statics text)).

    Examples
    --------
    >>> parabolic_sag_m(500.0, 1.0, 10_000.0)
    3.125
    """
    return weight_n_per_m * span_m**2 / (8.0 * horizontal_tension_n)


def low_point_x_m(span_m, height_difference_m, c_m):
    """Horizontal position of the catenary's low point, a = L/2 - C asinh(k), eq. (2).

    Parameters
    ----------
    span_m : float or ndarray
        Horizontal span length L [m].
    height_difference_m : float or ndarray
        Height of the second attachment minus the first, dh [m].
    c_m : float or ndarray
        Catenary constant C [m].

    Returns
    -------
    float or ndarray
        Distance of the low point from the first attachment [m]; < 0 or > L when
        the low point falls outside the span.  For a straight chord (C = inf) the
        low end of the chord is returned (L/2 for a level chord).

    Examples
    --------
    >>> float(low_point_x_m(300.0, 0.0, 1000.0))
    150.0
    """
    L = np.asarray(span_m, float)
    c = np.asarray(c_m, float)
    k = _k(L, np.asarray(height_difference_m, float), c)
    finite = ~np.isinf(c)
    straight = np.where(np.asarray(height_difference_m) > 0, 0.0, np.where(np.asarray(height_difference_m) < 0, L, L / 2.0))
    out = np.where(finite, L / 2.0 - np.where(finite, c, 0.0) * np.arcsinh(np.where(finite, k, 0.0)), straight)
    return out[()] if out.ndim == 0 else out


def catenary_height_m(x_m, span_m, height_difference_m, c_m):
    """Conductor height along the span relative to the first attachment, eq. (1).

    Parameters
    ----------
    x_m : float or ndarray
        Horizontal distance from the first attachment [m].
    span_m, height_difference_m, c_m : float
        Span length L [m], height difference dh [m], catenary constant C [m]
        (``inf``: the straight chord z = dh x / L).

    Returns
    -------
    float or ndarray
        z(x) [m], same shape as ``x_m``.

    Examples
    --------
    >>> round(float(catenary_height_m(250.0, 500.0, 0.0, 10_000.0)), 5)
    -3.12516
    """
    x = np.asarray(x_m, float)
    if math.isinf(c_m):
        out = height_difference_m * x / span_m
    else:
        a = low_point_x_m(span_m, height_difference_m, c_m)
        out = 2.0 * c_m * np.sinh((x - 2.0 * a) / (2.0 * c_m)) * np.sinh(x / (2.0 * c_m))
    return out[()] if np.ndim(out) == 0 else out


def midspan_sag_m(span_m, height_difference_m, c_m):
    """Sag at mid-span below the chord, D = C (cosh(L/2C) - 1) sqrt(1 + k^2), eq. (3).

    Parameters
    ----------
    span_m : float or ndarray
        Horizontal span length L [m].
    height_difference_m : float or ndarray
        Height difference dh [m].
    c_m : float or ndarray
        Catenary constant C [m].

    Returns
    -------
    float or ndarray
        Vertical distance from the chord down to the conductor at x = L/2 [m].

    Examples
    --------
    >>> round(float(midspan_sag_m(500.0, 0.0, 10_000.0)), 5)
    3.12516
    """
    k = _k(np.asarray(span_m, float), np.asarray(height_difference_m, float), np.asarray(c_m, float))
    return level_span_sag_m(span_m, c_m) * np.sqrt(1.0 + k * k)


def conductor_length_m(span_m, height_difference_m, c_m):
    """Arc length of the conductor in the span, S = sqrt(dh^2 + (2 C sinh(L/2C))^2), eq. (4).

    Parameters
    ----------
    span_m, height_difference_m, c_m : float or ndarray
        Span length L [m], height difference dh [m], catenary constant C [m].

    Returns
    -------
    float or ndarray
        Conductor length between the attachments [m].

    Examples
    --------
    >>> round(float(conductor_length_m(500.0, 0.0, 10_000.0)), 5)
    500.05208
    """
    out = np.hypot(np.asarray(height_difference_m, float), _two_c_sinh(span_m, c_m))
    return out[()] if out.ndim == 0 else out


def catenary_constant_from_sag(span_m: float, height_difference_m: float, sag_m: float, *, field: str = "sag_m") -> float:
    """Catenary constant C whose mid-span sag below the chord equals ``sag_m``.

    Solves eq. (3), D_mid(C) = sag_m, which decreases monotonically in C, by
    bisection on log C followed by Newton polishing (to ~1 ulp).

    Parameters
    ----------
    span_m : float
        Horizontal span length L [m], > 0.
    height_difference_m : float
        Height of the second attachment minus the first [m].
    sag_m : float
        Mid-span sag below the chord [m], >= 0 (0 gives C = inf, the straight chord).
    field : str
        Field path used in error messages.

    Returns
    -------
    float
        C [m].

    Raises
    ------
    EngineInputError
        If ``sag_m`` is negative or not finite, or ``span_m`` is not positive.

    Examples
    --------
    >>> round(catenary_constant_from_sag(500.0, 0.0, 3.1251627), 1)
    10000.0
    """
    if not (math.isfinite(sag_m) and sag_m >= 0.0):
        raise must_be(field, "a finite number >= 0", sag_m, GeometryError)
    if not (math.isfinite(span_m) and span_m > 0.0):
        raise must_be("span_m", "> 0", span_m, GeometryError)
    if sag_m == 0.0:
        return math.inf
    L, dh, D = float(span_m), float(height_difference_m), float(sag_m)

    def f(c):
        with np.errstate(over="ignore"):  # very small C: sinh overflows to inf, sag inf > D
            return float(midspan_sag_m(L, dh, c)) - D

    # Parabolic first guess (level span): C ~ L^2 / (8 D); bracket around it.
    c0 = L * L / (8.0 * D)
    lo, hi = c0 / 2.0, c0 * 2.0
    while f(lo) < 0.0:  # sag at lo too small -> need smaller C
        lo /= 4.0
        if lo < 1e-12 * L:
            raise EngineInputError(field, f"Input {field} cannot be matched by a catenary; received {sag_m!r}.")
    while f(hi) > 0.0:
        hi *= 4.0
    for _ in range(200):
        mid = math.sqrt(lo * hi)
        if f(mid) > 0.0:
            lo = mid
        else:
            hi = mid
        if hi - lo <= 1e-10 * hi:
            break
    c = math.sqrt(lo * hi)
    # Newton polish with a numerical derivative (one or two steps at this precision).
    for _ in range(3):
        h = 1e-6 * c
        d = (f(c + h) - f(c - h)) / (2.0 * h)
        if d == 0.0:
            break
        step = f(c) / d
        c_new = c - step
        if not (lo / 2.0 < c_new < hi * 2.0):
            break
        c = c_new
        if abs(step) <= 1e-15 * c:
            break
    return c


@dataclass(frozen=True)
class CatenarySpan:
    """A conductor in one span: horizontal length, height difference, catenary constant.

    Parameters
    ----------
    span_m : float
        Horizontal distance between the two attachments L [m].
    height_difference_m : float
        z(second attachment) - z(first attachment) [m].
    catenary_constant_m : float
        C = H / w [m]; ``math.inf`` for a straight (taut) conductor.
    """

    span_m: float
    height_difference_m: float
    catenary_constant_m: float

    @classmethod
    def from_sag(cls, span_m: float, height_difference_m: float, sag_m: float, *, field: str = "sag_m") -> "CatenarySpan":
        """Span whose mid-span sag below the chord is ``sag_m`` [m]."""
        return cls(span_m, height_difference_m, catenary_constant_from_sag(span_m, height_difference_m, sag_m, field=field))

    @classmethod
    def from_tension(
        cls, span_m: float, height_difference_m: float, horizontal_tension_n: float, weight_n_per_m: float
    ) -> "CatenarySpan":
        """Span with catenary constant C = H / w (horizontal tension [N] / weight per length [N/m])."""
        return cls(span_m, height_difference_m, horizontal_tension_n / weight_n_per_m)

    @property
    def low_point_x_m(self) -> float:
        """Low-point position from the first attachment [m] (may lie outside [0, L])."""
        return float(low_point_x_m(self.span_m, self.height_difference_m, self.catenary_constant_m))

    @property
    def midspan_sag_m(self) -> float:
        """Sag at mid-span below the chord [m]."""
        return float(midspan_sag_m(self.span_m, self.height_difference_m, self.catenary_constant_m))

    @property
    def length_m(self) -> float:
        """Conductor length between the attachments [m]."""
        return float(conductor_length_m(self.span_m, self.height_difference_m, self.catenary_constant_m))

    @property
    def lowest_height_m(self) -> float:
        """Lowest conductor height in the span, relative to the first attachment [m]."""
        a = self.low_point_x_m
        x = min(max(a, 0.0), self.span_m)
        return float(catenary_height_m(x, self.span_m, self.height_difference_m, self.catenary_constant_m))

    def height_m(self, x_m):
        """Conductor height relative to the first attachment at horizontal distance ``x_m`` [m]."""
        return catenary_height_m(x_m, self.span_m, self.height_difference_m, self.catenary_constant_m)

    def curvature_bound_per_m(self) -> float:
        """max |z''| over the span [1/m]: cosh(max|x - a| / C) / C (0 for a straight chord)."""
        c = self.catenary_constant_m
        if math.isinf(c):
            return 0.0
        a = self.low_point_x_m
        far = max(abs(a), abs(self.span_m - a))
        return math.cosh(far / c) / c
