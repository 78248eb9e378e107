"""Tests of plantcore.structure.staircase_kernels: the blocked and single-input staircases against the
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
from plantcore.structure.staircase_kernels import careful_staircase, reduce_staircase


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


def _several_panels(n_c=170, n=250, m=3, seed=2501):
    """A deep but well-conditioned staircase: ``n_c`` controllable states reached from ``m``
    inputs through a chain of unit couplings (plus a weak random coupling), the rest not
    reachable, hidden by a random orthogonal similarity.  With m = 3 that is 56 steps of
    width 3 (the first by the careful step, then blocked panels of 32 and 23 steps), a step
    of rank 2 that ends the second panel (redone by the careful step), then the rank-0
    step.  (A dense random
    controllable block of this depth would not do: its staircase is badly conditioned, and
    at 250 states the blocked and the careful reduction alike call such a model fully
    controllable.)"""
    rng = np.random.default_rng(seed)
    A = 0.05 * rng.standard_normal((n, n)) / np.sqrt(n) - np.eye(n)
    A[n_c:, :n_c] = 0.0
    for k in range(0, n_c - m, m):  # each group of m states drives the next
        t = min(m, n_c - k - m)
        A[k + m:k + m + t, k:k + t] += np.eye(t)
    B = np.zeros((n, m))
    B[:m, :] = np.eye(m) + 0.1 * rng.standard_normal((m, m))
    C = rng.standard_normal((2, n))
    Q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    A, B, C = Q @ A @ Q.T, Q @ B, C @ Q.T
    return A, B, C, np.linalg.norm(A)


def test_several_panels_match_careful():
    A, B, C, scale = _several_panels()
    fast = reduce_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    slow = careful_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    assert fast.rank == slow.rank == 170
    assert fast.blocks == slow.blocks
    assert len(fast.blocks) > 40 and fast.blocks[-1] < 3  # the case does span the panels
    Uf, Us = fast.form_U(), slow.form_U()
    n = A.shape[0]
    eps = np.finfo(float).eps
    for red, U in ((fast, Uf), (slow, Us)):
        assert_allclose(U.T @ U, np.eye(n), atol=1e-12)
        assert np.linalg.norm(U @ red.A @ U.T - A) <= 100 * n * eps * scale
        assert np.linalg.norm(red.C - C @ U) <= 100 * n * eps * np.linalg.norm(C)
    cosines = np.linalg.svd(Uf[:, :170].T @ Us[:, :170], compute_uv=False)
    assert_allclose(cosines, 1.0, atol=1e-9)


def test_need_A_false_gives_the_same_decisions_and_U():
    # Without the transformed A (rows above each step left alone) the steps see the same
    # blocks, so the decisions and U agree with the full reduction to rounding.
    A, B, C, scale = _several_panels()
    full = reduce_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    lean = reduce_staircase(A, B, C, scale=scale, tol=5e-11, label="c", need_A=False)
    assert lean.blocks == full.blocks
    assert [d.rank for d in lean.decisions] == [d.rank for d in full.decisions]
    for a, b in zip(lean.decisions, full.decisions):
        assert a.smallest_kept == pytest.approx(b.smallest_kept, rel=1e-10)
    # The controllable columns of U agree; the rest is a basis of the complement chosen by
    # the rank-0 step from rounding-level entries, so only its span is determined.
    r = full.rank
    assert_allclose(lean.form_U()[:, :r], full.form_U()[:, :r], atol=1e-12)


@pytest.mark.parametrize("m", [1, 3])
def test_apply_U_and_its_transpose_match_the_formed_U(m):
    # Reflectors applied from the record (blocked, careful and single-input steps) agree
    # with the explicitly formed orthogonal factor.
    A, B, C, scale = _several_panels(m=m, n_c=60 if m == 1 else 170)
    red = reduce_staircase(A, B, C, scale=scale, tol=5e-11, label="c")
    U = red.form_U()
    # U itself is tied to the data, not only to the record: orthogonal, and it carries the
    # input A to the returned staircase form (backward error ~ n eps).
    n = A.shape[0]
    assert_allclose(U.T @ U, np.eye(n), atol=1e-12)
    assert np.linalg.norm(U @ red.A @ U.T - A) <= 100 * n * np.finfo(float).eps * scale
    X = np.random.default_rng(7).standard_normal((n, 5))
    assert_allclose(red.apply_U(X), U @ X, atol=1e-12)
    assert_allclose(red.apply_Ut(X), U.T @ X, atol=1e-12)
    last = red.form_U(40, first=False)
    assert_allclose(last, U[:, -40:], atol=1e-12)
