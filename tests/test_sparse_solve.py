"""Complex sparse solves in real arithmetic (plantcore.core.sparse_solve)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse

from plantcore.core.sparse_solve import sparse_lu


@pytest.mark.parametrize("transpose", [False, True])
@pytest.mark.parametrize("complex_rhs", [False, True])
def test_complex_and_transposed_solves_match_the_dense_solve(transpose, complex_rhs):
    rng = np.random.default_rng(4)
    R = scipy.sparse.random(60, 60, density=0.1, random_state=rng) + 4 * scipy.sparse.identity(60)
    S = scipy.sparse.random(60, 60, density=0.05, random_state=rng)
    W = rng.standard_normal((60, 3)) + (1j * rng.standard_normal((60, 3)) if complex_rhs else 0)
    M = R.toarray() + 1j * S.toarray()
    expected = np.linalg.solve(M.T if transpose else M, W)
    got = sparse_lu(R, S).solve(W, transpose=transpose)
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-13)
    real = sparse_lu(R).solve(W, transpose=transpose)
    np.testing.assert_allclose(real, np.linalg.solve(R.toarray().T if transpose else R.toarray(),
                                                     W), rtol=1e-12, atol=1e-13)
    assert np.isrealobj(sparse_lu(R).solve(W.real))


def test_a_singular_matrix_is_refused_by_name():
    with pytest.raises(ValueError, match="the pencil is singular"):
        sparse_lu(scipy.sparse.diags([1.0, 0.0]).tocsc(), label="the pencil")


@pytest.mark.parametrize("tiny", [1e-14, 0.0])
def test_tiny_or_zero_pivots_fall_back_to_the_pivoting_complex_lu(tiny):
    # without row exchanges the 2 x 2 pivots below are tiny: the checked solve hands over to
    # the complex LU with partial pivoting; an exactly zero pivot SuperLU exchanges itself.
    # Either way the answer stays accurate.
    R = scipy.sparse.csc_array(np.array([[tiny, 1.0, 0.0], [1.0, tiny, 0.0], [0.0, 0.0, 2.0]]))
    S = scipy.sparse.identity(3, format="csc") * 1e-3
    W = np.array([[1.0], [2.0], [3.0]])
    M = R.toarray() + 1j * S.toarray()
    lu = sparse_lu(R, S)
    for transpose in (False, True):
        np.testing.assert_allclose(lu.solve(W, transpose=transpose),
                                   np.linalg.solve(M.T if transpose else M, W), rtol=1e-12)
    assert (lu._fallback is not None) == (tiny != 0.0)
