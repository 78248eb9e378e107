"""Balanced residualization (singular perturbation approximation) and named-state elimination."""

import numpy as np
import pytest

import plantcore as pc
from plantcore.reduction.singular_perturbation import balanced_residualization, eliminate_states


def _stable(rng, n, m, p, discrete=False):
    A = rng.standard_normal((n, n))
    if discrete:
        A = A / (1.05 * max(abs(np.linalg.eigvals(A))))
    else:
        A = A - (max(np.linalg.eigvals(A).real) + 0.3) * np.eye(n)
    return pc.StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)),
                              rng.standard_normal((p, m)), dt=0.1 if discrete else None)


def _dense_peak(a, b):
    """Largest 2-norm of G_a - G_b over a dense frequency grid (common practice)."""
    if a.is_discrete:
        points = np.exp(1j * np.linspace(0.0, np.pi, 1500))
    else:
        points = 1j * np.concatenate([[0.0], np.logspace(-3, 4, 1500)])
    return max(np.linalg.norm(a.transfer_at(z) - b.transfer_at(z), 2) for z in points)


def test_first_order_closed_form():
    # 1/(s + a): sigma_1 = 1/(2a); residualizing the state leaves G(0) = 1/a and the error
    # |G(jw) - 1/a| = w / (a sqrt(a^2 + w^2)) rises to 1/a = 2 sigma_1 as w -> inf (closed form).
    a = 4.0
    red = balanced_residualization(([[-a]], [[1.0]], [[1.0]]), order=0)
    assert red.order == 0 and red.residualized == 1
    np.testing.assert_allclose(red.model.D, [[1.0 / a]], rtol=1e-14)
    np.testing.assert_allclose(red.error_bound, 2.0 / (2.0 * a), rtol=1e-14)


@pytest.mark.parametrize("discrete", [False, True])
def test_steady_state_gain_exact_and_bound_holds(discrete):
    # The DC gain equality is exact (Liu and Anderson 1989, section 3; Al-Saggaf and Franklin
    # 1988 for z = 1) and ||G - G_r|| <= 2 sum of the discarded values (same sources),
    # checked against a dense frequency sweep.
    rng = np.random.default_rng(7 + discrete)
    model = _stable(rng, 8, 2, 3, discrete)
    point = 1.0 if discrete else 0.0
    dc = model.transfer_at(point)
    for order in (0, 2, 5, 7):
        red = balanced_residualization(model, order=order)
        assert red.order == order
        np.testing.assert_allclose(red.model.transfer_at(point), dc, rtol=1e-11, atol=1e-12)
        assert red.steady_state_difference <= 1e-11 * np.abs(dc).max()
        assert _dense_peak(model, red.model) <= red.error_bound * (1 + 1e-9)
        assert red.error_bound == pytest.approx(2 * red.hankel_singular_values[order:].sum())


@pytest.mark.parametrize("discrete", [False, True])
def test_agrees_with_reference_routine(discrete):
    # slycot ab09nd computes the singular perturbation approximation by the balancing-free
    # square-root method; both must give the same transfer function and Hankel values.
    slycot = pytest.importorskip("slycot")
    rng = np.random.default_rng(3)
    model = _stable(rng, 6, 2, 2, discrete)
    red = balanced_residualization(model, order=3)
    out = slycot.ab09nd("D" if discrete else "C", "N", "N", 6, 2, 2, model.A.copy(),
                        model.B.copy(), model.C.copy(), model.D.copy(),
                        alpha=1.0 if discrete else 0.0, nr=3)
    nr, Ar, Br, Cr, Dr, _, hsv = out[:7]
    ref = pc.StateSpaceModel(Ar[:nr, :nr], Br[:nr], Cr[:, :nr], Dr, dt=model.dt)
    np.testing.assert_allclose(red.hankel_singular_values, hsv[:6], rtol=1e-10)
    assert pc.check_equivalence(ref, red.model, tol=1e-8).equivalent


def test_unstable_part_kept_and_dc_gain_kept():
    A = np.diag([2.0, -1.0, -3.0, -10.0])
    model = pc.StateSpaceModel(A, np.ones((4, 1)), np.ones((1, 4)))
    red = balanced_residualization(model, order=2)
    assert (red.unstable_order, red.stable_order) == (1, 1)
    assert np.sum(np.linalg.eigvals(red.model.A).real > 0) == 1
    # G(0) = -1/2 + 1 + 1/3 + 1/10 (closed form)
    np.testing.assert_allclose(red.model.transfer_at(0.0), [[-0.5 + 1 + 1 / 3 + 0.1]], rtol=1e-12)


def test_nonminimal_model_negligible_states_removed():
    # An uncontrollable state has a zero Hankel singular value; it is removed first.
    A = np.diag([-1.0, -2.0, -5.0])
    B = np.array([[1.0], [1.0], [0.0]])
    C = np.ones((1, 3))
    red = balanced_residualization((A, B, C))
    assert red.negligible == 1 and red.order == 2 and red.error_bound < 1e-12
    with pytest.raises(ValueError, match="at most 2"):
        balanced_residualization((A, B, C), order=3)


def test_options_refused():
    model = ([[-1.0]], [[1.0]], [[1.0]])
    with pytest.raises(ValueError, match="not both"):
        balanced_residualization(model, order=0, max_error=1.0)
    with pytest.raises(ValueError, match="imaginary axis"):
        balanced_residualization(([[0.0]], [[1.0]], [[1.0]]), order=0)
    red = balanced_residualization(([[-1.0, 0], [0, -100.0]], [[1.0], [1.0]], [[1.0, 1.0]]),
                                   max_error=0.1)
    assert red.order == 1 and red.error_bound <= 0.1


@pytest.mark.parametrize("discrete", [False, True])
def test_eliminate_named_state_residualize(discrete):
    # A heater much faster than the oven it heats (a scenario of our own): residualizing the
    # heater keeps G(0) exactly (by construction of residualization).
    if discrete:
        A = [[0.95, 0.04], [0.0, 0.2]]
        point = 1.0
    else:
        A = [[-1.0, 1.0], [0.0, -50.0]]
        point = 0.0
    plant = pc.StateSpaceModel(A, [[0.0], [1.0]], [[1.0, 0.0]], dt=0.5 if discrete else None,
                               states=["oven", "heater"])
    cut = eliminate_states(plant, ["heater"])
    assert cut.removed_states == ("heater",) and cut.kept_states == ("oven",)
    assert cut.model.states == ("oven",) and cut.keeps_steady_state_gain
    np.testing.assert_allclose(cut.model.transfer_at(point), plant.transfer_at(point), rtol=1e-13)
    truncated = eliminate_states(plant, "heater", method="truncate")
    assert truncated.residual_condition is None
    np.testing.assert_allclose(truncated.model.A, [[A[0][0]]])
    np.testing.assert_allclose(truncated.model.B, [[0.0]])


def test_eliminate_refusals():
    plant = pc.StateSpaceModel([[-1.0, 1.0], [0.0, 0.0]], [[0.0], [1.0]], [[1.0, 0.0]],
                               states=["position", "integrator"])
    with pytest.raises(ValueError, match="no state named 'speed'"):
        eliminate_states(plant, ["speed"])
    with pytest.raises(ValueError, match="named twice"):
        eliminate_states(plant, ["position", "position"])
    with pytest.raises(ValueError, match="unknown method 'drop'.*'residualize', 'truncate'"):
        eliminate_states(plant, ["position"], method="drop")
    with pytest.raises(ValueError, match="singular.*no steady state"):
        eliminate_states(plant, ["integrator"])
    assert eliminate_states(plant, ["integrator"], method="truncate").model.n == 1


@pytest.mark.parametrize("method", ["truncate", "residualize"])
def test_eliminate_error_measure_closed_form_continuous(method):
    # G(s) = 1/(s+1) + 1/(s+a) with decoupled states, eliminating the fast one (by hand):
    # truncation leaves 1/(s+1), error 1/(s+a), peak 1/a at s = 0; residualization leaves
    # 1/(s+1) + 1/a, error -s/(a (s+a)), |error(jw)| = w / (a sqrt(w^2 + a^2)) rising to 1/a
    # as w -> infinity.  G's own peak is 1 + 1/a at s = 0.
    a = 20.0
    plant = pc.StateSpaceModel([[-1.0, 0.0], [0.0, -a]], [[1.0], [1.0]], [[1.0, 1.0]],
                               states=["slow", "fast"])
    cut = eliminate_states(plant, ["fast"], method=method)
    assert cut.peak_error == pytest.approx(1.0 / a, rel=1e-8)
    assert cut.peak_error <= cut.peak_error_bound <= cut.peak_error * (1 + 1e-6)
    assert cut.relative_peak_error == pytest.approx((1.0 / a) / (1.0 + 1.0 / a), rel=1e-8)
    if method == "truncate":
        assert cut.peak_error_frequency == pytest.approx(0.0, abs=1e-6)
    else:
        assert cut.peak_error_frequency == np.inf


def test_eliminate_error_measure_closed_form_discrete():
    # G(z) = 1/(z-0.5) + 1/(z-0.1); residualizing the second state (x2 = u / 0.9) leaves the
    # error (1 - z) / (0.9 (z - 0.1)), whose modulus on the unit circle rises from 0 at z = 1
    # to 2 / (0.9 * 1.1) at z = -1 (by hand).  Truncation: error 1/(z - 0.1), peak 1/0.9 at z = 1.
    plant = pc.StateSpaceModel(np.diag([0.5, 0.1]), [[1.0], [1.0]], [[1.0, 1.0]], dt=1.0,
                               states=["slow", "fast"])
    res = eliminate_states(plant, ["fast"])
    assert res.peak_error == pytest.approx(2.0 / 0.99, rel=1e-8)
    assert res.peak_error_frequency == pytest.approx(np.pi, rel=1e-6)
    cut = eliminate_states(plant, ["fast"], method="truncate")
    assert cut.peak_error == pytest.approx(1.0 / 0.9, rel=1e-8)
    assert cut.peak_error_frequency == pytest.approx(0.0, abs=1e-6)


def test_eliminate_error_measure_matches_a_dense_sweep():
    # Coupled states: the recorded peak error equals the largest error of a dense frequency
    # sweep with transfer_at (within the sweep's resolution; common practice) and never
    # lies above the recorded bound.
    rng = np.random.default_rng(41)
    plant = _stable(rng, 6, 2, 2)
    cut = eliminate_states(plant, ["x5", "x6"])
    w = np.concatenate([[0.0], np.logspace(-3, 3, 3000)])
    sweep = max(np.linalg.norm(plant.transfer_at(1j * x) - cut.model.transfer_at(1j * x), 2)
                for x in w)
    assert sweep <= cut.peak_error_bound * (1 + 1e-9)
    assert cut.peak_error == pytest.approx(sweep, rel=1e-3)
    assert cut.peak_error == pytest.approx(pc.reduction.truncation_error(plant, cut.model).value)
