"""Physical constants and the one place where SI values become presentation units.

The engine computes in SI base units (m, A, V, T, V/m).  Presentation units
(kV, kV/m, µT) appear only in the service's JSON, converted with these helpers.

Constants are CODATA 2022 values (the set shipped by SciPy >= 1.15):
mu_0 = 1.25663706127e-6 N/A^2, epsilon_0 = 8.8541878188e-12 F/m.
They are written out here so that ``models`` does not depend on SciPy;
``tests/models/test_units.py`` checks them against ``scipy.constants``.
"""

from __future__ import annotations

import math

MU0_H_PER_M = 1.25663706127e-6
"""Vacuum magnetic permeability mu_0 [H/m] (CODATA 2022)."""

EPS0_F_PER_M = 8.8541878188e-12
"""Vacuum electric permittivity epsilon_0 [F/m] (CODATA 2022)."""

SQRT3 = math.sqrt(3.0)

T_PER_UT = 1e-6
V_PER_KV = 1e3


def t_to_ut(b_t):
    """Flux density [T] -> [µT].

    >>> t_to_ut(2e-6)
    2.0
    """
    return b_t / T_PER_UT


def ut_to_t(b_ut):
    """Flux density [µT] -> [T]."""
    return b_ut * T_PER_UT


def v_per_m_to_kv_per_m(e_v_per_m):
    """Electric field [V/m] -> [kV/m]."""
    return e_v_per_m / V_PER_KV


def kv_to_v(u_kv):
    """Voltage [kV] -> [V]."""
    return u_kv * V_PER_KV
