"""Electric field of overhead conductors over flat, perfectly conducting ground.

Charge simulation with Maxwell potential coefficients and ground images
(image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)): the conductor voltages fix complex line charges
through ``V = P Q``; each charge and its image ``-Q`` below ground then give the
field anywhere in the air.  Kernels are pure and vectorised, SI throughout, and
do no input checks.  Coordinates: x = offset, y = height above ground (y > 0).
"""

from __future__ import annotations

import functools
import math

import numpy as np

from .magnetic import flat_inputs
from .units import EPS0_F_PER_M


def potential_coefficients(x_m, y_m, radius_m) -> np.ndarray:
    """Maxwell potential coefficient matrix with ground images [m/F].

    Parameters
    ----------
    x_m, y_m : array_like, shape (m,)
        Wire centre offset and height above ground [m] (all y > radius).
    radius_m : array_like, shape (m,)
        Wire radius [m].

    Returns
    -------
    ndarray, shape (m, m)
        ``P_ii = ln(2 y_i / r_i) / (2 pi eps0)``,
        ``P_ij = ln(D'_ij / d_ij) / (2 pi eps0)`` with ``d_ij`` the wire-to-wire
        distance and ``D'_ij`` the wire-to-image distance [1]_ (from memory).

    References
    ----------
    .. [1] J. D. Deno and L. E. Zaffanella, "Field effects of overhead transmission
       lines and stations", ch. 8 in *Transmission Line Reference Book, 345 kV and
       Above*, 2nd ed., EPRI, 1982.

    Examples
    --------
    >>> p = potential_coefficients([0.0], [10.0], [0.01])
    >>> round(float(p[0, 0]) * 2 * np.pi * 8.8541878188e-12, 6)   # ln(2000)
    7.600902
    """
    x = np.asarray(x_m, dtype=float).ravel()
    y = np.asarray(y_m, dtype=float).ravel()
    r = np.asarray(radius_m, dtype=float).ravel()
    dx = x[:, None] - x[None, :]
    d = np.hypot(dx, y[:, None] - y[None, :])
    d_image = np.hypot(dx, y[:, None] + y[None, :])
    np.fill_diagonal(d, 1.0)
    ratio = d_image / d
    np.fill_diagonal(ratio, 2.0 * y / r)
    return np.log(ratio) / (2.0 * math.pi * EPS0_F_PER_M)


def line_charges(x_m, y_m, radius_m, voltage_v) -> np.ndarray:
    """Line charge phasors on wires held at given voltages to ground [C/m].

    Parameters
    ----------
    x_m, y_m, radius_m : array_like, shape (m,)
        Wire positions and radii [m] (see :func:`potential_coefficients`).
    voltage_v : complex array_like, shape (m,)
        rms voltage-to-ground phasor of each wire [V] (0 for earth wires).

    Returns
    -------
    complex ndarray, shape (m,)
        rms line-charge phasors [C/m].

    Notes
    -----
    ``P`` is real, so ``P Q = V`` is solved once for the real and imaginary
    parts together (two right-hand sides of one real system).  Each wire's charge
    sits on its axis (valid for radius << spacing, common practice); a bundle is
    modelled by giving each subconductor the bundle's voltage.

    Examples
    --------
    >>> q = line_charges([0.0], [10.0], [0.01], [1000.0 + 0j])
    >>> bool(np.isclose(q[0], 2 * np.pi * 8.8541878188e-12 * 1000 / np.log(2000)))
    True
    """
    p = potential_coefficients(x_m, y_m, radius_m)
    v = np.asarray(voltage_v, dtype=complex).ravel()
    if v.size == 0:
        return np.zeros(0, dtype=complex)
    sol = np.linalg.solve(p, np.column_stack([v.real, v.imag]))
    return sol[:, 0] + 1j * sol[:, 1]


def electric_field_phasors(obs_x_m, obs_y_m, cond_x_m, cond_y_m, charge_c_per_m) -> np.ndarray:
    """Electric field phasors of line charges over perfectly conducting ground.

    Parameters
    ----------
    obs_x_m, obs_y_m : array_like, shape (n,)
        Observation offset and height [m] (y >= 0, outside the wires).
    cond_x_m, cond_y_m : array_like, shape (m,)
        Wire offset and height [m].
    charge_c_per_m : complex array_like, shape (m,)
        rms line-charge phasors [C/m] (:func:`line_charges`).

    Returns
    -------
    complex ndarray, shape (n, 2)
        rms phasor components (Ex, Ey) [V/m] of the unperturbed field.

    Notes
    -----
    ``E = sum_k Q_k / (2 pi eps0) [(r - r_k)/|r - r_k|^2 - (r - r'_k)/|r - r'_k|^2]``
    with image ``r'_k = (x_k, -y_k)`` (image method over perfectly conducting ground, EPRI Transmission Line Reference Book 345 kV and Above, 2nd ed. 1982, ch. 8 (from memory)).  On the ground
    (y = 0) the horizontal terms cancel pairwise, so the field is vertical.  Points
    on a wire axis give inf/nan; callers must keep points outside the wires.

    Examples
    --------
    >>> e = electric_field_phasors([0.0], [0.0], [0.0], [10.0], [1e-6 + 0j])
    >>> round(float(e[0, 1].real), 3), float(e[0, 0].real)   # -2 q / (2 pi eps0 h), 0
    (-3595.021, 0.0)
    """
    ox, oy, cx, cy, q, out = flat_inputs(obs_x_m, obs_y_m, cond_x_m, cond_y_m, charge_c_per_m)
    if cx.size == 0 or ox.size == 0:
        return out
    _kernel()(ox, oy, cx, cy, np.ascontiguousarray(q.real), np.ascontiguousarray(q.imag), out)
    out *= 1.0 / (2.0 * math.pi * EPS0_F_PER_M)
    return out


@functools.cache
def _kernel():
    """Compile (or load from numba's on-disk cache) the point-by-wire loop.

    Serial (``nogil``, no ``parallel``): safe to call from several threads at once.
    """
    import numba

    @numba.njit(cache=True, nogil=True, error_model="numpy")   # IEEE results (inf/nan), no exceptions
    def field(ox, oy, cx, cy, q_re, q_im, out):
        for p in range(ox.size):
            x = ox[p]
            y = oy[p]
            exr = 0.0
            exi = 0.0
            eyr = 0.0
            eyi = 0.0
            for k in range(cx.size):
                dx = x - cx[k]
                dy = y - cy[k]
                dyi = y + cy[k]
                dx2 = dx * dx
                inv = 1.0 / (dx2 + dy * dy)
                inv_i = 1.0 / (dx2 + dyi * dyi)
                # charge q at (x_k, y_k) and image -q at (x_k, -y_k); real geometry,
                # so real and imaginary parts are accumulated as floats
                gx = dx * (inv - inv_i)
                gy = dy * inv - dyi * inv_i
                exr += q_re[k] * gx
                exi += q_im[k] * gx
                eyr += q_re[k] * gy
                eyi += q_im[k] * gy
            out[p, 0] = complex(exr, exi)
            out[p, 1] = complex(eyr, eyi)

    return field
