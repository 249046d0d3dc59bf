"""Magnetic flux density of infinite straight parallel conductors (2-D Biot–Savart).

Kernels here are pure and vectorised, SI throughout, and do no input checks
(:func:`models.cross_section.evaluate_cross_section` validates first).  Coordinates:
x = offset across the line, y = height above ground; current phasors flow in +z
(out of the x-y plane, right-handed).
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from .units import MU0_H_PER_M


def complex_depth_m(soil_resistivity_ohm_m: float, frequency_hz: float) -> complex:
    """Complex penetration depth of the earth-return current.

    Parameters
    ----------
    soil_resistivity_ohm_m : float
        Resistivity of homogeneous, non-magnetic soil [ohm m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    complex
        ``p = sqrt(rho / (j omega mu0))`` [m] (principal root, phase -45 deg);
        equivalently ``(1 - j) delta / 2`` with skin depth ``delta = sqrt(2 rho / (omega mu0))``.

    Notes
    -----
    Definition of Deri et al. [1]_ (from memory): the earth behaves as a perfect
    conductor placed at the complex depth ``p`` below the surface, so the image
    of a conductor at height h carries the opposite current at depth ``h + 2p``.
    Some texts call the reciprocal ``1/p`` "p"; this function pins the definition.

    References
    ----------
    .. [1] A. Deri, G. Tevan, A. Semlyen and A. Castanheira, "The complex ground
       return plane: a simplified model for homogeneous and multi-layer earth
       return", IEEE Trans. Power App. Syst., vol. PAS-100, no. 8,
       pp. 3686-3693, 1981, doi:10.1109/TPAS.1981.317011.

    Examples
    --------
    >>> p = complex_depth_m(100.0, 50.0)
    >>> round(p.real, 2), round(p.imag, 2)
    (355.88, -355.88)
    """
    omega = 2.0 * math.pi * frequency_hz
    return cmath.sqrt(soil_resistivity_ohm_m / (1j * omega * MU0_H_PER_M))


def flux_density_phasors(obs_x_m, obs_y_m, cond_x_m, cond_y_m, current_a, *,
                         complex_depth_m: complex | None = None) -> np.ndarray:
    """Flux density phasors of infinite straight conductors at observation points.

    Parameters
    ----------
    obs_x_m, obs_y_m : array_like, shape (n,)
        Observation offset and height [m].
    cond_x_m, cond_y_m : array_like, shape (m,)
        Conductor offset and height [m] (one entry per physical wire).
    current_a : complex array_like, shape (m,)
        rms current phasor of each wire, positive along +z [A].
    complex_depth_m : complex, optional
        Deri complex depth ``p`` [m] (:func:`complex_depth_m`).  When given, each
        conductor gets an earth-return image carrying ``-I`` at
        ``(x_k, -(y_k + 2 p))``; when None, earth currents are neglected (no image).

    Returns
    -------
    complex ndarray, shape (n, 2)
        rms phasor components (Bx, By) [T].

    Notes
    -----
    Each wire contributes ``mu0 I / (2 pi rho^2) * (-(y - y_k), x - x_k)``
    (Biot–Savart / Ampère for an infinite straight filament; check-values.md
    section 7.3).  The image term uses the same expression with the complex
    image height, i.e. its analytic continuation, as in Deri et al. (see
    :func:`complex_depth_m`).  Points on a wire axis give inf/nan; callers must
    keep observation points outside the conductors.

    Examples
    --------
    >>> b = flux_density_phasors([1.0], [0.0], [0.0], [0.0], [1000.0 + 0j])
    >>> round(float(b[0, 1].real) * 1e6, 4)   # mu0 I / (2 pi r) in µT
    200.0
    """
    ox = np.asarray(obs_x_m, dtype=float).ravel()
    oy = np.asarray(obs_y_m, dtype=float).ravel()
    cx = np.asarray(cond_x_m, dtype=float).ravel()
    cy = np.asarray(cond_y_m, dtype=float).ravel()
    current = np.asarray(current_a, dtype=complex).ravel()
    c = MU0_H_PER_M / (2.0 * math.pi)
    # Accumulate real and imaginary parts separately: the geometry is real, so
    # this keeps every array operation in float64 (no complex temporaries).
    bx_re = np.zeros(ox.size)
    bx_im = np.zeros(ox.size)
    by_re = np.zeros(ox.size)
    by_im = np.zeros(ox.size)
    for xk, yk, ik in zip(cx, cy, current):
        if ik == 0:
            continue
        dx = ox - xk
        dy = oy - yk
        inv = dx * dx
        inv += dy * dy
        np.divide(c, inv, out=inv)
        gx = dy * inv
        gy = dx * inv
        # Bx = -I * dy / r^2, By = I * dx / r^2  (times c)
        bx_re -= ik.real * gx
        bx_im -= ik.imag * gx
        by_re += ik.real * gy
        by_im += ik.imag * gy
    b = np.empty((ox.size, 2), dtype=complex)
    b[:, 0] = bx_re + 1j * bx_im
    b[:, 1] = by_re + 1j * by_im
    if complex_depth_m is not None:
        p = complex(complex_depth_m)
        for xk, yk, ik in zip(cx, cy, current):
            if ik == 0:
                continue
            dx = ox - xk
            dyi = oy + (yk + 2.0 * p)          # complex: observation minus image height
            w = (-c * ik) / (dx * dx + dyi * dyi)
            b[:, 0] -= dyi * w
            b[:, 1] += dx * w
    return b
