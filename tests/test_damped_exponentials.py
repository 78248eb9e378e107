"""The time-domain search for states below the Hankel floor (separable least squares and a
matched filter on the residual)."""

import numpy as np
import pytest
import scipy.linalg

import plantcore as pc
from plantcore.reduction.damped_exponentials import (
    _Grid,
    _split_poles,
    fit_poles,
    modal_realization,
    search_missing_states,
)
from plantcore.reduction.impulse_realization import (
    _block_hankel,
    _hankel_shape,
    realize_impulse_response,
)
from plantcore.reduction.markov import markov_parameters


def _pair(r, angle):
    return r * np.array([[np.cos(angle), np.sin(angle)], [-np.sin(angle), np.cos(angle)]])


def _model(rng, pairs, real, m, p):
    """A minimal discrete model: the given (radius, angle) pairs and real poles."""
    A = scipy.linalg.block_diag(*[_pair(r, a) for r, a in pairs], *[[[x]] for x in real])
    n = A.shape[0]
    return pc.StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)),
                              np.zeros((p, m)), dt=1.0)


@pytest.mark.parametrize("m, p", [(1, 1), (2, 3)])
def test_variable_projection_moves_perturbed_poles_back_to_the_true_ones(m, p):
    # By construction: exact data of known poles; the start is off by 1e-3.
    rng = np.random.default_rng(3)
    model = _model(rng, [(0.9, 0.4), (0.8, 1.7)], [0.6, -0.5], m, p)
    h = markov_parameters(model, 120).values
    Y = h[1:].reshape(119, p * m)
    truth = np.linalg.eigvals(model.A)
    params, kinds = _split_poles(truth)
    assert kinds.count("pair") == 2 and kinds.count("real") == 2
    fit = fit_poles(params + 1e-3, kinds, Y)
    found = np.linalg.eigvals(modal_realization(fit, p, m)[0])
    assert np.max(np.abs(np.sort_complex(found) - np.sort_complex(truth))) < 1e-8
    assert fit.energy < 1e-20 * float(np.sum(Y ** 2))


@pytest.mark.parametrize("m, p", [(1, 1), (1, 3), (3, 1)])
def test_modal_realization_reproduces_the_fitted_response(m, p):
    # One input or one output: every residue matrix has rank one, so the modal model is
    # exact (by construction).
    rng = np.random.default_rng(5)
    model = _model(rng, [(0.95, 0.3), (0.7, 2.5)], [0.85], m, p)
    h = markov_parameters(model, 80).values
    Y = h[1:].reshape(79, p * m)
    fit = fit_poles(*_split_poles(np.linalg.eigvals(model.A)), Y, refine=False)
    A, B, C = modal_realization(fit, p, m)
    again = markov_parameters(pc.StateSpaceModel(A, B, C, h[0], dt=1.0), 80).values
    assert np.max(np.abs(again - h)) < 1e-12 * np.max(np.abs(h))
    assert A.shape == (5, 5)


def test_the_grid_finds_a_lone_damped_exponential_and_its_whole_energy():
    # A single pair in the residual, nothing fitted: the statistic is the whole energy
    # (the projection is exact at the grid point nearest the pole) and the pole is found to
    # the grid's resolution.
    L, pole = 300, 0.93 * np.exp(0.8j)
    k = np.arange(L)
    R = np.column_stack([(2.0 * pole ** k).real, (-0.5j * pole ** k).real])
    grid = _Grid(L, np.zeros((L, 0)))
    statistic, found = grid.strongest(R)
    assert isinstance(found, complex)
    assert abs(found - pole) < 0.01
    assert 0.95 * np.sum(R ** 2) < statistic <= np.sum(R ** 2) * (1 + 1e-9)
    statistic_real, found_real = grid.strongest(0.3 * 0.8 ** k[:, None])
    # (a pair at a tiny angle fits a real exponential as well; the update step decides)
    assert abs(found_real - 0.8) < 0.01 and statistic_real > 0.95 * np.sum(0.09 * 0.64 ** k)


def test_white_noise_rarely_passes_the_threshold():
    # Mean + 5 standard deviations of 24 seeded draws: of 60 fresh draws of unit white
    # noise (orthogonal to a fitted basis of 6 columns), at most one may exceed it.
    rng = np.random.default_rng(8)
    L = 250
    model = _model(rng, [(0.9, 0.5), (0.8, 2.0)], [0.7, -0.6], 1, 2)
    h = markov_parameters(model, L + 1).values
    fit = fit_poles(*_split_poles(np.linalg.eigvals(model.A)), h[1:].reshape(L, 2),
                    refine=False)
    grid = _Grid(L, fit.basis)
    threshold = grid.threshold(2)
    passed = 0
    for _ in range(60):
        e = rng.standard_normal((L, 2))
        e -= fit.basis @ (fit.basis.T @ e)
        passed += grid.strongest(e)[0] > threshold
    assert passed <= 1


def _weak_pair_data(seed, fraction):
    """Four strong pairs of radius 0.95 at angles 0.5, 1.0, 1.5 and 2.0 and a weak pair of
    the same radius at 1.25, three outputs and one input, 300 samples of white noise: the
    weak pair's own Hankel singular value is ``fraction`` of the noise norm (by
    construction), below the floor (about 1.5 times the norm)."""
    rng = np.random.default_rng(seed)
    A = scipy.linalg.block_diag(*[_pair(0.95, a) for a in (0.5, 1.0, 1.5, 2.0, 1.25)])
    B, C = rng.standard_normal((10, 1)), rng.standard_normal((3, 10))
    sigma, L = 0.01, 299
    q, r = _hankel_shape(L)
    noise = sigma * rng.standard_normal((L + 1, 3, 1))
    noise[0] = 0.0
    norm = np.linalg.norm(_block_hankel(noise, q, r), 2)
    weak = pc.StateSpaceModel(A[8:, 8:], B[8:], C[:, 8:], np.zeros((3, 1)), dt=1.0)
    own = scipy.linalg.svdvals(_block_hankel(markov_parameters(weak, L + 1).values, q, r))[0]
    C[:, 8:] *= fraction * norm / own
    model = pc.StateSpaceModel(A, B, C, np.zeros((3, 1)), dt=1.0)
    return model, markov_parameters(model, L + 1).values + noise, sigma


def test_a_pair_below_the_hankel_floor_is_found_and_the_order_marked_fragile():
    model, data, sigma = _weak_pair_data(21, 0.8)
    for level in (sigma, None):
        fit = realize_impulse_response(data, sample_time=1.0, noise_level=level)
        assert fit.hankel_order == 8  # premise: the Hankel values miss the weak pair
        assert fit.order == fit.automatic_order == 10
        assert fit.fragile and "time-domain search" in fit.decision.window_outcome
        assert fit.residual_search[0][1] > fit.residual_search[0][2]
        assert fit.residual_search[-1][1] <= fit.residual_search[-1][2]
        # the model holds the weak pole and fits the data to the noise
        weak_pole = 0.95 * np.exp(1.25j)
        assert np.min(np.abs(np.linalg.eigvals(fit.model.A) - weak_pole)) < 0.05
        assert 0.8 * sigma < fit.reproduction_rms < 1.2 * sigma
        assert any("likelihood-ratio search" in note for note in fit.notes)


def test_a_fast_weak_state_inside_the_span_of_the_others_is_not_claimed():
    # A real pole at 0.3 (energy in the first few samples) lies mostly in the span of the
    # strong modes' responses: 27 % of its direction is outside it, so its energy of about
    # 120 noise variances leaves a statistic below the threshold and the order stays 6.
    rng = np.random.default_rng(21)
    strong = _model(rng, [(0.9, 0.5), (0.92, 1.4), (0.88, 2.4)], [], 1, 1)
    L, sigma = 299, 0.01
    q, r = _hankel_shape(L)
    noise = sigma * rng.standard_normal((L + 1, 1, 1))
    noise[0] = 0.0
    g = np.linalg.norm(_block_hankel(noise, q, r), 2) / 2 * (1 - 0.09)
    model = pc.StateSpaceModel(scipy.linalg.block_diag(strong.A, [[0.3]]),
                               np.vstack([strong.B, [[1.0]]]), np.hstack([strong.C, [[g]]]),
                               np.zeros((1, 1)), dt=1.0)
    fit = realize_impulse_response(markov_parameters(model, L + 1).values + noise,
                                   sample_time=1.0, noise_level=sigma)
    assert g ** 2 / 0.91 / sigma ** 2 > 100  # premise: the energy alone would pass
    assert fit.order == fit.hankel_order == 6
    assert fit.residual_search[-1][1] <= fit.residual_search[-1][2]


def test_models_whose_order_the_hankel_values_show_get_no_extra_state():
    # Seeded draws of 40 dB data (noise RMS / 100) of minimal models of order 2-12 whose
    # every state stands well above the noise: the search must not add a state.
    rng = np.random.default_rng(12)
    checked = 0
    for _ in range(12):
        n = int(rng.integers(2, 13))
        pairs = [(rng.uniform(0.6, 0.9), rng.uniform(0.3, 2.8)) for _ in range(n // 2)]
        model = _model(rng, pairs, [0.75] if n % 2 else [], int(rng.integers(1, 4)),
                       int(rng.integers(1, 4)))
        exact = markov_parameters(model, 200).values
        sigma = np.sqrt(np.mean(exact[1:] ** 2)) / 100
        noise = sigma * rng.standard_normal(exact.shape)
        noise[0] = 0.0
        fit = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=sigma)
        if fit.hankel_order == n:
            checked += 1
            assert fit.order == n, fit.residual_search
    assert checked >= 10  # premise: the Hankel values show the order of most of them


def test_search_records_one_step_when_nothing_is_missing():
    rng = np.random.default_rng(4)
    model = _model(rng, [(0.8, 1.0)], [0.5], 1, 1)
    h = markov_parameters(model, 100).values
    h = h + 1e-3 * rng.standard_normal(h.shape)
    search = search_missing_states(h, 1e-3, np.linalg.eigvals(model.A), 40)
    assert search.added == 0 and len(search.steps) == 1
    assert search.steps[0][0] == 3 and search.steps[0][1] < search.steps[0][2]
