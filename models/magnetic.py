"""Magnetic flux density of infinite straight parallel conductors (2-D Biot–Savart).

Kernels here are pure and vectorised, SI throughout, and do no input checks
(:func:`models.cross_section.evaluate_cross_section` validates first).  Coordinates:
x = offset across the line, y = height above ground; current phasors flow in +z
(out of the x-y plane, right-handed).
"""

from __future__ import annotations

import cmath
import functools
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
    (Biot–Savart / Ampère for an infinite straight filament; the row's provenance in models/data/reference_levels.json
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
    ox, oy, cx, cy, current, out = flat_inputs(obs_x_m, obs_y_m, cond_x_m, cond_y_m, current_a)
    if cx.size == 0 or ox.size == 0:
        return out
    _kernels()[0](ox, oy, cx, cy, np.ascontiguousarray(current.real), np.ascontiguousarray(current.imag), out)
    out *= MU0_H_PER_M / (2.0 * math.pi)
    if complex_depth_m is not None:
        out += earth_return_phasors(ox, oy, cx, cy, current, complex_depth_m)
    return out


def earth_return_phasors(obs_x_m, obs_y_m, cond_x_m, cond_y_m, current_a, complex_depth_m: complex) -> np.ndarray:
    """Flux density of the Deri earth-return images alone [T].

    Parameters
    ----------
    obs_x_m, obs_y_m : array_like, shape (n,)
        Observation offset and height [m].
    cond_x_m, cond_y_m : array_like, shape (m,)
        Conductor offset and height [m].
    current_a : complex array_like, shape (m,)
        rms current phasors along +z [A].
    complex_depth_m : complex
        ``p`` from :func:`complex_depth_m` [m].

    Returns
    -------
    complex ndarray, shape (n, 2)
        (Bx, By) of images carrying ``-I`` at ``(x_k, -(y_k + 2 p))`` [T]; add it to
        the direct field of :func:`flux_density_phasors`.

    Examples
    --------
    >>> args = ([0.0], [1.0], [0.0], [10.0], [1000.0])
    >>> image = earth_return_phasors(*args, complex_depth_m(1e12, 50.0))
    >>> bool(abs(image).max() < 1e-6 * abs(flux_density_phasors(*args)).max())   # return current far away
    True
    """
    ox, oy, cx, cy, current, out = flat_inputs(obs_x_m, obs_y_m, cond_x_m, cond_y_m, current_a)
    if cx.size == 0 or ox.size == 0:
        return out
    _kernels()[1](ox, oy, cx, cy, current, complex(complex_depth_m), out)
    out *= MU0_H_PER_M / (2.0 * math.pi)
    return out


def flat_inputs(obs_x_m, obs_y_m, cond_x_m, cond_y_m, values):
    """Flat contiguous float/complex arrays for the compiled loops, and a zero (n, 2) output."""
    ox, oy, cx, cy = (np.ascontiguousarray(a, dtype=float).ravel() for a in (obs_x_m, obs_y_m, cond_x_m, cond_y_m))
    vals = np.ascontiguousarray(values, dtype=complex).ravel()
    return ox, oy, cx, cy, vals, np.zeros((ox.size, 2), dtype=complex)


@functools.cache
def _kernels():
    """Compile (or load from numba's on-disk cache) the point-by-wire loops.

    Serial loops (``nogil``, no ``parallel``): safe to call from several threads of a
    web worker at once.  One fused pass per point keeps memory traffic to the output.
    """
    import numba

    @numba.njit(cache=True, nogil=True, error_model="numpy")   # IEEE results (inf/nan), no exceptions
    def direct(ox, oy, cx, cy, i_re, i_im, out):
        for p in range(ox.size):
            x = ox[p]
            y = oy[p]
            bxr = 0.0
            bxi = 0.0
            byr = 0.0
            byi = 0.0
            for k in range(cx.size):
                dx = x - cx[k]
                dy = y - cy[k]
                inv = 1.0 / (dx * dx + dy * dy)
                gx = dy * inv
                gy = dx * inv
                # Bx = -I dy / r^2, By = I dx / r^2   (times mu0 / 2 pi, applied by the caller);
                # real geometry, so real and imaginary parts are accumulated as floats
                bxr -= i_re[k] * gx
                bxi -= i_im[k] * gx
                byr += i_re[k] * gy
                byi += i_im[k] * gy
            out[p, 0] += complex(bxr, bxi)
            out[p, 1] += complex(byr, byi)

    @numba.njit(cache=True, nogil=True, error_model="numpy")   # IEEE results (inf/nan), no exceptions
    def image(ox, oy, cx, cy, current, depth, out):
        for p in range(ox.size):
            x = ox[p]
            y = oy[p]
            bx = 0j
            by = 0j
            for k in range(cx.size):
                dx = x - cx[k]
                dyi = y + cy[k] + 2.0 * depth       # observation minus image height (complex)
                w = current[k] / (dx * dx + dyi * dyi)
                # image current -I:  Bx = +I dyi / r^2, By = -I dx / r^2
                bx += dyi * w
                by -= dx * w
            out[p, 0] += bx
            out[p, 1] += by

    return direct, image
