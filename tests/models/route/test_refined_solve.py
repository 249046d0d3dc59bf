"""Checks of the float32-LU + float64-refinement solve (models/route/refined_solve.py).

Reference: numpy.linalg.solve (LAPACK DGESV, double-precision LU with partial
pivoting), and the residual of the system itself.  The stopping rule is LAPACK
DSGESV's backward-error test (LAPACK Users' Guide, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from models.route import electric3d as e3
from models.route.refined_solve import solve_refined
from tests.models.route.test_electric3d import catenary_wire, polyline_set

EPS = np.finfo(float).eps


def _backward_ok(a, x, b):
    r = b.reshape(len(b), -1) - a @ x.reshape(len(b), -1)
    tol = np.abs(a).sum(axis=1).max() * EPS * math.sqrt(len(b)) * np.abs(x.reshape(len(b), -1)).max(axis=0)
    return bool(np.all(np.abs(r).max(axis=0) <= tol))


@pytest.mark.parametrize("n", [1, 7, 300])
def test_diagonally_dominant_system_matches_double_lu(n):
    rng = np.random.default_rng(n)
    a = rng.normal(size=(n, n)) + np.diag(np.full(n, 3.0 * math.sqrt(n)))
    b = rng.normal(size=(n, 2))
    x, steps = solve_refined(a, b)
    ref = np.linalg.solve(a, b)
    assert steps >= 0  # refined, no fallback
    np.testing.assert_allclose(x, ref, rtol=0, atol=1e-13 * np.abs(ref).max())
    assert _backward_ok(a, x, b)


def test_potential_coefficient_matrix_of_a_sagging_route():
    # The matrix the charge simulation solves (two spans, an angle, 3 phases + earth wire).
    n = 30
    wires = [np.vstack([catenary_wire(300.0, 20.0, 9.0, n, lateral_m=y), catenary_wire(300.0, 20.0, 9.0, n, lateral_m=y)[1:]
                        + [300.0, 0.0, 0.0]]) for y in (-7.0, 0.0, 7.0)]
    wires.append(np.vstack([catenary_wire(600.0, 28.0, 12.0, 2 * n, lateral_m=0.0)]))
    volts = list(230e3 * np.exp(1j * np.deg2rad([0.0, -120.0, 120.0]))) + [0.0]
    seg = polyline_set(wires, volts, [0.1, 0.1, 0.1, 0.008])
    p = e3.matching_matrix(seg)
    v = np.asarray(seg.wire_voltage_v)[np.asarray(seg.wire_index)]
    rhs = np.column_stack([v.real, v.imag])
    x, steps = solve_refined(p, rhs)
    ref = np.linalg.solve(p, rhs)
    assert 0 <= steps <= 5
    np.testing.assert_allclose(x, ref, rtol=0, atol=1e-13 * np.abs(ref).max())
    assert np.linalg.cond(p) < 100  # the premise of the method (module notes)


def test_vector_right_hand_side_and_zero_column():
    a = np.array([[4.0, 1.0, 0.0], [1.0, 5.0, 2.0], [0.0, 2.0, 6.0]])
    b = np.array([1.0, -2.0, 3.0])
    x, _ = solve_refined(a, b)
    assert x.shape == (3,)
    np.testing.assert_allclose(a @ x, b, rtol=0, atol=1e-15 * 6)
    x2, steps = solve_refined(a, np.column_stack([b, np.zeros(3)]))
    assert steps >= 0 and np.all(x2[:, 1] == 0)


def test_ill_conditioned_matrix_falls_back_to_the_double_lu():
    # Hilbert matrix of order 12: cond ~ 1.7e16 > 1/eps32, refinement cannot converge.
    n = 12
    a = 1.0 / (np.arange(n)[:, None] + np.arange(n)[None, :] + 1.0)
    b = np.ones(n)
    x, steps = solve_refined(a, b)
    assert steps == -1
    np.testing.assert_array_equal(x, np.linalg.solve(a, b))


def test_entries_beyond_float32_range_fall_back():
    a = np.diag([1e39, 2e39])
    x, steps = solve_refined(a, np.array([1e39, 1e39]))
    assert steps == -1
    np.testing.assert_allclose(x, [1.0, 0.5])


def test_shape_errors():
    with pytest.raises(ValueError):
        solve_refined(np.ones((2, 3)), np.ones(2))
    with pytest.raises(ValueError):
        solve_refined(np.eye(2), np.ones(3))
