"""Tests for plantcore.reduction.discretization (sampling, the way back, aliasing)."""

import math
import warnings

import numpy as np
import pytest
import scipy.signal

import plantcore as pc


def _random(rng):
    n, m, p = int(rng.integers(1, 7)), int(rng.integers(1, 3)), int(rng.integers(1, 3))
    return (rng.standard_normal((n, n)), rng.standard_normal((n, m)),
            rng.standard_normal((p, n)), rng.standard_normal((p, m)))


@pytest.mark.parametrize("method, reference", [("zero_order_hold", "zoh"),
                                               ("first_order_hold", "foh"),
                                               ("bilinear", "bilinear")])
def test_agrees_with_scipy_cont2discrete(method, reference):
    # Reference: scipy.signal.cont2discrete.  Its bilinear realization puts the factor
    # 2 alpha into B (ours splits it evenly), so B and C differ by the state scaling
    # c = sqrt(2 / alpha), alpha = 2 / T; A and D are the same.
    rng = np.random.default_rng(5)
    for _ in range(40):
        A, B, C, D = _random(rng)
        T = 10 ** rng.uniform(-3, 0)
        ours = pc.discretize((A, B, C, D), T, method=method).model
        a, b, c, d, _ = scipy.signal.cont2discrete((A, B, C, D), T, method=reference)
        if method == "bilinear":
            scaling = math.sqrt(T)          # sqrt(2 / alpha)
            b, c = b / scaling, c * scaling
        for x, y in ((ours.A, a), (ours.B, b), (ours.C, c), (ours.D, d)):
            assert np.linalg.norm(x - y) <= 1e-12 * max(1.0, np.linalg.norm(y))
        assert ours.dt == T


def test_bilinear_keeps_the_gramians():
    # Property of the evenly split bilinear realization (checked by hand in the module's
    # Notes): the discrete Gramians equal the continuous ones.
    rng = np.random.default_rng(1)
    A = rng.standard_normal((5, 5)) - 4 * np.eye(5)
    B, C = rng.standard_normal((5, 2)), rng.standard_normal((1, 5))
    sampled = pc.discretize((A, B, C), 0.3, method="bilinear").model
    np.testing.assert_allclose(pc.controllability_gramian(sampled).matrix,
                               pc.controllability_gramian((A, B, C)).matrix, rtol=1e-10, atol=1e-13)


def test_prewarping_matches_the_response_at_the_chosen_frequency():
    # Common practice (Tustin with prewarping): G_d(exp(j w0 T)) = G(j w0).
    model = pc.from_transfer_function([4.0], [1.0, 0.4, 4.0])
    T, w0 = 0.5, 2.0
    sampled = pc.discretize(model, T, method="bilinear", prewarp_frequency=w0)
    np.testing.assert_allclose(sampled.model.transfer_at(np.exp(1j * w0 * T)),
                               model.transfer_at(1j * w0), rtol=1e-12)
    plain = pc.discretize(model, T, method="bilinear").model
    assert abs(plain.transfer_at(np.exp(1j * w0 * T)) - model.transfer_at(1j * w0)).max() > 1e-2


def test_zero_order_hold_is_exact_for_a_first_order_lag():
    # x' = -a x + b u held: A_d = exp(-aT), B_d = b (1 - exp(-aT)) / a (common practice)
    a, b, T = 2.0, 3.0, 0.1
    s = pc.discretize(([[-a]], [[b]], [[1.0]]), T).model
    np.testing.assert_allclose([s.A[0, 0], s.B[0, 0]], [math.exp(-a * T), b * (1 - math.exp(-a * T)) / a],
                               rtol=1e-14)


def test_round_trip_through_the_zero_order_hold():
    rng = np.random.default_rng(2)
    for _ in range(10):
        A, B, C, D = _random(rng)
        A = A - (np.max(np.linalg.eigvals(A).real) + 0.3) * np.eye(A.shape[0])
        T = 0.1
        back = pc.continuous_from_sampled(pc.discretize((A, B, C, D), T).model)
        np.testing.assert_allclose(back.model.A, A, rtol=0, atol=1e-10 * np.linalg.norm(A))
        np.testing.assert_allclose(back.model.B, B, rtol=0, atol=1e-10 * np.linalg.norm(B))
        np.testing.assert_array_equal(back.model.D, D)
        assert back.residual <= 1e-13 and not back.model.is_discrete


def test_no_real_logarithm_is_a_clear_error():
    with pytest.raises(ValueError, match="closed negative real axis"):
        pc.continuous_from_sampled(pc.StateSpaceModel([[-0.5]], [[1.0]], [[1.0]], dt=0.1))
    with pytest.raises(ValueError, match="closed negative real axis"):
        pc.continuous_from_sampled(pc.StateSpaceModel(np.diag([0.0, 0.5]), np.ones((2, 1)),
                                                      np.ones((1, 2)), dt=0.1))


def test_pathological_sampling_warns_and_loses_controllability():
    # R. E. Kalman, Y. C. Ho and K. S. Narendra, "Controllability of linear dynamical
    # systems", 1963: the oscillator ±2j sampled at T = pi / 2 (imaginary parts differ by
    # 4 = 2 pi / T) gives A_d = -I, and with one input the sampled model is uncontrollable.
    A, B, C = [[0.0, 2.0], [-2.0, 0.0]], [[0.0], [1.0]], [[1.0, 0.0]]
    with pytest.warns(pc.SamplingWarning, match="2 pi / T"):
        sampled = pc.discretize((A, B, C), math.pi / 2)
    assert len(sampled.aliased_pairs) == 1
    with pytest.warns(pc.SamplingWarning, match="lost controllability"):
        comparison = pc.compare_sampling((A, B, C), sampled)
    assert comparison.lost_controllability and comparison.lost_observability
    assert (comparison.continuous_minimal_order, comparison.sampled_minimal_order) == (2, 1)


def test_ordinary_sampling_keeps_the_structure_silently():
    A, B, C = [[0.0, 2.0], [-2.0, -0.1]], [[0.0], [1.0]], [[1.0, 0.0]]
    with warnings.catch_warnings():
        warnings.simplefilter("error", pc.SamplingWarning)
        sampled = pc.discretize((A, B, C), 0.1)
        comparison = pc.compare_sampling((A, B, C), sampled)
    assert not comparison.lost_controllability and comparison.sampled_minimal_order == 2
    assert sampled.aliased_pairs == () and "kept" in comparison.reasons[0]


def test_bad_input_is_refused():
    model = ([[-1.0]], [[1.0]], [[1.0]])
    with pytest.raises(ValueError, match="method must be one of"):
        pc.discretize(model, 0.1, method="impulse")
    with pytest.raises(ValueError, match="positive"):
        pc.discretize(model, -0.1)
    with pytest.raises(ValueError, match="bilinear"):
        pc.discretize(model, 0.1, prewarp_frequency=1.0)
    with pytest.raises(ValueError, match="Nyquist"):
        pc.discretize(model, 0.1, method="bilinear", prewarp_frequency=40.0)
    with pytest.raises(ValueError, match="already discrete"):
        pc.discretize(pc.StateSpaceModel([[0.5]], [[1.0]], [[1.0]], dt=0.1), 0.1)
    with pytest.raises(ValueError, match="eigenvalue at alpha"):
        pc.discretize(([[20.0]], [[1.0]], [[1.0]]), 0.1, method="bilinear")
