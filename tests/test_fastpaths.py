"""Tests of plantcore._fastpaths: the blocked and single-input staircases against the
careful step-by-step one.

Reference: the careful staircase (QR with column pivoting and an SVD at every step; Van
Dooren 1981, Varga 1981) kept in the same module as a slow textbook version, as networkx
tests a fast and a plain pagerank against each other.  Both must decide the same ranks and
produce orthogonally similar forms.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

import catalog
from plantcore._fastpaths import careful_staircase, reduce_staircase


def _case(sizes, m, seed):
    model = catalog.known_structure(sizes, inputs=m, outputs=2, seed=seed, condition=1.0).model
    scale = np.linalg.norm(model.A)
    return model.A, model.B, model.C, scale


@pytest.mark.parametrize("m", [1, 2, 4])
@pytest.mark.parametrize("sizes", [(6, 2, 3, 1), (30, 5, 10, 5), (12, 0, 0, 0), (0, 0, 4, 4)])
def test_blocked_matches_careful(sizes, m):
    A, B, C, scale = _case(sizes, m, seed=sum(sizes) * 10 + m)
    fast = reduce_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    slow = careful_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    assert fast.blocks == slow.blocks
    assert [d.rank for d in fast.decisions] == [d.rank for d in slow.decisions]
    # Same controllable subspace: the first r columns of U span the same space.
    r = fast.rank
    Uf, Us = fast.form_U(), slow.form_U()
    assert_allclose(Uf.T @ Uf, np.eye(A.shape[0]), atol=1e-12)
    if r:
        cosines = np.linalg.svd(Uf[:, :r].T @ Us[:, :r], compute_uv=False)
        assert_allclose(cosines, 1.0, atol=1e-9)
    # Each result is an exact orthogonal similarity of the input (backward error ~ n eps).
    for red, U in ((fast, Uf), (slow, Us)):
        assert np.linalg.norm(U @ red.A @ U.T - A) <= 100 * A.shape[0] * np.finfo(float).eps * scale
        assert np.all(red.A[r:, :r] == 0.0) and np.all(red.B[r:, :] == 0.0)
