"""Dense real linear solve: float32 LU with iterative refinement in float64.

The charge simulation's potential-coefficient matrix ``P`` is dense, real and
well conditioned (its diagonal, the self-coefficients ``ln(2h/r)``, dominates;
condition numbers of 2 to 10 are typical for line routes).  For such a matrix
one LU factorisation in single precision, followed by a few refinement steps
whose residuals ``b - A x`` are formed in double precision, gives the double
precision solution at about half the cost of a double-precision LU: the
factorisation (2n^3/3 flops) runs on twice as many SIMD lanes, and each step
costs only O(n^2).  This is the method of LAPACK's ``DSGESV`` [1]_, [2]_;
numpy exposes only the one-shot ``gesv``, so the factorisation and the
triangular solves come from ``scipy.linalg.lu_factor`` / ``lu_solve``.

Stopping rule (``DSGESV``'s): stop when every right-hand side's residual satisfies
``||r||_inf <= ||x||_inf ||A||_inf eps sqrt(n)`` (a backward error of the
order of double-precision rounding).  If that is not reached within
``max_steps`` steps (cond(A) near 1/eps32 or worse), or the matrix does not fit in
float32, the double-precision LU (``numpy.linalg.solve``) is used instead, so
the result is never less accurate than the plain solve.

References
----------
.. [1] E. Anderson et al., *LAPACK Users' Guide*, 3rd ed., SIAM, 1999, and the
   reference documentation of ``DSGESV`` (from memory).
.. [2] J. Langou, J. Langou, P. Luszczek, J. Kurzak, A. Buttari and J. Dongarra,
   "Exploiting the performance of 32 bit floating point arithmetic in obtaining
   64 bit accuracy", *Proc. ACM/IEEE SC06*, 2006 (from memory).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["solve_refined"]

_EPS64 = float(np.finfo(np.float64).eps)
_MAX32 = float(np.finfo(np.float32).max)


def solve_refined(a: np.ndarray, b: np.ndarray, *, max_steps: int = 30) -> tuple[np.ndarray, int]:
    """Solve ``a x = b`` for real square ``a`` to double-precision backward error.

    Parameters
    ----------
    a : ndarray, shape (n, n)
        Real coefficient matrix (not modified).
    b : ndarray, shape (n,) or (n, k)
        Real right-hand side(s).
    max_steps : int
        Refinement steps allowed before falling back to the float64 LU.

    Returns
    -------
    (x, steps) : (ndarray like ``b``, int)
        The solution and the number of refinement steps taken; ``steps = -1``
        when the float64 LU was used (no convergence, or ``a`` outside float32 range).

    Examples
    --------
    >>> a = np.array([[4.0, 1.0], [2.0, 3.0]])
    >>> x, steps = solve_refined(a, np.array([1.0, 2.0]))
    >>> bool(np.allclose(a @ x, [1.0, 2.0], rtol=0, atol=1e-15)), steps >= 0
    (True, True)
    """
    from scipy.linalg import lu_factor, lu_solve

    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    n = a.shape[0]
    if a.ndim != 2 or a.shape[1] != n or b.shape[0] != n:
        raise ValueError(f"a must be square and match b: {a.shape}, {b.shape}")
    if n == 0:
        return np.zeros_like(b), 0
    with np.errstate(over="ignore", invalid="ignore"):
        a32 = a.astype(np.float32)  # entries beyond float32 range become inf
        a_norm = float(np.abs(a32).sum(axis=1, dtype=np.float64).max())  # ||a||_inf, to float32 rounding
    if not math.isfinite(a_norm) or a_norm >= _MAX32 / 16:
        return np.linalg.solve(a, b), -1
    bb = b.reshape(n, -1)
    lu = lu_factor(a32, overwrite_a=True, check_finite=False)
    x = lu_solve(lu, bb.astype(np.float32), check_finite=False).astype(np.float64)
    tol = a_norm * _EPS64 * math.sqrt(n)
    for step in range(max_steps + 1):
        r = bb - a @ x
        if np.all(np.abs(r).max(axis=0) <= tol * np.abs(x).max(axis=0)):
            return x.reshape(b.shape), step
        if step == max_steps or not np.all(np.isfinite(r)):
            break
        x += lu_solve(lu, r.astype(np.float32), check_finite=False)
    return np.linalg.solve(a, b), -1
