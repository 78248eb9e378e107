"""Tests of plantcore.estimation, plantcore.reports.audit and the survey-boat demo.

External references used below:

* G. P. Huang, A. I. Mourikis and S. I. Roumeliotis, "Observability-based rules for designing
  consistent EKF SLAM estimators", IJRR 29(5), 2010 (HMR 2010): planar robot-and-landmark
  mapping has three unobservable directions, a common shift in x and y and a common rotation
  ``[-py, px, 1, -l1y, l1x, ...]``; the standard filter's Jacobians see the rotation.
* R. Hermann and A. J. Krener, "Nonlinear controllability and observability", IEEE TAC 1977:
  the observability rank condition on stacked Lie derivatives.
* R. Penrose, "A generalized inverse for matrices", 1955: the least-norm solution of an
  underdetermined system, here computed independently with numpy.linalg.lstsq.
* Y. Bar-Shalom, X. R. Li and T. Kirubarajan, "Estimation with Applications to Tracking and
  Navigation", 2001 (BLK 2001), ch. 5: chi-square bounds of the run-averaged NEES.
* sympy exact rational arithmetic for ranks and Jacobians; scipy.stats for chi-square points.
"""

from __future__ import annotations

import io
import math
import os
import zipfile

import numpy as np
import pytest
import scipy.stats
import sympy
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import plantcore as pc
from plantcore.cli import main
from plantcore.core.errors import ModelFileError
from plantcore.estimation import (
    audit_from_file,
    audit_linearized_observability,
    constrain_observability,
    nonlinear_observability,
)
from plantcore.examples import survey_boat as sb
from plantcore.reports.audit import audit_html, audit_text

ROUND_OFF = 1e-13      # leakage at round-off level: far below the default tolerance 5e-11
CLEARLY_SEEN = 1e-6    # spurious leakage from moving linearization points: far above it


@pytest.fixture(scope="module")
def demo():
    """The packaged demo with its default seed (one run of the Monte Carlo per module)."""
    return sb.run_demo()


def _noise(demo):
    return demo.scenario.measurement_covariance


# =============================================================================================
# The planar robot-and-landmarks model (HMR 2010)
# =============================================================================================

def test_model_jacobians_match_sympy():
    # sympy differentiates the range-and-bearing model and the motion independently.
    px, py, th, bx, by, v, w, dt = sympy.symbols("px py th bx by v w dt", real=True)
    X = sympy.Matrix([px, py, th, bx, by])
    h = sympy.Matrix([sympy.sqrt((bx - px) ** 2 + (by - py) ** 2),
                      sympy.atan2(by - py, bx - px) - th])
    f = sympy.Matrix([px + dt * v * sympy.cos(th), py + dt * v * sympy.sin(th), th + dt * w,
                      bx, by])
    point = {px: 1.5, py: -2.0, th: 0.7, bx: 4.0, by: 3.0, v: 1.2, w: 0.3, dt: 0.5}
    Hs = np.array(h.jacobian(X).subs(point).evalf(), dtype=float)
    Fs = np.array(f.jacobian(X).subs(point).evalf(), dtype=float)
    x = np.array([1.5, -2.0, 0.7, 4.0, 3.0])
    assert_allclose(sb.measurement_jacobian(x), Hs, rtol=1e-12, atol=1e-14)
    assert_allclose(sb.transition_jacobian(x, (1.2, 0.3), 0.5), Fs, rtol=1e-12, atol=1e-14)
    # The analytic unobservable basis of HMR 2010 is annihilated by the measurement Jacobian.
    assert_allclose(sb.measurement_jacobian(x) @ sb.unobservable_basis(x), 0.0, atol=1e-14)


def test_consistent_trajectory_keeps_three_directions(demo):
    run = demo.first_run
    F, H = sb.jacobians_along(run.states[1:], run.inputs[1:], demo.scenario.dt)
    N0 = sb.unobservable_basis(run.states[1])
    audit = audit_linearized_observability(F, H, N0, measurement_noise=_noise(demo))
    n = demo.scenario.n
    assert (audit.rank, audit.expected_rank, audit.spurious_dimension) == (n - 3, n - 3, 0)
    assert audit.leakage.max() < ROUND_OFF
    assert np.isinf(audit.implied_std).all()
    assert audit.principal_angles.size == 3 and audit.principal_angles.max() < 1e-10
    # The analytic directions lie in the computed null space (HMR 2010).
    residual = N0 - audit.nullspace @ (audit.nullspace.T @ N0)
    assert np.linalg.norm(residual) < 1e-10 * np.linalg.norm(N0)
    assert not audit.fragile


def test_standard_filter_sees_the_rotation(demo):
    run = demo.first_standard
    audit = audit_linearized_observability(run.transition_jacobians, run.measurement_jacobians,
                                           run.nullspaces[0], measurement_noise=_noise(demo))
    n = demo.scenario.n
    assert audit.rank == n - 2 and audit.spurious_dimension == 1
    assert audit.leakage[0] < ROUND_OFF and audit.leakage[1] < ROUND_OFF   # x and y shifts
    assert audit.leakage[2] > CLEARLY_SEEN                                 # the rotation
    assert audit.leakage[2] > 1e3 * audit.tolerance
    assert np.isinf(audit.implied_std[:2]).all() and np.isfinite(audit.implied_std[2])
    # The numerical null space is the two shifts: two zero principal angles.
    assert audit.principal_angles.size == 2 and audit.principal_angles.max() < 1e-10
    assert not audit.fragile
    # The implied standard deviation along the rotation shrinks as steps accumulate.
    growth = audit.implied_std_growth[:, 2]
    assert growth[-1] < growth[np.isfinite(growth)][0]
    assert_allclose(audit.leakage_growth[-1], audit.leakage, rtol=1e-12)
    # The demo's own audit agrees.
    assert demo.audit_standard.spurious_dimension == 1


def test_constrained_jacobians_restore_three_directions(demo):
    run = demo.first_standard
    fixed = constrain_observability(run.transition_jacobians, run.measurement_jacobians,
                                    run.nullspaces)
    audit = audit_linearized_observability(fixed.transition_jacobians, fixed.measurement_jacobians,
                                           run.nullspaces[0], measurement_noise=_noise(demo))
    n = demo.scenario.n
    assert audit.rank == n - 3 and audit.spurious_dimension == 0
    assert audit.leakage.max() < ROUND_OFF
    assert fixed.last_transition_constrained
    # Corrections small relative to the Jacobians; the measurement Jacobians, evaluated where
    # the basis is evaluated, need none beyond round-off.
    assert 0 < fixed.transition_corrections.max() < 0.1
    assert fixed.measurement_corrections.max() < 1e-12
    assert fixed.constraint_residual < 1e-12
    # The filter that used the constraint online is consistent too.
    assert demo.audit_constrained.spurious_dimension == 0
    assert demo.audit_constrained.leakage.max() < ROUND_OFF
    assert demo.first_constrained.transition_corrections.max() < 0.1


def test_constrain_is_the_least_norm_correction():
    # Penrose 1955: the least-norm Delta with Delta N = E, computed with numpy's lstsq on the
    # vectorized system (N^T kron I) vec(Delta) = vec(E), independently of our closed form.
    rng = np.random.default_rng(11)
    n, p, d, K = 5, 3, 2, 3
    F = rng.normal(size=(K, n, n))
    H = rng.normal(size=(K, p, n))
    N = rng.normal(size=(K + 1, n, d))
    fixed = constrain_observability(F, H, N)
    for k in range(K):
        E = F[k] @ N[k] - N[k + 1]
        system = np.kron(N[k].T, np.eye(n))
        delta = np.linalg.lstsq(system, E.reshape(-1, order="F"), rcond=None)[0]
        delta = delta.reshape(n, n, order="F")
        assert_allclose(F[k] - fixed.transition_jacobians[k], delta, rtol=1e-10, atol=1e-12)
        Eh = H[k] @ N[k]
        system_h = np.kron(N[k].T, np.eye(p))
        delta_h = np.linalg.lstsq(system_h, Eh.reshape(-1, order="F"), rcond=None)[0]
        assert_allclose(H[k] - fixed.measurement_jacobians[k], delta_h.reshape(p, n, order="F"),
                        rtol=1e-10, atol=1e-12)
        assert_allclose(fixed.transition_jacobians[k] @ N[k], N[k + 1], atol=1e-12)
        assert_allclose(fixed.measurement_jacobians[k] @ N[k], 0.0, atol=1e-12)
        assert_allclose(fixed.transition_corrections[k],
                        np.linalg.norm(delta) / np.linalg.norm(F[k]), rtol=1e-10)


def test_constrain_nullspace_shapes():
    rng = np.random.default_rng(5)
    F = rng.normal(size=(4, 3, 3))
    H = rng.normal(size=(4, 2, 3))
    N = rng.normal(size=(3, 1))
    const = constrain_observability(F, H, N)               # (n, d): the same at every step
    assert_allclose(const.transition_jacobians @ N, np.repeat(N[None], 4, axis=0), atol=1e-12)
    per_step = rng.normal(size=(4, 3, 1))                  # K bases: last transition untouched
    partial = constrain_observability(F, H, per_step)
    assert not partial.last_transition_constrained
    assert_allclose(partial.transition_jacobians[-1], F[-1], rtol=0, atol=0)
    assert partial.transition_corrections[-1] == 0.0
    with pytest.raises(ValueError, match="nullspace has 2 steps"):
        constrain_observability(F, H, rng.normal(size=(2, 3, 1)))
    with pytest.raises(ValueError, match="linearly dependent columns"):
        constrain_observability(F, H, np.array([[1.0, 2.0], [1.0, 2.0], [0.0, 0.0]]))
    empty = constrain_observability(F, H, np.zeros((3, 0)))
    assert_allclose(empty.transition_jacobians, F, rtol=0, atol=0)


# =============================================================================================
# Pitfalls
# =============================================================================================

def test_single_step_shows_nothing(demo):
    run = demo.first_standard
    one = audit_linearized_observability(run.transition_jacobians[:1],
                                         run.measurement_jacobians[:1], run.nullspaces[0])
    assert one.horizon == 1 and one.spurious_dimension == 0
    assert one.leakage.max() < ROUND_OFF
    assert any("single step" in note for note in one.notes)
    # The same filter over the full horizon does see the rotation.
    full = audit_linearized_observability(run.transition_jacobians, run.measurement_jacobians,
                                          run.nullspaces[0])
    assert full.spurious_dimension == 1
    # The growth arrays show where it starts: nothing at step 1.
    assert full.leakage_growth[0].max() < ROUND_OFF and full.leakage_growth[-1, 2] > CLEARLY_SEEN


def test_true_states_with_measured_inputs_are_not_consistent(demo):
    run = demo.first_run
    dt = demo.scenario.dt
    N0 = sb.unobservable_basis(run.states[1])
    F_meas, H = sb.jacobians_along(run.states[1:], run.measured_inputs[1:], dt)
    noisy = audit_linearized_observability(F_meas, H, N0)
    assert noisy.spurious_dimension == 1 and noisy.leakage[2] > CLEARLY_SEEN
    F_true, _ = sb.jacobians_along(run.states[1:], run.inputs[1:], dt)
    clean = audit_linearized_observability(F_true, H, N0)
    assert clean.spurious_dimension == 0 and clean.leakage.max() < ROUND_OFF


def test_rescaling_units_changes_no_rank(demo):
    """Metres -> millimetres, radians -> degrees: a diagonal similarity (ranks unchanged)."""
    n = demo.scenario.n
    scale = np.full(n, 1000.0)
    scale[2] = 180.0 / math.pi
    out_scale = np.tile([1000.0, 180.0 / math.pi], demo.scenario.n_buoys)
    run = demo.first_standard
    fixed = constrain_observability(run.transition_jacobians, run.measurement_jacobians,
                                    run.nullspaces)
    truth_F, truth_H = sb.jacobians_along(demo.first_run.states[1:], demo.first_run.inputs[1:],
                                          demo.scenario.dt)
    cases = [(truth_F, truth_H, sb.unobservable_basis(demo.first_run.states[1])),
             (run.transition_jacobians, run.measurement_jacobians, run.nullspaces[0]),
             (fixed.transition_jacobians, fixed.measurement_jacobians, run.nullspaces[0])]
    for F, H, N in cases:
        base = audit_linearized_observability(F, H, N)
        F_mm = F * scale[None, :, None] / scale[None, None, :]
        H_mm = H * out_scale[None, :, None] / scale[None, None, :]
        N_mm = N * scale[:, None]
        moved = audit_linearized_observability(F_mm, H_mm, N_mm)
        assert (moved.rank, moved.spurious_dimension) == (base.rank, base.spurious_dimension)
        # Characteristic sizes (state_scale) bring the magnitudes back: working coordinates
        # x_mm / scale are the metres and radians of the base audit (output units do not
        # change leakage ratios when every output is scaled alike, so rescale them back).
        back = audit_linearized_observability(F_mm, H_mm / out_scale[None, :, None], N_mm,
                                              state_scale=scale)
        assert_allclose(back.singular_values, base.singular_values, rtol=1e-9,
                        atol=1e-12 * base.singular_values[0])
        assert back.rank == base.rank
        seen = base.leakage > base.tolerance
        assert_allclose(back.leakage[seen], base.leakage[seen], rtol=1e-7)


# =============================================================================================
# The audit against independent computations
# =============================================================================================

def _textbook_audit(F, H, N, R):
    """Reference: the observability matrix stacked explicitly, numpy SVD and inverse."""
    n = F.shape[1]
    blocks, Phi = [], np.eye(n)
    info = np.zeros((n, n))
    W = np.linalg.inv(R)
    for k in range(F.shape[0]):
        blocks.append(H[k] @ Phi)
        info += (H[k] @ Phi).T @ W @ (H[k] @ Phi)
        Phi = F[k] @ Phi
    O = np.vstack(blocks)
    s = np.linalg.svd(O, compute_uv=False)
    V = np.linalg.qr(N)[0]
    V = V * np.sign(np.diag(np.linalg.qr(N)[1]))
    leakage = np.linalg.norm(O @ V, axis=0) / s[0]
    std = 1.0 / np.sqrt(np.einsum("ij,ik,kj->j", V, info, V))
    return s, leakage, std


def test_audit_matches_textbook_stacking():
    rng = np.random.default_rng(3)
    K, n, p = 7, 4, 2
    F = np.eye(n) + 0.3 * rng.normal(size=(K, n, n))
    H = rng.normal(size=(K, p, n))
    N = rng.normal(size=(n, 2))
    A = rng.normal(size=(p, p))
    R = A @ A.T + p * np.eye(p)
    audit = audit_linearized_observability(F, H, N, measurement_noise=R)
    s, leakage, std = _textbook_audit(F, H, N, R)
    assert_allclose(audit.singular_values[:s.size], s, rtol=1e-10)
    assert_allclose(audit.leakage, leakage, rtol=1e-10)
    assert_allclose(audit.implied_std, std, rtol=1e-9)
    assert audit.rank == n and audit.spurious_dimension == 2    # a generic model sees everything
    assert_allclose(audit.singular_value_growth[-1], audit.singular_values, rtol=1e-12)
    # Per-step noise (K, p, p) equal at every step gives the same answer.
    per_step = audit_linearized_observability(F, H, N, measurement_noise=np.repeat(R[None], K, 0))
    assert_allclose(per_step.implied_std, audit.implied_std, rtol=1e-12)


def test_implied_std_and_leakage_analytic():
    # Two positions on a line, K identical range measurements y = -x1 + (1 + eps) x2 with noise
    # variance r.  Common shift v = [1, 1]/sqrt(2): O v = sqrt(K) eps / sqrt(2) per block,
    # sigma_max(O) = sqrt(K) sqrt(1 + (1 + eps)^2), information along v = K eps^2 / (2 r).
    K, eps, r = 9, 1e-3, 0.25
    F = np.repeat(np.eye(2)[None], K, axis=0)
    H = np.repeat(np.array([[[-1.0, 1.0 + eps]]]), K, axis=0)
    audit = audit_linearized_observability(F, H, [1.0, 1.0], measurement_noise=r)
    assert_allclose(audit.leakage[0], (eps / math.sqrt(2)) / math.sqrt(1 + (1 + eps) ** 2),
                    rtol=1e-9)
    assert_allclose(audit.implied_std[0], math.sqrt(2 * r / K) / eps, rtol=1e-9)
    k = np.arange(1, K + 1)
    assert_allclose(audit.implied_std_growth[:, 0], np.sqrt(2 * r / k) / eps, rtol=1e-9)
    no_noise = audit_linearized_observability(F, H, [1.0, 1.0])
    assert_allclose(no_noise.implied_std[0], math.sqrt(2 / K) / eps, rtol=1e-9)
    assert any("unit measurement noise" in note for note in no_noise.notes)


def test_time_invariant_rank_matches_sympy_exact():
    # A constant pair (A, C) over n steps: rank of [C; CA; ...; CA^{n-1}] in exact arithmetic.
    A = np.array([[1, 1, 0, 0], [0, 1, 0, 0], [0, 0, 2, 1], [0, 0, 0, 3]], dtype=float)
    C = np.array([[1, 0, 0, 0], [0, 0, 0, 1]], dtype=float)
    As, Cs = sympy.Matrix(A.astype(int)), sympy.Matrix(C.astype(int))
    O = sympy.Matrix.vstack(*[Cs * As ** k for k in range(4)])
    exact_rank = O.rank()
    null = np.array(sympy.Matrix.hstack(*O.nullspace()).tolist(), dtype=float)
    K = 4
    audit = audit_linearized_observability(np.repeat(A[None], K, 0), np.repeat(C[None], K, 0), null)
    assert audit.rank == exact_rank == 3
    assert audit.spurious_dimension == 0 and audit.leakage.max() < ROUND_OFF
    # Over one step only C acts: rank 2, below what the system allows.
    short = audit_linearized_observability(A[None], C[None], null)
    assert short.rank == 2 and any("horizon" in note for note in short.notes)


@given(seed=st.integers(0, 2 ** 32 - 1))
def test_orthogonal_change_of_coordinates_leaves_audit_invariant(seed):
    rng = np.random.default_rng(seed)
    K, n, p, d = 4, 4, 1, 2
    F = rng.normal(size=(K, n, n))
    H = rng.normal(size=(K, p, n))
    N = rng.normal(size=(n, d))
    T = np.linalg.qr(rng.normal(size=(n, n)))[0]
    base = audit_linearized_observability(F, H, N)
    moved = audit_linearized_observability(T @ F @ T.T, H @ T.T, T @ N)
    assert moved.rank == base.rank
    top = base.singular_values[0]
    assert_allclose(moved.singular_values, base.singular_values, rtol=1e-8, atol=1e-12 * top)
    assert_allclose(moved.leakage, base.leakage, rtol=1e-7, atol=1e-12)


def test_zero_states_and_no_expected_directions():
    empty = audit_linearized_observability(np.zeros((3, 0, 0)), np.zeros((3, 2, 0)),
                                           np.zeros((0, 0)))
    assert (empty.rank, empty.expected_rank, empty.spurious_dimension) == (0, 0, 0)
    F = np.repeat(np.eye(2)[None], 2, axis=0)
    H = np.repeat(np.eye(2)[None], 2, axis=0)
    none = audit_linearized_observability(F, H, np.zeros((2, 0)))
    assert none.rank == 2 and none.expected_rank == 2 and none.leakage.shape == (0,)
    assert "only the rank" in audit_text(none)


@pytest.mark.parametrize("args, message", [
    ((np.eye(2), np.ones((1, 1, 2)), [[1.0], [1.0]]), r"3-D array of shape \(K, n, n\)"),
    ((np.ones((2, 2, 2)), np.ones((3, 1, 2)), [[1.0], [1.0]]), "has 3 steps but"),
    ((np.ones((2, 2, 2)), np.ones((2, 1, 3)), [[1.0], [1.0]]), "has 3 columns but"),
    ((np.full((2, 2, 2), np.nan), np.ones((2, 1, 2)), [[1.0], [1.0]]), "non-finite entry"),
    ((np.ones((2, 2, 2)), np.ones((2, 1, 2)), [[1.0, 2.0], [1.0, 2.0]]), "linearly dependent"),
    ((np.ones((2, 2, 2)), np.ones((2, 1, 2)), [[1.0], [1.0], [1.0]]), r"shape \(n, d\) = \(2, d\)"),
    ((np.ones((0, 2, 2)), np.ones((0, 1, 2)), [[1.0], [1.0]]), "no steps"),
    ((np.ones((2, 2, 2)), "abc", [[1.0], [1.0]]), "numeric array"),
])
def test_audit_bad_input(args, message):
    with pytest.raises(ValueError, match=message):
        audit_linearized_observability(*args)


@pytest.mark.parametrize("kwargs, message", [
    ({"measurement_noise": -1.0}, "must be positive"),
    ({"measurement_noise": np.ones(3)}, "one variance per measurement"),
    ({"measurement_noise": np.array([[1.0, 2.0], [2.0, 1.0]])}, "positive definite"),
    ({"measurement_noise": np.array([[1.0, 0.5], [0.0, 1.0]])}, "symmetric"),
    ({"state_scale": [1.0, -1.0]}, "must be positive"),
    ({"state_scale": [1.0]}, "one characteristic size per state"),
    ({"tol": 2.0}, "must lie in"),
    ({"state_names": ["a"]}, "state_names has 1 names"),
])
def test_audit_bad_options(kwargs, message):
    F = np.repeat(np.eye(2)[None], 2, axis=0)
    H = np.repeat(np.eye(2)[None], 2, axis=0)
    with pytest.raises(ValueError, match=message):
        audit_linearized_observability(F, H, [[1.0], [1.0]], **kwargs)


# =============================================================================================
# Nonlinear observability rank (Hermann and Krener 1977)
# =============================================================================================

def _analytic_basis_sympy(values):
    """HMR 2010's three directions at an exact point, as a sympy matrix."""
    px, py, _heading, *marks = values
    rows = [[1, 0, -py], [0, 1, px], [0, 0, 1]]
    for i in range(0, len(marks), 2):
        rows.append([1, 0, -marks[i + 1]])
        rows.append([0, 1, marks[i]])
    return sympy.Matrix(rows)


def test_lie_rank_planar_relative_position_exact():
    model = sb.symbolic_model(2, "relative_position")
    values = [sympy.Rational(1, 2), 2, 0, 3, -1, -2, 5]
    point = values + [1, sympy.Rational(1, 3)]           # speed, turn rate
    result = nonlinear_observability(model.f, model.h, model.states, inputs=model.inputs,
                                     point=point)
    assert result.exact and result.rank == 4 and result.unobservable_dimension == 3
    # Exactly: the Jacobian at the point annihilates HMR 2010's basis (sympy arithmetic), and
    # the exact null space spans the same space.
    J = result.jacobian.xreplace(result.point)
    N = _analytic_basis_sympy(values)
    assert J * N == sympy.zeros(J.shape[0], 3)
    assert sympy.Matrix.hstack(result.exact_directions, N).rank() == 3
    # Forcing more Lie derivatives changes nothing (the codistribution had stabilized).
    forced = nonlinear_observability(model.f, model.h, model.states, inputs=model.inputs,
                                     point=point, order=3)
    assert forced.rank == 4 and forced.order == 3


def test_lie_rank_planar_numeric_and_range_bearing():
    values = [0.5, 2.0, 0.3, 3.0, -1.0, -2.0, 5.0]
    point = values + [1.0, 0.4]
    N = sb.unobservable_basis(np.array(values))
    for kind in ("relative_position", "range_bearing"):
        model = sb.symbolic_model(2, kind)
        result = nonlinear_observability(model.f, model.h, model.states, inputs=model.inputs,
                                         point=point, order=2)
        assert not result.exact and result.rank == 4 and result.unobservable_dimension == 3
        D = result.unobservable_directions
        assert_allclose(D.T @ D, np.eye(3), atol=1e-12)
        assert np.linalg.norm(N - D @ (D.T @ N)) < 1e-10 * np.linalg.norm(N)
        assert not result.fragile


def test_lie_rank_linear_system_matches_exact_kalman_rank():
    # For f = A x, h = C x the stacked Lie derivatives are C A^k x: the Kalman rank (sympy).
    A = sympy.Matrix([[0, 1, 0], [0, 0, 0], [0, 0, -1]])
    C = sympy.Matrix([[1, 0, 0]])
    x = sympy.symbols("x1:4")
    X = sympy.Matrix(x)
    kalman = sympy.Matrix.vstack(C, C * A, C * A ** 2).rank()
    cont = nonlinear_observability(list(A * X), list(C * X), x, point=[1, 2, 3], order=2)
    disc = nonlinear_observability(list(A * X), list(C * X), x, point=[1, 2, 3], order=2,
                                   discrete=True)
    assert cont.rank == disc.rank == kalman == 2
    assert list(cont.exact_directions) == [0, 0, 1]
    generic = nonlinear_observability(list(A * X), list(C * X), x)
    assert generic.generic_point and generic.rank == 2 and not generic.exact


def test_lie_rank_rounding_noise_dropped_and_weak_coupling_flagged():
    x, y, a = sympy.symbols("x y a")
    # cos^2 + sin^2 - 1 vanishes identically but evaluates to -1.1e-16 at x = 1.7 (numpy):
    # that row is rounding noise and must not count as a direction.
    noise = [x, (sympy.cos(x) ** 2 + sympy.sin(x) ** 2 - 1) * y]
    result = nonlinear_observability([0, 0], noise, [x, y], point=[1.7, 1.3], order=0)
    assert result.rank == 1 and 0 < result.singular_values[1] < 1e-15
    # A coupling of 1e-9 relative is real (rank 2) but lies within a factor 100 of the
    # tolerance: the answer depends on it, and the result says so.
    weak = nonlinear_observability([a * y, 0], [x], [x, y], point={"x": 1, "y": 2, "a": 1e-9})
    assert weak.rank == 2 and weak.fragile


def test_nonlinear_bad_input():
    x, y = sympy.symbols("x y")
    with pytest.raises(ValueError, match="f has 1 entries but there are 2 states"):
        nonlinear_observability([x], [x], [x, y])
    with pytest.raises(ValueError, match="no value for y"):
        nonlinear_observability([y, 0], [x], [x, y], point={"x": 1})
    with pytest.raises(ValueError, match="not a state, input or parameter"):
        nonlinear_observability([y, 0], [x], [x, y], point={"x": 1, "y": 2, "z": 3})
    with pytest.raises(ValueError, match="sympy Symbols"):
        nonlinear_observability([y, 0], [x], ["x", "y"])
    with pytest.raises(ValueError, match="not finite"):
        nonlinear_observability([0, 0], [sympy.log(x)], [x, y], point=[0.0, 1.0])
    with pytest.raises(ValueError, match="order must be a non-negative integer"):
        nonlinear_observability([y, 0], [x], [x, y], order=-1)


# =============================================================================================
# Files, reports and the command line
# =============================================================================================

def _save_audit_file(path, demo, **extra):
    run = demo.first_standard
    names = np.array(["boat <x>", "boat y", "heading"]
                     + [f"buoy{i + 1} {c}" for i in range(demo.scenario.n_buoys) for c in "xy"])
    arrays = {"transition_jacobians": run.transition_jacobians[:40],
              "measurement_jacobians": run.measurement_jacobians[:40],
              "expected_unobservable": run.nullspaces[0],
              "measurement_noise": _noise(demo), "state_names": names}
    arrays.update(extra)
    arrays = {k: v for k, v in arrays.items() if v is not None}
    np.savez(path, **arrays)
    return path


def test_audit_from_file_round_trip(tmp_path, demo):
    path = _save_audit_file(tmp_path / "jac.npz", demo)
    audit = audit_from_file(path)
    assert audit.spurious_dimension == 1 and audit.state_names[0] == "boat <x>"
    assert demo.audit_standard.state_names == sb.state_names(demo.scenario.n_buoys)
    basis = tmp_path / "basis.npy"
    np.save(basis, np.eye(demo.scenario.n)[:, :1])
    other = audit_from_file(path, expected_unobservable=str(basis))
    assert other.expected_rank == demo.scenario.n - 1


@pytest.mark.parametrize("extra, key, message", [
    ({"unknown_key": np.ones(1)}, "unknown_key", "unknown key"),
    ({"transition_jacobians": None, "expected_unobservable": None}, None, None),
    ({"measurement_noise": np.array(["a", "b"])}, "measurement_noise", "holds text"),
    ({"state_scale": np.array([np.nan] * 11)}, "state_scale", "non-finite"),
    ({"expected_unobservable": np.ones((4, 1))}, "expected_unobservable", "shape"),
])
def test_audit_from_file_errors_name_file_and_key(tmp_path, demo, extra, key, message):
    path = tmp_path / "jac.npz"
    if key is None:  # missing required array
        run = demo.first_standard
        np.savez(path, measurement_jacobians=run.measurement_jacobians)
        key, message = "transition_jacobians", "missing"
    else:
        _save_audit_file(path, demo, **extra)
    with pytest.raises(ModelFileError, match=message) as info:
        audit_from_file(path)
    assert str(info.value).startswith(f"{path}: {key}: ")


def test_audit_from_file_refuses_pickles_and_non_archives(tmp_path, demo):
    path = tmp_path / "obj.npz"
    np.savez(path, transition_jacobians=np.array([None, 1.0], dtype=object),
             measurement_jacobians=demo.first_standard.measurement_jacobians)
    with pytest.raises(ModelFileError, match="transition_jacobians: holds Python objects"):
        audit_from_file(path)
    # A member whose header declares an enormous shape is refused before any data is read.
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(
        header, {"descr": "<f8", "fortran_order": False, "shape": (10 ** 6, 10 ** 6, 3)})
    huge = tmp_path / "huge.npz"
    with zipfile.ZipFile(huge, "w") as zf:
        zf.writestr("transition_jacobians.npy", header.getvalue())
    with pytest.raises(ModelFileError, match="transition_jacobians: declares shape"):
        audit_from_file(huge)
    text = tmp_path / "notes.npz"
    text.write_text("not an archive")
    with pytest.raises(ModelFileError, match="not an .npz archive"):
        audit_from_file(text)
    with pytest.raises(ModelFileError, match="missing.npz: file: not found"):
        audit_from_file(tmp_path / "missing.npz")


def test_reports_text_and_html(demo):
    audit = demo.audit_standard
    text = audit_text(audit, source="run0.npz")
    assert "SPURIOUS OBSERVABILITY" in text and pc.audit_from_file is audit_from_file
    assert text.rstrip().endswith("review.") and "Caution" in text
    page = audit_html(audit, source="<run & 0>.npz")
    assert page.count("data:image/png;base64,") == 3
    assert "&lt;run &amp; 0&gt;.npz" in page and "<run & 0>" not in page
    assert "://" not in page and "<script" not in page
    assert "Caution" in page.split("Rank decisions")[-1]


def test_audit_to_html_fragment_embeds_without_page_or_body_styles(demo):
    import re

    audit = demo.audit_standard
    page = audit.to_html(source="run0.npz")
    fragment = audit.to_html(source="run0.npz", fragment=True)
    assert page.lstrip().startswith("<!DOCTYPE html>") and re.search(r"<body\b", page)
    assert fragment.startswith('<div class="plantcore-report">')
    assert not re.search(r"<(html|head|body)\b", fragment)
    css = re.search(r"<style>(.*?)</style>", fragment, re.DOTALL).group(1)
    assert not re.search(r"(^|[},\s])body\s*\{", css)
    body = re.search(r"<main[^>]*>\n(.*)\n</main>", page, re.DOTALL).group(1)
    assert body in fragment          # the same report, only the shell differs


def test_cli_audit_text_and_html(tmp_path, demo, capsys):
    path = _save_audit_file(tmp_path / "jac.npz", demo)
    report = tmp_path / "report.html"
    assert main(["audit", str(path), "-o", str(report)]) == 1   # spurious: exit 1 (issue 21)
    out = capsys.readouterr().out
    assert "SPURIOUS OBSERVABILITY" in out and "Caution" in out and "report written" in out
    page = report.read_text(encoding="utf-8")
    assert "boat &lt;x&gt;" in page and "boat <x>" not in page
    assert page.count("data:image/png;base64,") == 3


def test_cli_audit_bad_input_one_line_exit_2(tmp_path, demo, capsys):
    path = _save_audit_file(tmp_path / "jac.npz", demo,
                            expected_unobservable=np.ones((5, 1)))
    report = tmp_path / "report.html"
    assert main(["audit", str(path), "-o", str(report)]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and len(captured.err.strip().splitlines()) == 1
    assert "expected_unobservable" in captured.err and str(path) in captured.err
    assert not report.exists() and os.listdir(tmp_path) == ["jac.npz"]
    # An output that is the input is refused and the input stays intact.
    good = _save_audit_file(tmp_path / "good.npz", demo)
    before = good.read_bytes()
    assert main(["audit", str(good), "-o", str(good)]) == 2
    assert good.read_bytes() == before
    assert len(capsys.readouterr().err.strip().splitlines()) == 1
    assert main(["audit", str(tmp_path / "none.npz")]) == 2


# =============================================================================================
# The consistency demo (BLK 2001 chi-square bounds)
# =============================================================================================

def test_nees_bounds_match_chi_square():
    # BLK 2001, ch. 5 example (from memory): 50 runs, 2 degrees of freedom -> [1.5, 2.6].
    low, high = sb.nees_bounds(50, dimension=2)
    assert (round(low, 1), round(high, 1)) == (1.5, 2.6)
    assert_allclose(sb.nees_bounds(20)[1], scipy.stats.chi2.ppf(0.975, 60) / 20, rtol=1e-12)


def test_consistency_demo_shows_the_effect(demo):
    low, high = demo.nees_bounds
    # The standard filter is overconfident: its average NEES lies well above the upper bound
    # (seeds 0-7 of the same scenario gave 5.8 to 9.2 against the bound 4.16).
    assert demo.mean_nees_standard > 1.3 * high
    assert demo.fraction_within_bounds("standard") < 0.5
    # The constrained filter stays near 3: nearly all steps within the bounds, its mean within
    # them, and its mean NEES a fraction of the standard one's.
    assert low <= demo.mean_nees_constrained <= high
    assert demo.fraction_within_bounds("constrained") > 0.9
    assert demo.mean_nees_constrained < 0.6 * demo.mean_nees_standard
    # Heading errors leave the standard filter's own 3-sigma bound far more often than the
    # 0.27 % a consistent Gaussian filter allows; the constrained filter's stay inside.
    assert demo.fraction_outside_three_sigma("standard") > 0.08
    assert demo.fraction_outside_three_sigma("constrained") < 0.02
    # The mechanism: the standard filter believes it learned the absolute heading (which
    # ranges and bearings to unknown buoys cannot tell), the constrained one keeps the compass'.
    compass = demo.scenario.start_heading_std
    assert demo.heading_std_standard[:, -1].mean() < 0.6 * compass
    assert demo.heading_std_constrained[:, -1].mean() > 0.95 * compass
    assert "Caution" in demo.to_text()


def test_demo_is_reproducible_from_its_seed():
    a = sb.run_demo(seed=5, runs=2, steps=15)
    b = sb.run_demo(seed=5, runs=2, steps=15)
    c = sb.run_demo(seed=6, runs=2, steps=15)
    assert_allclose(a.nees_standard, b.nees_standard, rtol=0, atol=0)
    assert_allclose(a.nees_constrained, b.nees_constrained, rtol=0, atol=0)
    assert not np.array_equal(a.nees_standard, c.nees_standard)
    with pytest.raises(ValueError, match="runs must be a positive integer"):
        sb.run_demo(runs=0)


def test_demo_plots(demo):
    fig = sb.plot_heading_error(demo)
    assert len(fig.axes) == 1 and len(fig.axes[0].lines) == 6
    fig = sb.plot_nees(demo)
    assert len(fig.axes[0].lines) == 5
