"""Physical constants and unit helpers (models.units) against scipy.constants (CODATA).

SciPy >= 1.15 ships CODATA 2022 (CODATA 2022 through scipy.constants: the installed SciPy 1.17.1
returns mu_0 = 1.25663706127e-06, epsilon_0 = 8.8541878188e-12).  models.units pins the
values so that the engine does not depend on SciPy at run time.
"""

from __future__ import annotations

import math

import pytest
import scipy.constants as sc

from models import units


def test_mu0_matches_scipy_codata():
    assert units.MU0_H_PER_M == pytest.approx(sc.mu_0, rel=1e-15)
    value, unit, _ = sc.physical_constants["vacuum mag. permeability"]
    assert units.MU0_H_PER_M == pytest.approx(value, rel=1e-15) and unit == "N A^-2"


def test_eps0_matches_scipy_codata():
    assert units.EPS0_F_PER_M == pytest.approx(sc.epsilon_0, rel=1e-15)
    value, unit, _ = sc.physical_constants["vacuum electric permittivity"]
    assert units.EPS0_F_PER_M == pytest.approx(value, rel=1e-15) and unit == "F m^-1"


def test_constants_consistent_with_speed_of_light():
    # Maxwell: c^2 mu0 eps0 = 1 (c exact in SI; CODATA rounding leaves ~1e-10)
    assert sc.c**2 * units.MU0_H_PER_M * units.EPS0_F_PER_M == pytest.approx(1.0, rel=1e-9)


def test_mu0_is_close_to_but_not_the_pre_2019_exact_value():
    # CODATA 2022 through scipy.constants: 4 pi 1e-7 differs from CODATA 2022 by ~1.3e-10 relative
    rel = units.MU0_H_PER_M / (4 * math.pi * 1e-7) - 1
    assert 1e-11 < abs(rel) < 1e-9


def test_conversions():
    assert units.t_to_ut(2e-6) == pytest.approx(2.0)
    assert units.ut_to_t(200.0) == pytest.approx(2e-4)
    assert units.v_per_m_to_kv_per_m(5000.0) == pytest.approx(5.0)
    assert units.kv_to_v(400.0) == pytest.approx(4e5)
    assert units.SQRT3 ** 2 == pytest.approx(3.0, rel=1e-15)
