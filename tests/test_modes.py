"""Tests of plantcore.structure.modes: per-mode classification, verdict ingredients, distances.

External references:
- Known-structure systems (catalog and the builder below): the four-block Kalman form with
  chosen eigenvalues per part, hidden by a random similarity.  Which eigenvalue belongs to
  which part is known by construction (R. E. Kalman, "Mathematical description of linear
  dynamical systems", 1963).
- The PBH test (M. L. J. Hautus, 1969): the margins are recomputed directly with numpy's SVD.
- Stabilizability and detectability by their definitions: python-control's lqr finds a
  stabilizing state feedback (observer gain) when one exists; an uncontrollable eigenvalue
  stays an eigenvalue of A - B K for every K (W. M. Wonham, *Linear Multivariable Control*,
  1979, ch. 1-2).
- The distance to uncontrollability of the double integrator, derived by hand below
  (R. Eising, "Between controllable and uncontrollable", Systems & Control Letters, 1984).
"""

import math

import catalog
import control
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import plantcore as pc
from plantcore.structure.distance import distance_to_uncontrollability, distance_to_unobservability
from plantcore.structure.kalman import PART_NAMES


def _block(values, rng):
    """A real block with the given eigenvalues (complex ones as conjugate pairs, listed once)."""
    pieces = []
    for v in values:
        if isinstance(v, complex):
            pieces.append(np.array([[v.real, v.imag], [-v.imag, v.real]]))
        else:
            pieces.append(np.array([[float(v)]]))
    k = sum(p.shape[0] for p in pieces)
    T = np.zeros((k, k))
    i = 0
    for p in pieces:
        T[i:i + p.shape[0], i:i + p.shape[0]] = p
        i += p.shape[0]
    T += np.triu(rng.standard_normal((k, k)) * 0.3, 2)   # keep the 2x2 blocks intact
    Q = catalog.random_orthogonal(k, rng)
    return Q @ T @ Q.T


def _expand(values):
    out = []
    for v in values:
        out += [v, v.conjugate()] if isinstance(v, complex) else [complex(v)]
    return out


def structured(part_values, *, inputs=2, outputs=2, seed=0, condition=30.0, dt=None):
    """A model in four-block Kalman form with the given eigenvalues per part, hidden."""
    rng = np.random.default_rng(seed)
    blocks = [_block(vals, rng) if vals else np.zeros((0, 0)) for vals in part_values]
    sizes = tuple(b.shape[0] for b in blocks)
    n = sum(sizes)
    cuts = np.cumsum((0,) + sizes)
    sl = [slice(cuts[i], cuts[i + 1]) for i in range(4)]
    A = rng.standard_normal((n, n)) * 0.5
    for i in range(4):
        A[sl[i], sl[i]] = blocks[i]
    for i, j in catalog.ZERO_BLOCKS_A:
        A[sl[i], sl[j]] = 0.0
    B = rng.standard_normal((n, inputs))
    B[sl[2], :] = 0.0
    B[sl[3], :] = 0.0
    C = rng.standard_normal((outputs, n))
    C[:, sl[1]] = 0.0
    C[:, sl[3]] = 0.0
    T = catalog.similarity(n, rng, condition)
    Ti = np.linalg.inv(T)
    return pc.StateSpaceModel(T @ A @ Ti, T @ B, C @ Ti, dt=dt), sizes


def _designed_part(value, part_values):
    best, where = math.inf, None
    for i, vals in enumerate(part_values):
        for v in _expand(vals):
            if abs(v - value) < best:
                best, where = abs(v - value), i
    return best, where


# --- parts agree with the decomposition ----------------------------------------------------

PARTS = [[-1.0, complex(-2.0, 1.0)], [-3.5], [-0.5, 0.7], [-4.0, -5.0]]


@pytest.mark.parametrize("condition", [1.0, 30.0])
@pytest.mark.parametrize("inputs, outputs", [(1, 1), (2, 3)])
def test_each_mode_lands_in_its_designed_part(condition, inputs, outputs):
    model, sizes = structured(PARTS, inputs=inputs, outputs=outputs, seed=3, condition=condition)
    modes = pc.classify_modes(model)
    assert len(modes) == model.n
    kd = pc.kalman_decomposition(model)
    assert tuple(kd.sizes) == sizes
    for mode in modes:
        dist, part = _designed_part(mode.value, PARTS)
        assert dist < 1e-8
        assert mode.part == PART_NAMES[part]
        assert mode.controllable == (part in (0, 1))
        assert mode.observable == (part in (0, 2))
        # a generic random model passes clearly or fails at the rounding level
        if mode.controllable:
            assert mode.controllability_margin > 1e-4
        else:
            assert mode.controllability_margin < 1e-12
        if mode.observable:
            assert mode.observability_margin > 1e-4
        else:
            assert mode.observability_margin < 1e-12
        assert mode.stable == (mode.value.real < 0) and not mode.marginal


@pytest.mark.parametrize("case", catalog.catalog()[::3], ids=lambda c: f"{c.sizes}-{c.tags}")
def test_mode_counts_per_part_match_catalog(case):
    modes = pc.classify_modes(case.model)
    counts = tuple(sum(m.part == name for m in modes) for name in PART_NAMES)
    assert counts == case.sizes
    assert all(m.stable for m in modes)        # the catalog builds stable blocks only


@given(sizes=st.tuples(*[st.integers(0, 3)] * 4), discrete=st.booleans(),
       seed=st.integers(0, 10_000))
def test_mode_counts_property(sizes, discrete, seed):
    case = catalog.known_structure(sizes, inputs=2, outputs=2, seed=seed, condition=10.0,
                                   discrete=discrete)
    modes = pc.classify_modes(case.model)
    assert len(modes) == sum(sizes)
    assert tuple(sum(m.part == name for m in modes) for name in PART_NAMES) == sizes
    assert all(m.controllable == (m.part in PART_NAMES[:2]) for m in modes)
    assert all(m.observable == (m.part in PART_NAMES[0::2]) for m in modes)


# --- margins are the PBH singular values ------------------------------------------------------

def test_margins_equal_direct_pbh_singular_values():
    """A model already balanced and at unit io scaling, so the margins are exactly
    sigma_min([A - lambda I, B]) / scale with scale = ||A||_F = 2 (the rank module's scale)."""
    A = np.array([[-1.0, 1.0], [-1.0, -1.0]])
    B = np.array([[2.0], [0.0]])
    C = np.array([[0.0, 2.0]])
    modes = pc.classify_modes((A, B, C))
    assert sorted(round(m.value.imag) for m in modes) == [-1, 1]
    for m in modes:
        lam = m.value
        direct_c = np.linalg.svd(np.hstack([A - lam * np.eye(2), B]), compute_uv=False)[-1] / 2
        direct_o = np.linalg.svd(np.vstack([A - lam * np.eye(2), C]), compute_uv=False)[-1] / 2
        assert_allclose(m.controllability_margin, direct_c, rtol=1e-12)
        assert_allclose(m.observability_margin, direct_o, rtol=1e-12)


# --- stabilizable / detectable by the definitions ---------------------------------------------

@pytest.mark.parametrize("unstable_part, stabilizable, detectable", [
    (0, True, True), (1, True, False), (2, False, True), (3, False, False)])
@pytest.mark.parametrize("dt", [None, 0.1])
def test_verdicts_follow_the_definitions(unstable_part, stabilizable, detectable, dt):
    bad = 0.7 if dt is None else 1.3          # unstable in either time domain
    good = [[-1.0, -2.0], [-3.0], [-4.0], [-5.0]] if dt is None else \
        [[0.1, -0.2], [0.3], [-0.4], [0.5]]
    parts = [list(v) for v in good]
    parts[unstable_part].append(bad)
    model, _ = structured(parts, inputs=1, outputs=1, seed=10 + unstable_part, dt=dt)
    analysis = pc.analyze(model)
    assert analysis.stabilizable == stabilizable
    assert analysis.detectable == detectable
    unstable = [m for m in analysis.modes if not m.stable]
    assert len(unstable) == 1 and abs(unstable[0].value - bad) < 1e-9
    A, B, C = model.A, model.B, model.C
    rng = np.random.default_rng(0)
    sysd = dt is not None
    # controllability side
    if stabilizable:
        if sysd:
            K, _, _ = control.dlqr(A, B, np.eye(model.n), np.eye(1))
            assert np.max(np.abs(np.linalg.eigvals(A - B @ K))) < 1
        else:
            K, _, _ = control.lqr(A, B, np.eye(model.n), np.eye(1))
            assert np.max(np.linalg.eigvals(A - B @ K).real) < 0
    else:
        for _ in range(3):      # the uncontrollable eigenvalue survives any feedback
            ev = np.linalg.eigvals(A - B @ rng.standard_normal((1, model.n)))
            assert np.min(np.abs(ev - bad)) < 1e-8
    # observability side (the dual)
    if detectable:
        if sysd:
            L, _, _ = control.dlqr(A.T, C.T, np.eye(model.n), np.eye(1))
            assert np.max(np.abs(np.linalg.eigvals(A - L.T @ C))) < 1
        else:
            L, _, _ = control.lqr(A.T, C.T, np.eye(model.n), np.eye(1))
            assert np.max(np.linalg.eigvals(A - L.T @ C).real) < 0
    else:
        for _ in range(3):
            ev = np.linalg.eigvals(A - rng.standard_normal((model.n, 1)) @ C)
            assert np.min(np.abs(ev - bad)) < 1e-8


def test_marginal_modes_count_as_not_stable():
    # an uncontrollable integrator: marginal, so the model is not stabilizable
    A = np.diag([0.0, -1.0])
    modes = pc.classify_modes((A, [[0.0], [1.0]], [[1.0, 1.0]]))
    integrator = next(m for m in modes if m.value == 0)
    assert integrator.marginal and not integrator.stable and not integrator.controllable
    assert not pc.analyze((A, [[0.0], [1.0]], [[1.0, 1.0]])).stabilizable
    # discrete: a mode at z = -1 is marginal, at 1.2 unstable, at 0.5 stable
    m = pc.StateSpaceModel(np.diag([-1.0, 1.2, 0.5]), np.ones((3, 1)), np.ones((1, 3)), dt=1.0)
    by_value = {round(x.value.real, 6): x for x in pc.classify_modes(m)}
    assert by_value[-1.0].marginal and not by_value[-1.0].stable
    assert not by_value[1.2].stable and not by_value[1.2].marginal
    assert by_value[0.5].stable


# --- repeated and defective eigenvalues --------------------------------------------------------

def test_repeated_eigenvalue_with_one_input_has_one_controllable_copy():
    """A = -I, one input along [1, 1]: the two copies of -1 cannot both be controlled.  The
    controllable copy keeps a clear margin (it is measured on the controllable subsystem)."""
    modes = pc.classify_modes((-np.eye(2), [[1.0], [1.0]], [[1.0, 0.0]]))
    assert_allclose([m.value for m in modes], [-1.0, -1.0], atol=1e-14)
    assert [m.part for m in modes] == ["controllable_observable", "uncontrollable_unobservable"]
    assert modes[0].controllability_margin > 0.1
    assert modes[1].controllability_margin < 1e-14


def test_defective_eigenvalue_is_reported_at_the_cluster_mean():
    """A Jordan block of size 3 at -2 in rotated coordinates: the computed eigenvalues spread
    by about eps^(1/3) ~ 6e-6; the cluster mean is accurate to rounding."""
    rng = np.random.default_rng(7)
    J = np.array([[-2.0, 1.0, 0.0], [0.0, -2.0, 1.0], [0.0, 0.0, -2.0]])
    Q = catalog.random_orthogonal(3, rng)
    A = Q @ J @ Q.T
    B = Q @ np.array([[0.0], [0.0], [1.0]])     # drives the end of the chain: controllable
    C = np.array([[1.0, 0.0, 0.0]]) @ Q.T       # reads the start: observable
    raw = np.linalg.eigvals(A)
    modes = pc.classify_modes((A, B, C))
    assert len(modes) == 3
    assert all(abs(m.value + 2.0) < 1e-12 for m in modes)
    assert np.max(np.abs(raw + 2.0)) > 1e-9     # so the raw values would be visibly off
    assert all(m.controllable and m.observable and m.stable for m in modes)
    assert all(m.controllability_margin > 1e-3 and m.observability_margin > 1e-3 for m in modes)


@pytest.mark.parametrize("hidden", [False, True])
def test_distinct_slow_modes_of_a_stiff_model_stay_apart(hidden):
    """Eigenvalues -1e6, -1, -1e-3, -1e-8: the last three are closer to each other than
    eps^(1/3) ||A|| (about 6), but well conditioned, so each is its own mode (before, they
    were reported at their mean and then moved onto the boundary as marginal).  -1e-8 is
    1e-14 of ||A|| from the boundary: marginal by the documented rule (1e-12)."""
    rng = np.random.default_rng(3)
    values = np.array([-1e6, -1.0, -1e-3, -1e-8])
    Q = catalog.random_orthogonal(4, rng) if hidden else np.eye(4)
    A = Q @ np.diag(values) @ Q.T
    modes = pc.classify_modes((A, rng.standard_normal((4, 1)), rng.standard_normal((1, 4))))
    found = sorted(m.value.real for m in modes)
    np.testing.assert_allclose(found, np.sort(values), rtol=1e-9, atol=1e-8)  # ~ 1e2 eps ||A||
    by_value = {round(float(np.log10(-m.value.real))): m for m in modes}
    assert by_value[0].stable and by_value[-3].stable and by_value[6].stable
    assert by_value[-8].marginal and not by_value[-8].stable


def test_jordan_block_driven_at_the_wrong_end():
    """J = [[-1, 1], [0, -1]], b = e1: A e1 = -e1, so only span(e1) is controllable."""
    modes = pc.classify_modes(([[-1.0, 1.0], [0.0, -1.0]], [[1.0], [0.0]], [[1.0, 1.0]]))
    assert sorted(m.controllable for m in modes) == [False, True]
    assert all(abs(m.value + 1) < 1e-12 for m in modes)


def test_hidden_double_integrator_is_marginal_and_stabilizable():
    rng = np.random.default_rng(9)
    Q = catalog.random_orthogonal(2, rng)
    A = Q @ np.array([[0.0, 1.0], [0.0, 0.0]]) @ Q.T
    a = pc.analyze((A, Q @ np.array([[0.0], [1.0]]), np.array([[1.0, 0.0]]) @ Q.T))
    assert all(m.marginal and not m.stable for m in a.modes)
    assert all(abs(m.value) < 1e-12 for m in a.modes)
    assert a.stabilizable and a.detectable and a.is_minimal
    assert a.hankel_singular_values is None and "imaginary axis" in a.hankel_note


# --- near cancellations --------------------------------------------------------------------

@pytest.mark.parametrize("eps, narrow", [(1e-6, True), (0.5, False)])
def test_near_pole_zero_cancellation_is_flagged(eps, narrow):
    """(s + 1 + eps) / ((s + 1)(s + 2)): the zero nearly cancels the pole at -1."""
    g = pc.from_transfer_function([1.0, 1.0 + eps], [1.0, 3.0, 2.0])
    modes = pc.classify_modes(g)
    assert all(m.controllable and m.observable for m in modes)
    at_minus_one = next(m for m in modes if abs(m.value + 1) < 1e-6)
    at_minus_two = next(m for m in modes if abs(m.value + 2) < 1e-6)
    assert at_minus_one.narrow == narrow
    assert not at_minus_two.narrow
    if narrow:
        assert at_minus_one.observability_margin < 1e-5
    # the threshold is an option
    assert not any(m.narrow for m in pc.classify_modes(g, narrow_margin=0.0))


def test_narrow_margin_option_is_checked():
    with pytest.raises(ValueError, match="narrow_margin"):
        pc.classify_modes(([[-1.0]], [[1.0]], [[1.0]]), narrow_margin=-1.0)


# --- distances ------------------------------------------------------------------------------

def test_distance_of_the_double_integrator():
    """A = [[0, 1], [0, 0]], b = [0, 1]: [A - lambda I, b] = [[-l, 1, 0], [0, -l, 1]] has
    M M^H = [[|l|^2 + 1, -conj(l)], [-l, |l|^2 + 1]] with eigenvalues |l|^2 + 1 +- |l|, whose
    minimum over l is 3/4 at |l| = 1/2.  The model is already balanced with unit scale, so the
    distance is sqrt(3)/2.  The same holds for the observability dual with c = [1, 0]."""
    model = ([[0.0, 1.0], [0.0, 0.0]], [[0.0], [1.0]], [[1.0, 0.0]])
    dc = distance_to_uncontrollability(model)
    do = distance_to_unobservability(model)
    assert_allclose(dc.value, math.sqrt(3) / 2, rtol=1e-6)
    assert_allclose(do.value, math.sqrt(3) / 2, rtol=1e-6)
    assert dc.value >= math.sqrt(3) / 2 * (1 - 1e-12)      # an upper bound never undershoots
    assert_allclose(abs(dc.at), 0.5, rtol=1e-3)
    assert "upper bound" in dc.method and dc.to_dict()["is_upper_bound"]


def test_distance_of_a_nearly_uncontrollable_pair():
    """A = diag(-1, -2), b = [1, eps]: after io scaling b -> [2, 2 eps] and scale sqrt(5); at
    lambda = -2, M M^T = [[5, 4 eps], [4 eps, 4 eps^2]] has smallest eigenvalue ~ 4 eps^2/5, so
    sigma_min / scale ~ 2 eps / 5: the estimate can only be smaller."""
    eps = 1e-5
    d = distance_to_uncontrollability((np.diag([-1.0, -2.0]), [[1.0], [eps]], [[1.0, 1.0]]))
    assert eps / 10 <= d.value <= 2 * eps / 5 * (1 + 1e-6)


def test_distance_of_an_uncontrollable_model_is_zero_and_needs_no_search():
    d = distance_to_uncontrollability((np.diag([-1.0, -2.0]), [[1.0], [0.0]], [[1.0, 1.0]]))
    assert d.value < 1e-14 and abs(d.at + 2) < 1e-12 and "no search" in d.method


def test_model_without_states():
    g = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), [[3.0]])
    assert pc.classify_modes(g) == []
    d = distance_to_uncontrollability(g)
    assert d.value == math.inf and d.at is None and d.to_dict()["value"] is None


@pytest.mark.parametrize("seed", range(4))
def test_distance_estimate_against_brute_force_minimum(seed):
    # Reference: the definition itself (Eising 1984): min over complex lambda of
    # sigma_min([A - lambda I, B]), found here by a dense grid over a box holding the
    # spectrum, refined by a local search from the best grid point.  The estimate must be an
    # upper bound (it is attained at its lambda) and must reach the reference minimum.
    import scipy.optimize

    from plantcore.structure.distance import distance_to_uncontrollability
    from plantcore.structure.kalman import _prepare

    rng = np.random.default_rng(4000 + seed)
    n = 4
    model = pc.StateSpaceModel(rng.standard_normal((n, n)), rng.standard_normal((n, 1)),
                               rng.standard_normal((1, n)))
    p = _prepare(model, None)
    A, B = p.A / p.scale, p.B_dec / p.scale

    def smin(x):
        lam = complex(x[0], x[1])
        return np.linalg.svd(np.hstack([A - lam * np.eye(n), B]), compute_uv=False)[-1]

    ev = np.linalg.eigvals(A)
    re = np.linspace(ev.real.min() - 0.5, ev.real.max() + 0.5, 121)
    im = np.linspace(-np.abs(ev.imag).max() - 0.5, np.abs(ev.imag).max() + 0.5, 121)
    grid = [(smin((x, y)), x, y) for x in re for y in im]
    best = min(grid)
    ref = scipy.optimize.minimize(smin, [best[1], best[2]], method="Nelder-Mead",
                                  options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 4000}).fun
    est = distance_to_uncontrollability(model)
    at = est.at / p.scale  # the estimate's lambda is in the units of A
    assert est.value == pytest.approx(smin((at.real, at.imag)), rel=1e-8)          # attained
    assert est.value >= ref * (1 - 1e-6)                                          # upper bound
    assert est.value <= ref * 1.01                                                # and tight


def test_slow_stable_mode_beside_an_integrator_stays_stable():
    # A pure integrator (eigenvalue 0, on the boundary) beside a slow but stable mode at
    # -1e-4 (analytic: diagonal A).  Only the integrator is marginal; the boundary test that
    # moves rounding-perturbed defective eigenvalues onto the boundary must not take the
    # stable one along (its sigma_min(A - 0 I) is small only because of the integrator).
    rng = np.random.default_rng(12)
    Q = np.linalg.qr(rng.standard_normal((3, 3)))[0]
    A = Q @ np.diag([0.0, -1e-4, -1.0]) @ Q.T
    modes = pc.classify_modes((A, Q @ np.ones((3, 1)), np.ones((1, 3)) @ Q.T))
    by_value = sorted(modes, key=lambda m: m.value.real)
    assert [m.stable for m in by_value] == [True, True, False]
    assert [m.marginal for m in by_value] == [False, False, True]


# --- the Schur-form measures agree with a dense SVD ----------------------------------------
# Reference: the definitions themselves, evaluated with numpy's dense SVD (the method the
# mode table used before the per-eigenvalue Schur-form measures; sigma_min of the PBH matrix
# by Hautus 1969, and sigma_min(A - mu I) as the backward error of mu as an eigenvalue,
# Trefethen and Embree, *Spectra and Pseudospectra*, 2005, ch. 2).

def _spring_chain(states, **options):
    """The lightly damped spring chain of benchmarks/bench_modes.py (one scenario, one place):
    every mode lies close to the imaginary axis."""
    import importlib.util
    import pathlib

    path = pathlib.Path(__file__).resolve().parents[1] / "benchmarks" / "bench_modes.py"
    spec = importlib.util.spec_from_file_location("bench_modes", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.spring_chain(states, **options)


def _hidden_integrators(seed, dt=None):
    """An exact integrator chain of length 3 (continuous) or a rotation block and z = 1
    (discrete, eigenvalues on the unit circle) beside stable modes, in rotated coordinates."""
    rng = np.random.default_rng(seed)
    n = 9
    A = rng.standard_normal((n, n)) * 0.3
    if dt is None:
        A[:3, :] = 0.0
        A[:3, :3] = np.diag([1.0, 1.0], 1)
        A[3:, 3:] -= 2.0 * np.eye(n - 3)
    else:
        a = 0.7
        A[:3, :] = 0.0
        A[:2, :2] = [[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]]
        A[2, 2] = 1.0
        A[3:, 3:] *= 0.5
    Q = catalog.random_orthogonal(n, rng)
    return pc.StateSpaceModel(Q @ A @ Q.T, Q @ rng.standard_normal((n, 2)),
                              rng.standard_normal((2, n)) @ Q.T, dt=dt)


def _snap_dense(A, values, delta, nA, discrete):
    """The boundary test with a dense SVD per eigenvalue (the former method, O(n^3) each)."""
    from plantcore.structure.modes import _SNAP_RADIUS

    out = np.array(values, dtype=complex)
    for i, v in enumerate(out):
        r = abs(v)
        gap, mu = (abs(r - 1.0), v / r) if discrete else (abs(v.real), complex(0.0, v.imag))
        if gap <= delta or gap > _SNAP_RADIUS * max(nA, 1.0 if discrete else nA):
            continue
        others = np.delete(np.asarray(values, dtype=complex), i)
        if others.size and np.min(np.abs(others - mu)) < 0.1 * abs(v - mu):
            continue
        if np.linalg.svd(A - mu * np.eye(A.shape[0]), compute_uv=False)[-1] <= delta:
            out[i] = mu
    return out


_DENSE_CASES = {
    "light_chain": lambda: _spring_chain(24, inputs=2, outputs=2, damping=1e-3, seed=1),
    "undamped_chain": lambda: _spring_chain(20, inputs=3, outputs=2, damping=1e-13, seed=2),
    "integrator_chain": lambda: _hidden_integrators(3),
    "unit_circle": lambda: _hidden_integrators(4, dt=0.1),
}


@pytest.mark.parametrize("name", sorted(_DENSE_CASES))
def test_boundary_decision_and_margins_agree_with_dense_svd(name):
    from plantcore.structure.kalman import _prepare
    from plantcore.structure.modes import (
        _CLUSTER_FACTOR,
        _boundary_delta,
        _clustered_eigenvalues,
        _snap_to_boundary,
    )

    model = _DENSE_CASES[name]()
    p = _prepare(model, None)
    n, discrete = model.n, model.is_discrete
    nA = float(np.linalg.norm(p.A))
    delta = _boundary_delta(nA, discrete)
    values = _clustered_eigenvalues(p.A, _CLUSTER_FACTOR * nA)
    snapped = _snap_to_boundary(p.A, values, delta, nA, discrete)
    assert np.array_equal(snapped, _snap_dense(p.A, values, delta, nA, discrete))
    modes = pc.classify_modes(model)
    if name == "integrator_chain":
        assert sum(m.marginal for m in modes) == 3
    if name == "unit_circle":
        assert sum(m.marginal for m in modes) == 3
    if name == "undamped_chain":
        assert all(m.marginal for m in modes)
    # every model here is minimal, so each margin is sigma_min on the whole prepared model
    assert all(m.part == PART_NAMES[0] for m in modes)
    for m in modes:
        lam = m.value
        shifted = p.A - lam * np.eye(n)
        direct_c = np.linalg.svd(np.hstack([shifted, p.B_dec]), compute_uv=False)[-1] / p.scale
        direct_o = np.linalg.svd(np.vstack([shifted, p.C_dec]), compute_uv=False)[-1] / p.scale
        # an attained value, so never below the dense one beyond its rounding (n eps)
        assert m.controllability_margin >= direct_c - n * 1e-16
        assert_allclose(m.controllability_margin, direct_c, rtol=1e-8, atol=1e-15)
        assert_allclose(m.observability_margin, direct_o, rtol=1e-8, atol=1e-15)


@pytest.mark.parametrize("seed", range(3))
def test_schur_measures_agree_with_dense_svd_at_random_points(seed):
    from plantcore.structure.pbh_measures import PBHMeasures

    rng = np.random.default_rng(600 + seed)
    n, m, p = 30, 1 + seed, 2
    A = rng.standard_normal((n, n)) / math.sqrt(n)
    B, C = rng.standard_normal((n, m)), rng.standard_normal((p, n))
    points = list(rng.standard_normal(4) + 1j * rng.standard_normal(4)) + [0.3, -1.1]
    points += list(np.linalg.eigvals(A)[:4])
    measures = PBHMeasures(A)
    got_c = measures.smallest(B, points, "c")
    got_o = measures.smallest(C, points, "o")
    got_a = measures.smallest(np.zeros((n, 0)), points, "c")
    for lam, gc, go, ga in zip(points, got_c, got_o, got_a):
        shifted = A - lam * np.eye(n)
        assert_allclose(gc, np.linalg.svd(np.hstack([shifted, B]), compute_uv=False)[-1],
                        rtol=1e-9, atol=1e-14)
        assert_allclose(go, np.linalg.svd(np.vstack([shifted, C]), compute_uv=False)[-1],
                        rtol=1e-9, atol=1e-14)
        assert_allclose(ga, np.linalg.svd(shifted, compute_uv=False)[-1], rtol=1e-9, atol=1e-14)
    # an exactly singular shift: zero pivots are handled, the value is at rounding level
    assert measures.smallest(np.zeros((n, 0)), [0.0], "c")[0] > -1.0
    singular = PBHMeasures(np.diag([0.0, 1.0, 2.0]))
    assert singular.smallest(np.zeros((3, 0)), [0.0], "c")[0] < 1e-15
    assert singular.smallest(np.array([[0.0], [1.0], [1.0]]), [0.0], "c")[0] < 1e-15
    assert_allclose(singular.smallest(np.array([[1.0], [0.0], [0.0]]), [0.0], "c")[0], 1.0,
                    rtol=1e-12)


def test_cluster_means_of_nearly_equal_values_near_the_largest_floats():
    # members 1e308 apart by a few ulps: their mean stays finite (no sum of the members)
    from plantcore.structure.modes import _conditioned_means

    values = np.array([1.7e308, 1.7e308 * (1 + 4e-16), 1.7e308 * (1 - 4e-16)], dtype=complex)
    kappa = np.full(3, 1e8)        # ill-conditioned: the copies link up
    out = _conditioned_means(values, kappa, np.ones(3, dtype=bool), 1e303)
    assert np.all(np.isfinite(out)) and np.ptp(out.real) == 0.0
    assert abs(out[0].real - 1.7e308) <= 1e-15 * 1.7e308
