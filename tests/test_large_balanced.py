"""Balanced truncation from low-rank factors against the dense path (plantcore.large)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse

import plantcore as pc
from plantcore.core.errors import NumericalBreakdown
from plantcore.examples.heated_plate import heated_plate
from plantcore.large import low_rank_balanced_truncation, low_rank_hankel_singular_values
from plantcore.reduction.balanced import truncation_error


def _nonsymmetric(n=200, seed=11):
    rng = np.random.default_rng(seed)
    K = scipy.sparse.random(n, n, density=0.02, random_state=rng)
    A = (K - K.T) * 3.0 + scipy.sparse.diags(-np.geomspace(0.5, 50.0, n))
    return pc.StateSpaceModel(A.tocsr(), rng.standard_normal((n, 2)),
                              rng.standard_normal((2, n)))


@pytest.fixture(scope="module")
def plate():
    return heated_plate(196)  # the generated example, 14 x 14 cells


@pytest.mark.parametrize("which", ["plate", "nonsymmetric"])
def test_hankel_singular_values_agree_with_the_dense_path(plate, which):
    # issue 18's check: 1e-6 relative for every value above 1e-8 of the largest; the dense
    # square-root path (Hammarling factors) is the reference routine.
    model = plate if which == "plate" else _nonsymmetric()
    low = low_rank_hankel_singular_values(model)
    dense = pc.hankel_singular_values(model.to_dense())
    wanted = dense > 1e-8 * dense[0]
    assert low.size >= np.count_nonzero(wanted)
    k = np.count_nonzero(wanted)
    np.testing.assert_allclose(low[:k], dense[:k], rtol=1e-6)


def test_hankel_singular_values_agree_with_the_dense_path_at_1225_states():
    # The same check where the dense path used to be wrong (largest value 0.318926 against
    # 0.318780 before 0eb65cd): the plate's repeated eigenvalues and fast-decaying values.
    model = heated_plate(1225)
    low = low_rank_hankel_singular_values(model)
    dense = pc.hankel_singular_values(model.to_dense())
    k = int(np.count_nonzero(dense > 1e-8 * dense[0]))
    assert low.size >= k
    np.testing.assert_allclose(low[:k], dense[:k], rtol=1e-6)


def test_the_public_functions_accept_a_sparse_model(plate):
    np.testing.assert_array_equal(pc.hankel_singular_values(plate),
                                  low_rank_hankel_singular_values(plate))
    red = pc.balanced_truncation(plate, order=6)
    assert red.order == 6 and red.peak_error is not None


@pytest.mark.parametrize("order", [4, 10])
def test_reduced_models_and_their_errors_agree_with_the_dense_path(plate, order):
    low = low_rank_balanced_truncation(plate, order=order)
    dense = pc.balanced_truncation(plate.to_dense(), order=order)
    assert not low.model.is_sparse and low.model.n == order
    true_low = truncation_error(plate.to_dense(), low.model).value
    true_dense = truncation_error(plate.to_dense(), dense.model).value
    assert np.isclose(true_low, true_dense, rtol=1e-4)
    assert np.isclose(low.error_bound, dense.error_bound, rtol=1e-5)
    assert true_low <= low.error_bound * (1 + 1e-6)          # Enns 1984 / Glover 1984 bound
    # the a posteriori estimate is a lower bound of the true peak, and close to it
    assert low.peak_error.value <= true_low * (1 + 1e-8)
    assert low.peak_error.value >= 0.5 * true_low
    # the transfer functions are the same up to the state basis: compare at a few points
    for s in (0.0, 1e-3j, 0.05j):
        np.testing.assert_allclose(low.model.transfer_at(s), dense.model.transfer_at(s),
                                   rtol=1e-5, atol=1e-8 * np.abs(dense.model.transfer_at(0)).max())


def test_max_error_chooses_the_smallest_order_whose_bound_fits(plate):
    hsv = low_rank_hankel_singular_values(plate)
    target = 2.0 * hsv[5:].sum() * 1.0001
    red = low_rank_balanced_truncation(plate, max_error=target, check_error=False)
    assert red.order <= 5 and red.error_bound <= target and red.peak_error is None
    assert 2.0 * hsv[red.order - 1:].sum() > target


def test_discrete_time_matches_the_dense_path():
    rng = np.random.default_rng(5)
    M = scipy.sparse.random(150, 150, density=0.04, random_state=rng)
    M = M - M.T + scipy.sparse.diags(rng.uniform(-1.0, 1.0, 150))
    Ad = (0.85 / np.abs(np.linalg.eigvals(M.toarray())).max() * M).tocsr()
    model = pc.StateSpaceModel(Ad, rng.standard_normal((150, 1)), rng.standard_normal((2, 150)),
                               dt=0.1)
    low = low_rank_hankel_singular_values(model)
    dense = pc.hankel_singular_values(model.to_dense())
    k = np.count_nonzero(dense > 1e-8 * dense[0])
    np.testing.assert_allclose(low[:k], dense[:k], rtol=1e-6)
    red = low_rank_balanced_truncation(model, order=8)
    assert red.model.is_discrete and red.model.dt == 0.1
    true = truncation_error(model.to_dense(), red.model).value
    assert red.peak_error.value <= true * (1 + 1e-8) and true <= red.error_bound * (1 + 1e-6)


def test_structural_pre_reduction_runs_first_and_names_what_it_removed():
    base = heated_plate(64)
    n = base.n
    # one extra state fed by the plate but never measured: removed exactly, by name
    A = scipy.sparse.bmat([[base.A, None], [scipy.sparse.csr_array(np.eye(1, n)), -np.eye(1)]])
    model = pc.StateSpaceModel(A.tocsr(), np.vstack([base.B, np.zeros((1, 3))]),
                               np.hstack([base.C, np.zeros((4, 1))]),
                               states=list(base.states) + ["probe_lag"])
    red = low_rank_balanced_truncation(model, order=5, check_error=False)
    assert red.structural.not_observed == ("probe_lag",) and red.original_order == n + 1
    ref = low_rank_balanced_truncation(base, order=5, check_error=False)
    np.testing.assert_allclose(red.hankel_singular_values[:5], ref.hankel_singular_values[:5],
                               rtol=1e-12)


def test_bad_requests_are_refused(plate):
    with pytest.raises(ValueError, match="either order or max_error"):
        low_rank_balanced_truncation(plate, order=3, max_error=1.0)
    with pytest.raises(ValueError, match="resolved by the low-rank factors"):
        low_rank_balanced_truncation(plate, order=190)
    unstable = pc.StateSpaceModel(scipy.sparse.diags(np.r_[-np.ones(9), 0.2]).tocsr(),
                                  np.ones((10, 1)), np.ones((1, 10)))
    with pytest.raises(NumericalBreakdown, match="may be unstable"):
        low_rank_balanced_truncation(unstable, order=1)
