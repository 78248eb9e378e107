"""Tests for plantcore.reduction.gramian_matrices (public Gramians and their factors)."""

import numpy as np
import pytest
import scipy.linalg

import plantcore as pc


def _stable(rng, n, discrete):
    A = rng.standard_normal((n, n))
    values = np.linalg.eigvals(A)
    if discrete:
        return A / (1.25 * np.max(np.abs(values)))
    return A - (np.max(values.real) + 0.5) * np.eye(n)


@pytest.mark.parametrize("discrete", [False, True])
def test_gramians_agree_with_scipy_lyapunov_solvers(discrete):
    # Reference: scipy.linalg.solve_continuous_lyapunov / solve_discrete_lyapunov
    # (Bartels-Stewart; discrete by the bilinear transformation), on 20 seeded models.
    rng = np.random.default_rng(7 + discrete)
    for _ in range(20):
        n = int(rng.integers(1, 12))
        A = _stable(rng, n, discrete)
        B = rng.standard_normal((n, int(rng.integers(1, 4))))
        C = rng.standard_normal((int(rng.integers(1, 4)), n))
        model = pc.StateSpaceModel(A, B, C, dt=0.05 if discrete else None)
        P, Q = pc.controllability_gramian(model), pc.observability_gramian(model)
        if discrete:
            P_ref = scipy.linalg.solve_discrete_lyapunov(A, B @ B.T)
            Q_ref = scipy.linalg.solve_discrete_lyapunov(A.T, C.T @ C)
        else:
            P_ref = scipy.linalg.solve_continuous_lyapunov(A, -B @ B.T)
            Q_ref = scipy.linalg.solve_continuous_lyapunov(A.T, -C.T @ C)
        for ours, ref in ((P, P_ref), (Q, Q_ref)):
            assert np.linalg.norm(ours.matrix - ref) <= 1e-10 * np.linalg.norm(ref)
            R = ours.cholesky_factor
            np.testing.assert_array_equal(R, np.triu(R))
            assert np.all(np.diag(R) >= 0.0)
            np.testing.assert_allclose(R.T @ R, ours.matrix, rtol=0, atol=1e-13 * np.linalg.norm(ref))
            np.testing.assert_array_equal(ours.matrix, ours.matrix.T)
            assert ours.residual <= 1e-12 and ours.discrete == discrete
        assert P.kind == "controllability" and Q.kind == "observability"


def test_first_order_closed_form():
    # dx/dt = -a x + b u: P = b^2 / (2a) (common practice); discrete x+ = a x + b u:
    # P = b^2 / (1 - a^2).
    P = pc.controllability_gramian(([[-2.0]], [[3.0]], [[1.0]])).matrix
    np.testing.assert_allclose(P, [[9.0 / 4.0]], rtol=1e-14)
    Pd = pc.controllability_gramian(pc.StateSpaceModel([[0.5]], [[1.0]], [[1.0]], dt=1.0)).matrix
    np.testing.assert_allclose(Pd, [[1.0 / 0.75]], rtol=1e-14)


def test_unstable_modes_are_named():
    A = np.diag([-1.0, 0.0, 2.0])
    model = (A, np.ones((3, 1)), np.ones((1, 3)))
    with pytest.raises(ValueError, match=r"2 eigenvalue\(s\) that are not: .*0.*2"):
        pc.controllability_gramian(model)
    with pytest.raises(ValueError, match=r"\|λ\| < 1"):
        pc.observability_gramian(pc.StateSpaceModel(np.diag([0.5, -1.0]), np.ones((2, 1)),
                                                    np.ones((1, 2)), dt=0.1))


def test_empty_model():
    g = pc.controllability_gramian(pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)),
                                                      np.zeros((1, 0))))
    assert g.matrix.shape == (0, 0) and g.cholesky_factor.shape == (0, 0)
