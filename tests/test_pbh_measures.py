"""sigma_min(A - mu I) at many points in lock step (plantcore.structure.pbh_measures) against
the one-point iteration and a dense SVD."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

import plantcore as pc
from plantcore.structure import pbh_measures as pm


def _beam(modes: int, damping: float = 5e-3) -> np.ndarray:
    """Lightly damped modes, frequencies close together at the bottom: the boundary test's
    hard case (close singular values of every shifted triangle), in rotated coordinates."""
    omega = (np.arange(1, modes + 1) - 0.5) ** 2 * 2.5
    W = np.diag(omega)
    A = np.block([[np.zeros((modes, modes)), W], [-W, -2 * damping * W]])
    Q, _ = np.linalg.qr(np.random.default_rng(7).standard_normal((2 * modes, 2 * modes)))
    return Q.T @ A @ Q


def _boundary_points(A) -> np.ndarray:
    values = np.linalg.eigvals(A)
    return np.array([complex(0.0, v.imag) for v in values if v.imag >= 0])


def _rounding(T) -> float:
    """Rounding level of a value ``||(T - mu I) z||``: eps ||T||_F (its absolute error)."""
    return np.finfo(float).eps * float(np.linalg.norm(T))


def _one_point(R0, shift):
    R = np.array(R0, order="F")
    R[np.diag_indices_from(R)] -= shift
    return pm._triangle_smallest(R)[0]


@pytest.mark.parametrize("lock_step, budget", [(128, None), (3, None), (64, 60)])
def test_lock_step_agrees_with_one_point_iteration(lock_step, budget):
    """Same values to rounding level, with many runs at once, a few, and with a memory budget
    so small that runs wait for storage (and so grow their storage one run at a time)."""
    A = _beam(30)
    measures = pm.PBHMeasures(A)
    T, _ = measures.schur.pair(np.zeros((60, 0)), "c", False)
    shifts = np.conj(_boundary_points(A))
    plain, floors = pm._plain_shifts(T, shifts)
    assert plain.all()
    got = pm._shifted_smallest(T, shifts, floors, lock_step=lock_step, budget=budget)
    want = np.array([_one_point(T, mu) for mu in shifts])
    assert_allclose(got, want, rtol=1e-12, atol=_rounding(T))
    dense = [np.linalg.svd(A - lam * np.eye(60), compute_uv=False)[-1]
             for lam in _boundary_points(A)]
    assert np.all(got >= np.array(dense) * (1 - 1e-12))      # attained: an upper bound
    assert_allclose(got, dense, rtol=1e-8)


def test_runs_needing_more_steps_than_stored_at_first():
    """Runs that go beyond the first storage (one stored vector) and up to the step limit."""
    A = _beam(20, damping=1e-4)
    measures = pm.PBHMeasures(A)
    T, _ = measures.schur.pair(np.zeros((40, 0)), "c", False)
    shifts = np.conj(_boundary_points(A))
    _, floors = pm._plain_shifts(T, shifts)
    first = pm._FIRST_ROOM
    try:
        pm._FIRST_ROOM = 1
        got = pm._shifted_smallest(T, shifts, floors)
    finally:
        pm._FIRST_ROOM = first
    assert_allclose(got, [_one_point(T, mu) for mu in shifts], rtol=1e-12, atol=_rounding(T))


def test_shifts_needing_a_floor_or_scaling_are_left_to_the_one_point_path():
    T = np.asfortranarray(np.triu(np.ones((4, 4))) + np.diag([0.0, 1.0, 2.0, 3.0]))
    plain, floors = pm._plain_shifts(T, np.array([1.0, 0.5, 2.0**450, 0.0]))
    assert plain.tolist() == [False, True, False, True]
    # the floor of the one-point code: 1e-3 eps (max |row 0| + max |pivot|)
    assert floors[1] == 1e-3 * np.finfo(float).eps * (1.0 + 3.5 + 1e-300)
    zero = pm._plain_shifts(np.zeros((3, 3)), np.array([0.0]))[0]
    assert not zero[0]


def test_smallest_routes_many_points_through_the_lock_step(monkeypatch):
    """The measures' answers are the same with the lock step on and off, for complex points,
    real points (real triangle), exact eigenvalues (pivot floor) and both sides."""
    rng = np.random.default_rng(3)
    n = 40
    A = rng.standard_normal((n, n)) / np.sqrt(n)
    A[:, 0] = 0.0                                 # an exact eigenvalue 0
    A = np.block([[A, np.zeros((n, 4))], [np.zeros((4, n)), np.diag([1.0, 2.0, 3.0, 4.0])]])
    upper = [v for v in np.linalg.eigvals(A) if v.imag >= 0]
    points = upper + [0.5, -0.25, 0.0, 2.0] + list(1j * rng.standard_normal(6))
    empty = {"c": np.zeros((n + 4, 0)), "o": np.zeros((0, n + 4))}

    def values(size):
        monkeypatch.setattr(pm, "MULTI_SHIFT_SIZE", size)
        monkeypatch.setattr(pm, "MULTI_SHIFT_POINTS", 2)
        measures = pm.PBHMeasures(A)
        return {side: measures.smallest(empty[side], points, side) for side in "co"}

    called = []
    original = pm._shifted_smallest
    monkeypatch.setattr(pm, "_shifted_smallest",
                        lambda *a, **k: called.append(len(a[1])) or original(*a, **k))
    one = values(10**9)
    assert not called
    many = values(0)
    assert called and sum(called) >= len(points)      # both sides, most points lock step
    for side in "co":
        assert_allclose(many[side], one[side], rtol=1e-12, atol=_rounding(A))
        dense = [np.linalg.svd(A - lam * np.eye(n + 4), compute_uv=False)[-1] for lam in points]
        assert_allclose(many[side], dense, rtol=1e-8, atol=1e-14)


def _pbh_model(n: int = 30, seed: int = 11):
    """A random model with an exact eigenvalue 0 (pivot floor) and real eigenvalues beside
    complex pairs, three inputs and two outputs."""
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((n, n)) / np.sqrt(n)
    A[:, 0] = 0.0
    return A, rng.standard_normal((n, 3)), rng.standard_normal((2, n))


def _dense_pbh(A, X, lam, side):
    shifted = A - lam * np.eye(A.shape[0])
    M = np.hstack([shifted, X]) if side == "c" else np.vstack([shifted, X])
    return np.linalg.svd(M, compute_uv=False)[-1]


def test_margins_with_the_shared_work_triangle_equal_fresh_copies(monkeypatch):
    """One work triangle for all the points of a call (copied in slabs of columns) gives
    the values of a fresh copy per point, bit for bit, on both sides and arithmetics."""
    monkeypatch.setattr(pm, "_COPY_BLOCK", 7)           # several slabs, a ragged last one
    A, B, C = _pbh_model()
    points = [complex(v) for v in np.linalg.eigvals(A) if v.imag >= 0] + [0.3, 0.0, 0.5j]
    measures = pm.PBHMeasures(A)
    for X, side in ((B, "c"), (C, "o")):
        shared = measures.smallest(X, points, side)
        fresh = [measures._one(X, lam, side) for lam in points]
        np.testing.assert_array_equal(shared, fresh)
        dense = [_dense_pbh(A, X, lam, side) for lam in points]
        assert_allclose(shared, dense, rtol=1e-8, atol=1e-14)


@pytest.mark.parametrize("power", [450, -450, 600, -600])
def test_margins_of_a_model_scaled_beyond_the_bounds_scale_exactly(power):
    """Far from 1 in size the bounds on ||R||_F do not skip the scaling test (at 2^600 their
    squares overflow, at 2^-600 they underflow): the values scale with the model by the same
    power of two, and nothing warns (the suite turns RuntimeWarnings into errors)."""
    A, B, C = _pbh_model(n=12, seed=5)
    points = [complex(v) for v in np.linalg.eigvals(A) if v.imag >= 0][:5] + [0.25]
    s = 2.0 ** power
    plain, scaled = pm.PBHMeasures(A), pm.PBHMeasures(A * s)
    for X, side in ((B, "c"), (C, "o")):
        expect = plain.smallest(X, points, side) * s
        got = scaled.smallest(X * s, [lam * s for lam in points], side)
        assert np.all(np.isfinite(got))
        assert_allclose(got, expect, rtol=1e-10)


def test_margin_residual_keeps_values_attained_and_within_its_bound():
    """Stopping at MARGIN_RESIDUAL instead of 1e-8: every value still at least the dense
    SVD's (attained, up to rounding) and within the documented 1e-6 relative of it."""
    A, B, C = _pbh_model(n=60, seed=2)
    points = [complex(v) for v in np.linalg.eigvals(A) if v.imag >= 0]
    measures = pm.PBHMeasures(A)
    for X, side in ((B, "c"), (C, "o")):
        loose = measures.smallest(X, points, side, rtol=pm.MARGIN_RESIDUAL)
        tight = measures.smallest(X, points, side)
        dense = np.array([_dense_pbh(A, X, lam, side) for lam in points])
        rounding = 1e2 * np.finfo(float).eps * np.linalg.norm(np.hstack([A, B]) if side == "c"
                                                             else np.vstack([A, C]))
        assert np.all(loose >= dense - rounding)
        assert_allclose(loose, dense, rtol=pm.MARGIN_RESIDUAL, atol=rounding)
        assert_allclose(loose, tight, rtol=pm.MARGIN_RESIDUAL, atol=rounding)


# --- BLAS threads by model size (issue 17, item 6) -------------------------------------------

def _blas_threads() -> int:
    from threadpoolctl import threadpool_info
    counts = [entry["num_threads"] for entry in threadpool_info() if entry["user_api"] == "blas"]
    return max(counts) if counts else 1


def test_state_count_reads_every_accepted_form_and_zero_otherwise():
    from plantcore.structure.pbh_measures import state_count
    A = np.zeros((7, 7))
    assert state_count(pc.StateSpaceModel(A, np.ones((7, 1)), np.ones((1, 7)))) == 7
    assert state_count((A, np.ones((7, 1)), np.ones((1, 7)))) == 7
    assert state_count([A.tolist(), [[1]] * 7, [[1] * 7]]) == 7
    assert state_count("plant.toml") == 0
    assert state_count((np.ones(3),)) == 0


def test_calls_up_to_the_size_limit_run_on_one_blas_thread_and_larger_ones_unchanged():
    from threadpoolctl import threadpool_limits

    from plantcore.structure.pbh_measures import ONE_THREAD_SIZE, threads_by_size

    @threads_by_size(2)
    def seen(first, second):
        return _blas_threads()

    small = (np.zeros((5, 5)), np.ones((5, 1)), np.ones((1, 5)))
    large = (np.zeros((ONE_THREAD_SIZE + 1,) * 2),)
    with threadpool_limits(2, user_api="blas"):
        outside = _blas_threads()
        if outside < 2:
            pytest.skip("BLAS runs on one thread here: a limit to one could not be told apart")
        assert seen(small, small) == 1
        assert seen(small, large) == outside          # the larger model decides
        assert _blas_threads() == outside             # the limit ends with the call
    assert seen.__name__ == "seen"


def test_public_calls_carry_the_size_rule(monkeypatch):
    # a decorated public call keeps its name and documentation and computes on one thread
    from threadpoolctl import threadpool_limits

    from plantcore.reduction import balanced
    seen = []
    original = balanced._hsv_and_factors

    def spy(*args, **kwargs):
        seen.append(_blas_threads())
        return original(*args, **kwargs)

    monkeypatch.setattr(balanced, "_hsv_and_factors", spy)
    model = pc.StateSpaceModel(np.diag([-1.0, -2.0, -3.0]), np.ones((3, 1)), np.ones((1, 3)))
    with threadpool_limits(2, user_api="blas"):
        if _blas_threads() < 2:
            pytest.skip("BLAS runs on one thread here: a limit to one could not be told apart")
        pc.hankel_singular_values(model)
    assert pc.hankel_singular_values.__name__ == "hankel_singular_values"
    assert pc.hankel_singular_values.__doc__.startswith("Hankel singular values")
    assert seen == [1]
