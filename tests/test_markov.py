"""Markov parameters D, CB, CAB, ... of continuous and discrete MIMO models."""

import numpy as np
import pytest

import plantcore as pc
from plantcore.reduction.markov import markov_parameters


def test_closed_form_first_order():
    # 1/(s + a) = s^-1 (1 - a/s + a^2/s^2 - ...): h_k = (-a)^(k-1) (closed form).
    a = 3.0
    h = markov_parameters(([[-a]], [[1.0]], [[1.0]], [[0.5]]), 6)
    np.testing.assert_allclose(h.values[:, 0, 0], [0.5, 1, -3, 9, -27, 81])
    assert h.count == 6 and not h.is_discrete and h.sample_time is None


def test_discrete_pulse_response_matches_simulation():
    # For a discrete model the Markov parameters are the pulse response: simulate
    # x[k+1] = A x[k] + B u[k], y = C x + D u with u = unit pulse on each input (common practice).
    rng = np.random.default_rng(4)
    A = rng.standard_normal((4, 4)) * 0.3
    B, C, D = rng.standard_normal((4, 2)), rng.standard_normal((3, 4)), rng.standard_normal((3, 2))
    model = pc.StateSpaceModel(A, B, C, D, dt=0.2)
    h = markov_parameters(model, 12)
    assert h.values.shape == (12, 3, 2) and h.sample_time == 0.2
    for j in range(2):
        x = np.zeros(4)
        for k in range(12):
            u = np.zeros(2)
            if k == 0:
                u[j] = 1.0
            np.testing.assert_allclose(h.values[k][:, j], C @ x + D @ u, atol=1e-13)
            x = A @ x + B @ u


def test_continuous_expansion_at_infinity():
    # G(s) = D + sum_k h_k s^-k: at a large s the truncated series matches transfer_at.
    rng = np.random.default_rng(5)
    model = pc.StateSpaceModel(-np.eye(3) + 0.2 * rng.standard_normal((3, 3)),
                               rng.standard_normal((3, 2)), rng.standard_normal((2, 3)))
    h = markov_parameters(model, 30).values
    s = 40.0
    series = sum(h[k] * s ** (-k) for k in range(30))
    np.testing.assert_allclose(series, model.transfer_at(s).real, rtol=1e-12, atol=1e-15)


def test_refusals():
    with pytest.raises(ValueError, match="between 1 and"):
        markov_parameters(([[-1.0]], [[1.0]], [[1.0]]), 0)
    with pytest.raises(TypeError, match="whole number"):
        markov_parameters(([[-1.0]], [[1.0]], [[1.0]]), 2.5)
    with pytest.raises(ValueError, match="overflow after"):
        markov_parameters(([[1e200]], [[1.0]], [[1.0]]), 5)
