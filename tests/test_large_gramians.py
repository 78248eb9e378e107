"""Low-rank ADI Gramian factors (plantcore.large.low_rank_gramians)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg
import scipy.sparse

import plantcore as pc
from plantcore.large import low_rank_gramians


def _heat_1d(n=200):
    """1-D heat equation on (0, 1), Dirichlet ends, n interior points: the eigenvalues are
    -4 (n+1)^2 sin^2(k pi / (2 (n+1))), k = 1..n (closed form, common practice)."""
    h2 = (n + 1) ** 2
    A = scipy.sparse.diags([np.ones(n - 1), -2.0 * np.ones(n), np.ones(n - 1)], [-1, 0, 1]) * h2
    B = np.zeros((n, 2))
    B[n // 5, 0] = 1.0
    B[(3 * n) // 4, 1] = 2.0
    C = np.zeros((1, n))
    C[0, n // 2] = 1.0
    eig = -4.0 * h2 * np.sin(np.arange(1, n + 1) * np.pi / (2 * (n + 1))) ** 2
    return pc.StateSpaceModel(A, B, C), eig


def _true_residual(A, Z, B):
    return np.linalg.norm(A @ Z @ Z.T + Z @ Z.T @ A.T + B @ B.T, 2)


def test_heat_equation_ritz_values_and_residuals():
    model, eig = _heat_1d()
    g = low_rank_gramians(model)
    assert g.converged and not g.discrete
    # the extreme Ritz values match the closed-form spectrum
    ritz = g.ritz_values.real
    assert np.isclose(ritz.max(), eig.max(), rtol=1e-8)          # slowest mode, from A^-1
    assert np.isclose(ritz.min(), eig.min(), rtol=1e-2)          # fastest mode, from A
    A = model.A.toarray()
    b2 = np.linalg.norm(model.B, 2) ** 2
    for factor, M in ((g.controllability, model.B), (g.observability, model.C.T)):
        assert factor.relative_residual <= 1e-16
        # the Lyapunov residual itself, formed densely: small relative to ||B||^2
        assert _true_residual(A if M is model.B else A.T, factor.factor, M) <= 1e-12 * \
            max(b2, np.linalg.norm(M, 2) ** 2)
    P = scipy.linalg.solve_continuous_lyapunov(A, -model.B @ model.B.T)  # reference routine
    Zc = g.controllability.factor
    np.testing.assert_allclose(Zc @ Zc.T, P, atol=1e-12 * np.abs(P).max())


def test_the_reported_residual_is_the_true_one():
    # Benner, Kuerschner and Saak 2013: the residual is W W^T exactly; at a loose tolerance
    # (far above rounding) the reported and the formed residual agree.
    model, _ = _heat_1d(120)
    g = low_rank_gramians(model, tol=1e-6)
    f = g.controllability
    true = _true_residual(model.A.toarray(), f.factor, model.B)
    assert f.converged and f.relative_residual <= 1e-6
    assert np.isclose(f.residual_norm, true, rtol=1e-6)
    assert f.history[-1] == f.relative_residual and f.history.size == f.iterations


def test_diagonal_model_against_the_closed_form_gramian():
    # P_ij = b_i b_j / (-(l_i + l_j)) for diagonal A (common practice)
    lam = -np.geomspace(0.1, 1e3, 60)
    b = np.linspace(1.0, 2.0, 60)
    model = pc.StateSpaceModel(scipy.sparse.diags(lam).tocsr(), b[:, None], np.ones((1, 60)))
    Z = low_rank_gramians(model).controllability.factor
    P = np.outer(b, b) / -(lam[:, None] + lam[None, :])
    np.testing.assert_allclose(Z @ Z.T, P, rtol=1e-10, atol=1e-13 * P.max())


def _oscillatory(n=150, seed=7):
    rng = np.random.default_rng(seed)
    A = scipy.sparse.random(n, n, density=0.03, random_state=rng) * 4.0
    A = (A - A.T) + scipy.sparse.diags(-np.linspace(0.5, 5.0, n))   # complex eigenvalues
    B = rng.standard_normal((n, 2))
    C = rng.standard_normal((3, n))
    return A.tocsr(), B, C


def test_complex_shifts_in_real_arithmetic_match_the_reference_routine():
    A, B, C = _oscillatory()
    assert np.abs(np.linalg.eigvals(A.toarray()).imag).max() > 1.0
    g = low_rank_gramians(pc.StateSpaceModel(A, B, C))
    assert np.any(g.shifts.imag != 0) and g.converged
    assert np.isrealobj(g.controllability.factor) and np.isrealobj(g.observability.factor)
    P = scipy.linalg.solve_continuous_lyapunov(A.toarray(), -B @ B.T)
    Q = scipy.linalg.solve_continuous_lyapunov(A.toarray().T, -C.T @ C)
    for factor, G in ((g.controllability, P), (g.observability, Q)):
        np.testing.assert_allclose(factor.factor @ factor.factor.T, G,
                                   atol=1e-11 * np.abs(G).max())


def test_discrete_time_by_the_cayley_transform_matches_the_stein_solution():
    rng = np.random.default_rng(3)
    M = scipy.sparse.random(100, 100, density=0.05, random_state=rng)
    M = M - M.T + scipy.sparse.diags(rng.uniform(-1.0, 1.0, 100))
    Ad = (0.9 / np.abs(np.linalg.eigvals(M.toarray())).max() * M).tocsr()  # spectral radius 0.9
    B, C = rng.standard_normal((100, 2)), rng.standard_normal((3, 100))
    assert np.any(np.linalg.eigvals(Ad.toarray()).imag != 0)
    g = low_rank_gramians(pc.StateSpaceModel(Ad, B, C, dt=0.05))
    assert g.discrete and g.converged
    P = scipy.linalg.solve_discrete_lyapunov(Ad.toarray(), B @ B.T)     # reference routine
    Q = scipy.linalg.solve_discrete_lyapunov(Ad.toarray().T, C.T @ C)
    for factor, G in ((g.controllability, P), (g.observability, Q)):
        np.testing.assert_allclose(factor.factor @ factor.factor.T, G,
                                   atol=1e-10 * np.abs(G).max())


def test_an_unstable_model_does_not_converge_and_a_singular_one_is_refused():
    A = scipy.sparse.diags(np.r_[-np.linspace(1, 10, 20), 0.5]).tocsr()
    g = low_rank_gramians(pc.StateSpaceModel(A, np.ones((21, 1)), np.ones((1, 21))),
                          max_iterations=60)
    assert not g.controllability.converged
    A0 = scipy.sparse.diags(np.r_[-np.ones(5), 0.0]).tocsr()
    with pytest.raises(ValueError, match="singular .* not asymptotically stable"):
        low_rank_gramians(pc.StateSpaceModel(A0, np.ones((6, 1)), np.ones((1, 6))))


@pytest.mark.parametrize("options, fragment", [
    ({"tol": 0.0}, "tol must be a number between 0 and 1"),
    ({"shift_count": 0}, "shift_count must be a positive whole number"),
    ({"max_iterations": 2.5}, "max_iterations must be a positive whole number"),
])
def test_bad_options(options, fragment):
    model, _ = _heat_1d(20)
    with pytest.raises(ValueError, match=fragment):
        low_rank_gramians(model, **options)
