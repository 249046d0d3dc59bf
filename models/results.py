"""Result containers and the per-point quantities derived from field phasors.

Field phasors are rms phasors: a component ``F`` (complex) means the real
time signal ``sqrt(2) * Re(F * exp(j*omega*t))``.  Over one cycle the field vector
traces an ellipse.  Three scalar quantities describe it:

* **resultant** ``sqrt(sum |F_i|^2)``: the root-sum-square of the component rms
  values, what three-axis meters record and what compliance uses by default;
* **maximum** (semi-major axis, rms): ``sqrt((|F|^2 + |F.F|) / 2)`` with
  ``F.F = sum F_i^2`` (no conjugate);
* **axial ratio**: minor / major, 0 for a linearly polarised field, 1 for circular.

``resultant^2 = maximum^2 + minimum^2``, so ``maximum <= resultant <= sqrt(2) maximum``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


def resultant_rms(phasors: np.ndarray) -> np.ndarray:
    """Root-sum-square of the component rms values.

    Parameters
    ----------
    phasors : complex ndarray, shape (n, k)
        rms phasor components (k = 2 for a cross-section, 3 in 3-D) [any unit].

    Returns
    -------
    ndarray, shape (n,)
        Resultant rms value [same unit].

    Examples
    --------
    >>> resultant_rms(np.array([[1.0 + 0j, 1j]]))
    array([1.41421356])
    """
    p = np.asarray(phasors)
    return np.sqrt(np.sum(p.real**2 + p.imag**2, axis=-1))


def ellipse_axes(phasors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Semi-major and semi-minor axes (rms) of the polarisation ellipse.

    Parameters
    ----------
    phasors : complex ndarray, shape (n, k)

    Returns
    -------
    major, minor : ndarray, shape (n,)
        rms field along the major and minor axis [same unit as the input].

    Notes
    -----
    Maximising ``|Re(F exp(j phi))|^2`` over phi gives ``(|F|^2 + |F.F|)/2``
    (common practice; see the IEEE Std 644 definitions of "maximum" and
    "resultant" field, from memory).

    Examples
    --------
    >>> major, minor = ellipse_axes(np.array([[1.0 + 0j, 1j]]))   # circular
    >>> float(major[0]), float(minor[0])
    (1.0, 1.0)
    """
    p = np.asarray(phasors)
    norm2 = np.sum(p.real**2 + p.imag**2, axis=-1)
    dot = np.abs(np.sum(p * p, axis=-1))
    major = np.sqrt(np.maximum((norm2 + dot) / 2.0, 0.0))
    minor = np.sqrt(np.maximum((norm2 - dot) / 2.0, 0.0))
    return major, minor


def axial_ratio(phasors: np.ndarray) -> np.ndarray:
    """Minor / major axis of the polarisation ellipse (0 = linear, 1 = circular; 0 where the field is 0)."""
    major, minor = ellipse_axes(phasors)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(major > 0, minor / np.where(major > 0, major, 1.0), 0.0)
    return ratio


@dataclass(frozen=True)
class FieldResult:
    """Fields at a set of observation points.

    Attributes
    ----------
    points_m : ndarray, shape (n, d)
        Observation points [m]; d = 2 (offset, height) for a cross-section,
        d = 3 (x, y, z-up) for a route.
    frequency_hz : float
    e_phasor_v_per_m : complex ndarray, shape (n, d)
        rms phasor components of the unperturbed electric field [V/m].
    b_phasor_t : complex ndarray, shape (n, d)
        rms phasor components of the magnetic flux density [T].
    assumptions : tuple of str
        Plain-language modelling assumptions, carried into reports.
    """

    points_m: np.ndarray
    frequency_hz: float
    e_phasor_v_per_m: np.ndarray
    b_phasor_t: np.ndarray
    assumptions: tuple[str, ...] = field(default_factory=tuple)

    @property
    def e_rms_v_per_m(self) -> np.ndarray:
        """Resultant electric field [V/m] (the default compliance quantity)."""
        return resultant_rms(self.e_phasor_v_per_m)

    @property
    def b_rms_t(self) -> np.ndarray:
        """Resultant magnetic flux density [T] (the default compliance quantity)."""
        return resultant_rms(self.b_phasor_t)

    @property
    def e_max_v_per_m(self) -> np.ndarray:
        """Semi-major axis of the E ellipse [V/m]."""
        return ellipse_axes(self.e_phasor_v_per_m)[0]

    @property
    def b_max_t(self) -> np.ndarray:
        """Semi-major axis of the B ellipse [T]."""
        return ellipse_axes(self.b_phasor_t)[0]

    @property
    def e_axial_ratio(self) -> np.ndarray:
        return axial_ratio(self.e_phasor_v_per_m)

    @property
    def b_axial_ratio(self) -> np.ndarray:
        return axial_ratio(self.b_phasor_t)
