"""Blocked multi-shift triangular solves (plantcore.structure.multi_shift) against one-shift
solves of each shifted triangle."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import scipy.linalg
from numpy.testing import assert_allclose

from plantcore.structure.multi_shift import solve_shifted

_EPS = np.finfo(float).eps


def _triangle(n, complex_, seed):
    rng = np.random.default_rng(seed)
    T = rng.standard_normal((n, n))
    if complex_:
        T = T + 1j * rng.standard_normal((n, n))
    T = np.triu(T) + 3.0 * np.sqrt(n) * np.eye(n)
    return np.asfortranarray(T), rng


@pytest.mark.parametrize("complex_", [False, True])
@pytest.mark.parametrize("adjoint", [False, True])
@pytest.mark.parametrize("n, block", [(1, 4), (7, 3), (40, 16), (65, 64), (50, 200), (30, 1)])
def test_each_column_is_the_one_shift_solution(complex_, adjoint, n, block):
    T, rng = _triangle(n, complex_, seed=n + block)
    s = 5
    shifts = rng.standard_normal(s) * np.sqrt(n)
    if complex_:
        shifts = shifts + 1j * rng.standard_normal(s) * np.sqrt(n)
    B = rng.standard_normal((n, s)) + (1j * rng.standard_normal((n, s)) if complex_ else 0)
    X = solve_shifted(T, shifts, B, adjoint=adjoint, block=block)
    assert X.shape == (n, s)
    for j in range(s):
        M = T - shifts[j] * np.eye(n)
        x = scipy.linalg.solve_triangular(M, B[:, j], trans="C" if adjoint else "N")
        assert_allclose(X[:, j], x, rtol=1e3 * _EPS * n, atol=1e3 * _EPS * n * np.abs(x).max())


def test_lower_part_is_not_read():
    T, rng = _triangle(30, True, seed=1)
    shifts = np.array([0.5j, -1.0 + 2j, 3.0])
    B = rng.standard_normal((30, 3)) + 0j
    junk = T.copy()
    junk[np.tril_indices(30, -1)] = np.nan
    for adjoint in (False, True):
        assert_allclose(solve_shifted(junk, shifts, B, adjoint=adjoint, block=8),
                        solve_shifted(T, shifts, B, adjoint=adjoint, block=8), rtol=0, atol=0)


def test_near_singular_shift_is_backward_stable():
    """A shift within 1e-10 of an eigenvalue: the solution is huge, but the residual is at
    rounding level relative to ||T - mu I|| ||x||, as for a one-shift substitution."""
    n = 60
    T, rng = _triangle(n, True, seed=2)
    mu = T[17, 17] + 1e-10
    B = rng.standard_normal((n, 1)) + 0j
    for adjoint in (False, True):
        x = solve_shifted(T, [mu], B, adjoint=adjoint, block=16)[:, 0]
        M = T - mu * np.eye(n)
        residual = (M.conj().T if adjoint else M) @ x - B[:, 0]
        assert np.linalg.norm(x) > 1e6
        assert np.linalg.norm(residual) <= 1e2 * n * _EPS * np.linalg.norm(M) * np.linalg.norm(x)


def test_singular_shift_overflows_without_warning():
    """An exactly singular shifted triangle gives non-finite values and no RuntimeWarning
    (the caller tests for finiteness, as after a BLAS solve)."""
    T, rng = _triangle(20, True, seed=3)
    B = rng.standard_normal((20, 2)) + 0j
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        X = solve_shifted(T, [T[5, 5], 0.25j], B, block=4)
    assert not np.all(np.isfinite(X[:, 0]))
    x = scipy.linalg.solve_triangular(T - 0.25j * np.eye(20), B[:, 1])
    assert_allclose(X[:, 1], x, rtol=1e-12, atol=0)
