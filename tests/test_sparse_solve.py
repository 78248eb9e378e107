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
