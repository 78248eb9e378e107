"""Tests for plantcore.reduction.steady_state_gain (the DC gain)."""

import numpy as np
import pytest

import plantcore as pc


@pytest.mark.parametrize("discrete", [False, True])
def test_stable_models_match_the_formula(discrete):
    # The definition (common practice): G(0) = D - C A^-1 B, G(1) = D + C (I - A)^-1 B,
    # evaluated here with transfer_at, which solves a different linear system.
    rng = np.random.default_rng(3 + discrete)
    for _ in range(20):
        n = int(rng.integers(1, 8))
        A = rng.standard_normal((n, n))
        A = A / (1.5 * np.max(np.abs(np.linalg.eigvals(A)))) if discrete else A - 3 * np.eye(n)
        model = pc.StateSpaceModel(A, rng.standard_normal((n, 2)), rng.standard_normal((3, n)),
                                   rng.standard_normal((3, 2)), dt=1.0 if discrete else None)
        g = pc.steady_state_gain(model)
        reference = model.transfer_at(1.0 if discrete else 0.0).real
        np.testing.assert_allclose(g.matrix, reference, rtol=1e-10, atol=1e-12)
        assert g.realization == "as_given" and not g.pole_order.any()


def test_integrator_signs_and_orders():
    # Constructed: G = [[1/s + 1, 1], [1, 1/(s+1) + 1]] (common practice: the integrator
    # entry is +inf, the others finite).
    A = np.diag([0.0, -1.0])
    g = pc.steady_state_gain((A, np.eye(2), np.eye(2), np.ones((2, 2))))
    np.testing.assert_array_equal(g.matrix, [[np.inf, 1.0], [1.0, 2.0]])
    np.testing.assert_array_equal(g.pole_order, [[1, 0], [0, 0]])
    assert g.integrators == 1 and g.realization == "minimal"
    g = pc.steady_state_gain(pc.from_transfer_function([-3.0], [1.0, 2.0, 0.0, 0.0]))   # -3 / (s^2 (s+2))
    assert g.matrix[0, 0] == -np.inf and g.pole_order[0, 0] == 2


def test_rotated_chain_of_integrators():
    # -1/s^3 + 1/(s+1) in rotated coordinates: -inf, pole of order 3; with the output that
    # sees only the stable mode, the gain is 1.
    rng = np.random.default_rng(0)
    Q, _ = np.linalg.qr(rng.standard_normal((4, 4)))
    A = np.array([[0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 0], [0, 0, 0, -1.0]])
    B = np.array([[0.0], [0.0], [1.0], [1.0]])
    C = np.array([[-1.0, 0, 0, 1.0], [0, 0, 0, 1.0]])
    g = pc.steady_state_gain((Q @ A @ Q.T, Q @ B, C @ Q.T))
    assert g.matrix[0, 0] == -np.inf and g.pole_order[0, 0] == 3
    np.testing.assert_allclose(g.matrix[1, 0], 1.0, rtol=1e-12)
    assert g.integrators == 3 and not g.fragile


def test_hidden_integrator_does_not_make_the_gain_infinite():
    # an uncontrollable integrator beside 1 / (s + 2): gain 1/2
    g = pc.steady_state_gain((np.diag([0.0, -2.0]), [[0.0], [1.0]], [[1.0, 1.0]]))
    np.testing.assert_allclose(g.matrix, [[0.5]], rtol=1e-14)
    assert g.integrators == 0 and g.realization == "minimal"


def test_discrete_accumulator():
    # y = 2 / (z - 1) u: +inf; 1 / (z - 0.5): 2 (common practice)
    assert pc.steady_state_gain(pc.StateSpaceModel([[1.0]], [[1.0]], [[2.0]], dt=0.1)).matrix[0, 0] == np.inf
    np.testing.assert_allclose(
        pc.steady_state_gain(pc.StateSpaceModel([[0.5]], [[1.0]], [[1.0]], dt=0.1)).matrix, [[2.0]], rtol=1e-15)


def test_static_model():
    g = pc.steady_state_gain(pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 2)), np.zeros((1, 0)), [[1.0, 2.0]]))
    np.testing.assert_array_equal(g.matrix, [[1.0, 2.0]])


def test_no_hidden_mode_warning_from_the_internal_minimal_realization():
    # An integrator the input drives and an uncontrollable unstable mode (+0.5): the gain
    # is taken on the minimal realization, whose removed mode concerns control, not the
    # steady-state gain, so no HiddenModeWarning reaches the caller.
    import warnings
    model = pc.StateSpaceModel(np.diag([0.0, -1.0, 0.5]), [[1.0], [1.0], [0.0]],
                               [[1.0, 1.0, 1.0]])
    with warnings.catch_warnings():
        warnings.simplefilter("error", pc.HiddenModeWarning)
        gain = pc.steady_state_gain(model)
    assert np.isinf(gain.matrix[0, 0])
    with pytest.warns(pc.HiddenModeWarning):      # the public call itself still warns
        pc.minimal_realization(model)
