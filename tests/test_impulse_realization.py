"""Realization from impulse-response data (Ho-Kalman / Kung) and the evidence for its order."""

import numpy as np
import pytest
import scipy.linalg

import plantcore as pc
from plantcore.reduction.impulse_realization import (
    _block_hankel,
    _hankel_shape,
    _noise_spectra,
    _window_lengths,
    realize_impulse_response,
)
from plantcore.reduction.markov import markov_parameters


def _modal(rng, n, m, p, radius=(0.6, 0.9), dt=1.0):
    """A minimal discrete model of order n with poles of modulus in ``radius`` (known order)."""
    blocks = []
    for _ in range(n // 2):
        r, a = rng.uniform(*radius), rng.uniform(0.2, 2.8)
        blocks.append(r * np.array([[np.cos(a), np.sin(a)], [-np.sin(a), np.cos(a)]]))
    if n % 2:
        blocks.append(np.array([[rng.uniform(*radius)]]))
    A = scipy.linalg.block_diag(*blocks)
    return pc.StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)),
                              rng.standard_normal((p, m)), dt=dt)


def _forty_db(rng, model, samples):
    """Exact pulse response, white noise at 40 dB signal-to-noise (noise standard deviation
    = RMS of h_1.. / 100, as in benchmarks/impulse_realization_study.py) and its level."""
    exact = markov_parameters(model, samples).values
    sigma = np.sqrt(np.mean(exact[1:] ** 2)) / 100.0
    noise = sigma * rng.standard_normal(exact.shape)
    noise[0] = 0.0
    return exact, noise, sigma


@pytest.mark.parametrize("discrete", [False, True])
def test_exact_data_give_the_order_and_the_transfer_function(discrete):
    # Ho and Kalman 1966: exact Markov parameters of a minimal order-n model give order n and
    # the same transfer function (checked by the equivalence certificate).
    rng = np.random.default_rng(11)
    if discrete:
        model = _modal(rng, 5, 2, 3, dt=0.05)
    else:
        A = rng.standard_normal((5, 5))
        A -= (max(np.linalg.eigvals(A).real) + 0.5) * np.eye(5)
        model = pc.StateSpaceModel(A, rng.standard_normal((5, 2)), rng.standard_normal((3, 5)),
                                   rng.standard_normal((3, 2)))
    data = markov_parameters(model, 24)
    for level in (None, 0.0):
        fit = realize_impulse_response(data, noise_level=level)
        assert fit.order == fit.automatic_order == 5
        assert not fit.fragile and not fit.saturated
        assert fit.decision.largest_dropped < 1e-12 and fit.decision.margin > 1e3
        assert fit.model.dt == model.dt
        assert fit.reproduction_error < 1e-10
        assert pc.check_equivalence(model, fit.model).equivalent


def test_fibonacci_closed_form():
    # h_k = Fibonacci numbers F_k (1, 1, 2, 3, 5, ...) satisfy h_{k+2} = h_{k+1} + h_k: the
    # minimal realization has order 2 and poles (1 +- sqrt 5) / 2 (closed form).
    F = [0.0, 1.0, 1.0]
    while len(F) < 16:
        F.append(F[-1] + F[-2])
    fit = realize_impulse_response(F, sample_time=1.0, noise_level=0.0)
    assert fit.order == 2
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(fit.model.A).real),
                               [(1 - 5 ** 0.5) / 2, (1 + 5 ** 0.5) / 2], rtol=1e-10)


def test_noisy_data_order_gap_and_noise_estimate():
    # 40 dB signal-to-noise on a model whose Hankel singular values all stand well above the
    # noise: the order is found, the dropped values form a plateau below the floor, and by
    # Weyl's inequality every value moves by at most ||E||_2 (Weyl 1912, from memory).
    rng = np.random.default_rng(12)
    model = _modal(rng, 4, 2, 2, radius=(0.7, 0.8))
    exact, noise, sigma = _forty_db(rng, model, 80)
    fit = realize_impulse_response(exact + noise, sample_time=1.0)
    assert fit.order == 4 and fit.noise_level_source == "estimated"
    assert fit.noise_level == pytest.approx(sigma, rel=0.3)
    s = fit.hankel_singular_values
    assert s[3] > fit.noise_floor > s[4]
    assert fit.gap == pytest.approx(s[3] / s[4]) and fit.gap > 3
    assert fit.signal_margin == pytest.approx(s[3] / fit.noise_floor)
    # The weakest kept value stands only 10-30 x above the floor: fragile, and the decision
    # says why (confident from 100 x, the package's fragility factor).
    assert 10 < fit.signal_margin < 100
    assert fit.fragile and "weakest kept value" in fit.decision.window_outcome
    assert 0.5 < fit.plateau_ratio < 1.5
    q, r = fit.block_rows, fit.block_columns
    exact_s = scipy.linalg.svdvals(_block_hankel(exact, q, r))
    e_norm = np.linalg.norm(_block_hankel(noise, q, r), 2)
    assert np.all(np.abs(s - exact_s) <= e_norm * (1 + 1e-9))
    assert e_norm <= fit.noise_floor
    assert fit.reproduction_rms == pytest.approx(sigma, rel=0.3)
    given = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=sigma)
    assert given.order == 4 and given.noise_level == sigma


def test_white_noise_alone_gives_order_zero():
    rng = np.random.default_rng(13)
    data = 0.01 * rng.standard_normal((60, 2, 2))
    fit = realize_impulse_response(data, sample_time=1.0, noise_level=0.01)
    assert fit.order == 0 and fit.model.n == 0
    np.testing.assert_allclose(fit.model.D, data[0])


def test_order_override_and_saturation():
    rng = np.random.default_rng(14)
    model = _modal(rng, 6, 1, 1)
    data = markov_parameters(model, 30)
    low = realize_impulse_response(data, order=2, noise_level=0.0)
    assert low.order == 2 and low.automatic_order == 6 and low.model.n == 2
    assert any("chosen by the user" in note for note in low.notes)
    assert low.reproduction_error > 1e-6
    with pytest.raises(ValueError, match="supports orders 0 to"):
        realize_impulse_response(data, order=40)
    short = realize_impulse_response(data.values[:8], sample_time=1.0, noise_level=0.0)
    assert short.saturated and short.fragile and short.order < 6


def test_bad_input():
    with pytest.raises(ValueError, match="at least 4"):
        realize_impulse_response([0.0, 1.0, 0.5])
    with pytest.raises(ValueError, match="non-finite value nan at sample 2, output 0, input 0"):
        realize_impulse_response([0.0, 1.0, np.nan, 0.25, 0.1])
    with pytest.raises(ValueError, match="2 dimensions"):
        realize_impulse_response(np.ones((5, 2)))
    with pytest.raises(ValueError, match="noise_level must be a non-negative"):
        realize_impulse_response(np.ones(6), noise_level=-1.0)
    with pytest.raises(ValueError, match="sample_time must be a positive"):
        realize_impulse_response(np.ones(6), sample_time=0.0)
    data = markov_parameters(pc.StateSpaceModel([[0.5]], [[1.0]], [[1.0]], dt=0.1), 6)
    with pytest.raises(ValueError, match="conflicts with the data's sample time"):
        realize_impulse_response(data, sample_time=0.2)


def test_weak_state_near_the_rounding_floor_is_fragile():
    # A mode whose contribution is 1e-10 of the other's: its Hankel singular value lies
    # within a factor 100 of the rounding floor (5e-11 relative), so the order is fragile.
    model = pc.StateSpaceModel(np.diag([0.5, -0.3]), [[1.0], [1e-5]], [[1.0, 1e-5]], dt=1.0)
    fit = realize_impulse_response(markov_parameters(model, 30), noise_level=0.0)
    assert fit.decision.fragile and fit.fragile
    clear = pc.StateSpaceModel(np.diag([0.5, -0.3]), [[1.0], [1e-2]], [[1.0, 1e-2]], dt=1.0)
    fit = realize_impulse_response(markov_parameters(clear, 30), noise_level=0.0)
    assert fit.order == 2 and not fit.fragile


def test_seeded_slice_of_the_noisy_study():
    # A small slice of benchmarks/impulse_realization_study.py ("separated" family, low
    # orders, 40 dB): the true order is found, never too high, never wrong and unflagged.
    rng = np.random.default_rng(2027)
    for _ in range(6):
        n = int(rng.integers(2, 9))
        model = _modal(rng, n, int(rng.integers(1, 4)), int(rng.integers(1, 4)),
                       radius=(0.9, 0.97))
        exact = markov_parameters(model, 200).values
        sigma = np.sqrt(np.mean(exact[1:] ** 2)) / 100.0
        noise = sigma * rng.standard_normal(exact.shape)
        noise[0] = 0.0
        fit = realize_impulse_response(exact + noise, sample_time=1.0)
        assert fit.order <= n
        assert fit.order == n or fit.fragile
        assert fit.order == n


def _noisy(rng, model, ratio, samples=200):
    """Pulse response plus white noise whose typical Hankel norm lies ``ratio`` times below
    the weakest noise-free Hankel singular value (as in
    benchmarks/impulse_order_confidence_study.py)."""
    exact = markov_parameters(model, samples).values
    q, r = _hankel_shape(samples - 1)
    clean = scipy.linalg.svdvals(_block_hankel(exact, q, r))
    unit = _noise_spectra(samples - 1, model.n_outputs, model.n_inputs, q, r)[:, 0].mean()
    sigma = clean[model.n - 1] / (ratio * unit)
    noise = sigma * rng.standard_normal(exact.shape)
    noise[0] = 0.0
    return exact + noise, sigma


def test_confidence_follows_the_gap_against_the_noise():
    # Seeded slice of benchmarks/impulse_order_confidence_study.py: with the weakest state
    # 3e3 x above the noise norm the order is right and confident; with it 3-20 x above, the
    # order is right but fragile (margin below 100).  Never too high, never wrong unflagged.
    rng = np.random.default_rng(2028)
    for ratio, confident in ((3e3, True), (3e3, True), (3e3, True), (3.0, False), (20.0, False),
                             (8.0, False)):
        n = int(rng.integers(2, 9))
        model = _modal(rng, n, int(rng.integers(1, 4)), int(rng.integers(1, 4)))
        data, _ = _noisy(rng, model, ratio)
        fit = realize_impulse_response(data, sample_time=1.0)
        assert fit.order == n
        assert fit.fragile is (not confident), (ratio, fit.signal_margin, fit.notes)
        if confident:
            assert fit.signal_margin >= 100 and fit.decision.window_outcome == ""


def test_overstated_noise_level_is_flagged():
    # A given noise level 30 x the true one: the dropped values lie far below what such
    # noise makes (plateau_ratio ~ 1/30), so states between them and the floor could be lost.
    rng = np.random.default_rng(2029)
    model = _modal(rng, 4, 2, 2)
    data, sigma = _noisy(rng, model, 3e4)
    honest = realize_impulse_response(data, sample_time=1.0, noise_level=sigma)
    assert honest.order == 4 and not honest.fragile
    overstated = realize_impulse_response(data, sample_time=1.0, noise_level=30 * sigma)
    assert overstated.plateau_ratio < 0.1
    assert overstated.fragile and "overstates the noise" in overstated.decision.window_outcome


def test_a_shorter_window_shows_a_fast_mode_the_whole_record_hides():
    # A slow mode (0.98) and a fast one (0.5) over 600 samples with noise 0.05: after about
    # 20 samples the fast mode has decayed into the noise, while the noise norm of the full
    # Hankel matrix keeps growing like sqrt(samples); the full record shows one state above
    # its floor, a shorter window both (Weyl's inequality, from memory).
    model = pc.StateSpaceModel(np.diag([0.98, 0.5]), [[1.0], [1.0]], [[1.0, 1.0]], dt=1.0)
    exact = markov_parameters(model, 600).values
    noise = 0.05 * np.random.default_rng(3).standard_normal(exact.shape)
    noise[0] = 0.0
    fit = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=0.05)
    assert fit.window_orders[0] == (600, 1)
    assert fit.order == 2 and fit.window_samples < 600
    assert fit.block_rows + fit.block_columns == fit.window_samples
    assert any("samples show 2 states" in note for note in fit.notes)
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(fit.model.A).real), [0.5, 0.98],
                               atol=0.1)
    assert fit.fragile  # the fast mode stands only just above the short window's floor
    whole = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=0.05,
                                     order=2)
    assert whole.model.n == 2


def test_state_hidden_below_the_noise_is_not_seen():
    # The documented limit: a state whose noise-free Hankel value is 0.05 of the noise norm
    # cannot be told from noise (Weyl), so the data support one state fewer, confidently.
    rng = np.random.default_rng(2030)
    base = _modal(rng, 3, 1, 1)
    data, sigma = _noisy(rng, base, 3e3)
    q, r = _hankel_shape(199)
    extra = markov_parameters(pc.StateSpaceModel([[0.7]], [[1.0]], [[1.0]], dt=1.0), 200).values
    own = scipy.linalg.svdvals(_block_hankel(extra, q, r))[0]
    unit = _noise_spectra(199, 1, 1, q, r)[:, 0].mean()
    fit = realize_impulse_response(data + extra * (0.05 * sigma * unit / own), sample_time=1.0)
    assert fit.order == 3 and not fit.fragile


def test_sequential_floor_finds_a_state_the_plain_noise_floor_misses():
    # 16 states at 40 dB (as in benchmarks/impulse_realization_study.py): with k states in
    # the data, value k + 1 is tested against what noise makes next to those k states (a
    # parametric bootstrap, Efron 1979), which lies below the floor for noise alone (by
    # Weyl's inequality sigma_{k+1}(H_k + E) <= ||E||; Weyl 1912, from memory).  Here the
    # floor for noise alone shows 14 states of the whole record, the sequential test 15, and
    # the first 80 samples all 16.
    rng = np.random.default_rng(42)
    model = _modal(rng, 16, 1, 1, radius=(0.9, 0.97))
    exact, noise, sigma = _forty_db(rng, model, 120)
    fit = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=sigma)
    q, r = _hankel_shape(119)
    s_all = scipy.linalg.svdvals(_block_hankel(exact + noise, q, r))
    norms = _noise_spectra(119, 1, 1, q, r)[:, 0]
    plain = sigma * (norms.mean() + 5 * norms.std(ddof=1))
    assert np.count_nonzero(s_all > plain) == 14
    assert fit.window_orders[0] == (120, 15)
    assert fit.order == 16 and fit.fragile
    s = fit.hankel_singular_values
    assert s[15] > fit.noise_floor > s[16]


def test_windows_examined_are_the_documented_lengths():
    # The studies decide identifiability from _window_lengths before realizing; the
    # realization must examine exactly those windows (L, L / 1.5, ..., at least 30).
    assert _window_lengths(299) == [299, 199, 132, 88, 58, 38]
    assert _window_lengths(44) == [44] and _window_lengths(45) == [45, 30]
    rng = np.random.default_rng(2031)
    model = _modal(rng, 6, 2, 1, radius=(0.9, 0.97))
    exact, noise, sigma = _forty_db(rng, model, 300)
    fit = realize_impulse_response(exact + noise, sample_time=1.0, noise_level=sigma)
    assert [samples for samples, _ in fit.window_orders] == [L + 1 for L in _window_lengths(299)]
    assert fit.order == 6
