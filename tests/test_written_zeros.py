"""Written models store exact zeros: structural zeros at the source, rounding dust within the
computation's backward error cleared by plantcore.files.written_zeros (issue 21)."""

from __future__ import annotations

import os

import numpy as np
import pytest
import scipy.linalg
import scipy.sparse

import plantcore as pc
from plantcore.cli import main
from plantcore.examples import example_path
from plantcore.files.written_zeros import (
    a_priori_backward_error,
    balanced_backward_error,
    clear_rounding_dust,
    reduction_backward_error,
)

EPS = np.finfo(float).eps


def _four_part_model(rng, sizes):
    """A model with the given Kalman part sizes, hidden by an orthogonal change of
    coordinates (zero pattern of the four-part decomposition: common practice)."""
    n = int(sum(sizes))
    A = rng.standard_normal((n, n))
    B = rng.standard_normal((n, 2))
    C = rng.standard_normal((2, n))
    cut = np.cumsum(sizes)
    s = [slice(0, cut[0]), slice(cut[0], cut[1]), slice(cut[1], cut[2]), slice(cut[2], cut[3])]
    for r, c in [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]:
        A[s[r], s[c]] = 0.0
    B[s[2]] = 0.0
    B[s[3]] = 0.0
    C[:, s[1]] = 0.0
    C[:, s[3]] = 0.0
    Q = np.linalg.qr(rng.standard_normal((n, n)))[0]
    return pc.StateSpaceModel(Q.T @ A @ Q, Q.T @ B, C @ Q)


@pytest.mark.parametrize("seed", range(6))
def test_kalman_zero_blocks_are_exact_zeros_at_the_source(seed):
    rng = np.random.default_rng(seed)
    sizes = (2, 1, 1, 2) if seed % 2 else (1, 2, 2, 1)
    kd = pc.kalman_decomposition(_four_part_model(rng, sizes))
    assert tuple(kd.sizes) == sizes
    cut = np.cumsum(sizes)
    t = [slice(0, cut[0]), slice(cut[0], cut[1]), slice(cut[1], cut[2]), slice(cut[2], cut[3])]
    M = kd.model
    for r, c in [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]:
        assert np.all(M.A[t[r], t[c]] == 0.0), (r, c)
    assert np.all(M.B[t[2]] == 0.0) and np.all(M.B[t[3]] == 0.0)
    assert np.all(M.C[:, t[1]] == 0.0) and np.all(M.C[:, t[3]] == 0.0)


def test_balanced_truncation_keeps_the_unstable_block_decoupled_exactly():
    # an unstable mode at 0.5 kept unreduced next to two damped oscillators (common practice)
    A = np.zeros((5, 5))
    A[0, 0] = 0.5
    A[1, 2], A[2, 1], A[2, 2] = 1.0, -100.0, -0.2
    A[3, 4], A[4, 3], A[4, 4] = 1.0, -400.0, -0.4
    B = np.array([[1.0], [0.0], [1.0], [0.0], [0.5]])
    C = np.array([[1.0, 1.0, 0.0, 1.0, 0.0]])
    bt = pc.balanced_truncation(pc.StateSpaceModel(A, B, C), order=3)
    assert bt.unstable_order == 1
    unstable = np.flatnonzero(np.isclose(np.diag(bt.model.A), 0.5, atol=1e-12))
    assert unstable.size == 1
    k = int(unstable[0])
    others = [i for i in range(bt.model.n) if i != k]
    assert np.all(bt.model.A[k, others] == 0.0) and np.all(bt.model.A[others, k] == 0.0)


def test_dust_is_cleared_and_real_small_values_are_kept():
    A = np.array([[-1.0, 3e-17, 1e-9], [-2e-31, -2.0, 0.0], [0.0, 1e-17, -3.0]])
    B = np.array([[1.0, 0.0], [1e-18, 1e-20], [0.0, 2e-20]])   # input 2 in tiny units
    C = np.array([[1.0, -0.0, 1e-9]])
    out = clear_rounding_dust(pc.StateSpaceModel(A, B, C, D=[[1e-30, 0.0]]), 1e-15)
    assert out.model.A[0, 1] == 0.0 and out.model.A[1, 0] == 0.0 and out.model.A[2, 1] == 0.0
    assert out.model.A[0, 2] == 1e-9 and out.model.C[0, 2] == 1e-9    # real: above 1e-15
    assert out.model.B[1, 0] == 0.0
    # the tiny-unit input keeps its entries: judged against its own column
    assert out.model.B[1, 1] == 1e-20 and out.model.B[2, 1] == 2e-20
    assert not np.signbit(out.model.C[0, 1])                    # -0.0 written as 0.0
    assert out.model.D[0, 0] == 1e-30                           # D is never touched
    assert out.cleared == 4
    assert 0.0 < out.change <= out.backward_error


def test_a_column_of_pure_dust_is_cleared_against_the_reference():
    # input 2 of the reference drives only a state the reduction removed, so its column of
    # the computed model is all rounding dust
    reference = pc.StateSpaceModel(np.diag([-1.0, -2.0]), [[1.0, 0.0], [0.0, 1.0]],
                                   [[1.0, 0.0]])
    computed = pc.StateSpaceModel([[-1.0]], [[1.0, 4e-17]], [[1.0]])
    assert clear_rounding_dust(computed, 0.0).model.B[0, 1] == 4e-17   # alone: a real input
    out = clear_rounding_dust(computed, 0.0, reference=reference)
    assert out.model.B[0, 1] == 0.0 and out.backward_error == a_priori_backward_error(2)


def test_the_budget_caps_the_combined_size_of_what_is_cleared():
    rng = np.random.default_rng(7)
    A = rng.standard_normal((6, 6))
    A[np.abs(A) < 0.5] = 0.0
    dusty = A + np.where(A == 0.0, 1e-14 * rng.standard_normal((6, 6)), 0.0)
    model = pc.StateSpaceModel(dusty, np.ones((6, 1)), np.ones((1, 6)))
    small = clear_rounding_dust(model, 1e-16)        # raised to the a priori 6 eps
    large = clear_rounding_dust(model, 1e-12)
    assert small.backward_error == 6 * EPS
    assert small.cleared < large.cleared == int(np.count_nonzero(A == 0.0))
    assert small.change <= small.backward_error and large.change <= 1e-12
    np.testing.assert_array_equal(large.model.A, A)


def test_backward_error_of_a_result_counts_dropped_values_and_residual():
    m = pc.load_model(example_path("thermal_process"))
    mr = pc.minimal_realization(m)
    dropped = max(d.largest_dropped for d in mr.decisions
                  if not d.check_only and not d.superseded)
    assert reduction_backward_error(mr, m.n) == max(dropped, m.n * EPS)
    kd = pc.kalman_decomposition(m)
    assert reduction_backward_error(kd, m.n) >= kd.residual


def _tiny_entries(path):
    w = pc.load_model(path)
    scale = max(np.abs(w.A).max(), 1.0)
    return [x for M in (w.A, w.B, w.C) for x in M.ravel() if 0.0 < abs(x) < 1e-20 * scale]


def test_reduce_writes_exact_zeros_and_certifies_what_it_wrote(tmp_path, capsys):
    source = example_path("thermal_process")
    out = tmp_path / "minimal.toml"
    assert main(["reduce", source, "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "at rounding level written as exact 0" in text and "EQUIVALENT" in text
    assert _tiny_entries(out) == []        # before: -3.4e-31, -1.8e-30, 1.0e-20, ...
    written = pc.load_model(out)
    assert pc.check_equivalence(pc.load_model(source), written).equivalent


def test_demo_writes_minimal_model_without_dust(tmp_path):
    from plantcore.demo import run_demo

    result = run_demo(os.fspath(tmp_path / "demo"), echo=None, progress=False)
    path = result.files["minimal_model.toml"]
    w = pc.load_model(path)
    scale = np.abs(w.A).max()
    # the oven's zones are decoupled exactly: every entry is either real or exactly 0
    assert [x for x in w.A.ravel() if 0.0 < abs(x) < 1e-12 * scale] == []
    assert [x for x in w.B.ravel() if 0.0 < abs(x) < 1e-12] == []
    assert result.contents.certificate.equivalent
    assert result.contents.certificate.peak_error < 1e-12


# --- balanced models from low-rank factors (the sparse reduce) ---------------------------------
def test_balanced_backward_error_is_the_floor_for_an_exactly_balanced_model():
    # x' = -x + u, y = x: both Gramians are 1/2 (hand derivation from the Lyapunov equation
    # -2 P + 1 = 0), so with sigma = 1/2 both residuals vanish and only the floor remains
    model = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]])
    assert balanced_backward_error(model, [0.5], worked_order=10) == a_priori_backward_error(10)


@pytest.mark.parametrize("dt", [None, 1.0])
def test_balanced_backward_error_measures_the_balancing_residual(dt):
    # A off by delta from the exactly balanced value: continuous A = -1 + delta, sigma = 1/2
    # gives the residual 2 (-1 + delta) / 2 + 1 = delta over sigma + sigma = 1; discrete
    # a = 1/2 + delta, sigma = 4/3 (from a^2 s - s + 1 = 0) gives (2 a0 delta + delta^2) sigma
    # over 2 sigma |a|; both relative to ||[[A, B], [C, 0]]||_F (hand derivations)
    delta = 1e-9
    if dt is None:
        a, sigma, expected = -1.0 + delta, 0.5, delta
    else:
        a, sigma = 0.5 + delta, 4.0 / 3.0
        expected = (2 * 0.5 * delta + delta ** 2) / (2 * a)
    model = pc.StateSpaceModel([[a]], [[1.0]], [[1.0]], dt=dt)
    got = balanced_backward_error(model, [sigma], worked_order=1)
    assert got == pytest.approx(expected / np.sqrt(a * a + 2.0), rel=1e-6)


def _two_separate_chains(n: int):
    """Two heat-conduction chains that do not touch, each with its own input and output at
    its first cell: in balanced coordinates every coupling between the two chains is zero
    (common practice: a decoupled system balances block by block)."""
    def chain(a):
        return scipy.sparse.diags([np.ones(n - 1), np.full(n, -2.0 * a), np.ones(n - 1)],
                                  [-1, 0, 1])

    A = scipy.sparse.block_diag([chain(1.5), chain(2.5)]).tocsr()
    B = np.zeros((2 * n, 2))
    B[0, 0] = B[n, 1] = 1.0
    return pc.StateSpaceModel(A, B, B.T.copy(), name="two separate chains")


def test_sparse_reduce_writes_the_chain_couplings_as_exact_zeros(tmp_path, capsys):
    path, out = tmp_path / "chains.npz", tmp_path / "reduced.toml"
    pc.save_model(_two_separate_chains(20), path)
    assert main(["reduce", str(path), "-o", str(out), "--order", "6"]) == 0
    printed = capsys.readouterr().out
    assert "at rounding level written as exact 0" in printed
    reduced = pc.load_model(out)
    # each balanced state belongs to one chain: its input column (and output row) is the
    # chain's, and A couples no two states of different chains
    chain_of = np.argmax(np.abs(reduced.B), axis=1)
    assert sorted(np.bincount(chain_of, minlength=2)) == [3, 3]
    other = chain_of[:, None] != chain_of[None, :]
    assert np.all(reduced.A[other] == 0.0)
    assert np.all(reduced.B[np.arange(6), 1 - chain_of] == 0.0)
    assert np.all(reduced.C[1 - chain_of, np.arange(6)] == 0.0)
    # the error printed is measured on what is written, and it is within the bound
    bound = float(printed.split("Hankel singular values): ")[1].split()[0])
    measured = float(printed.split("a lower bound of the true peak): ")[1].split()[0])
    dense = _two_separate_chains(20).to_dense()
    err = pc.peak_gain(pc.StateSpaceModel(
        scipy.linalg.block_diag(dense.A, reduced.A), np.vstack([dense.B, reduced.B]),
        np.hstack([dense.C, -reduced.C]))).value
    assert measured <= err * (1 + 1e-6) and err <= bound * (1 + 1e-6)
