"""Tests of plantcore.structure.minimal.

External references:
- slycot's minimal-realization routine tb01pd and python-control's minreal, on random
  models where the answer is clear-cut.
- The rank of the block Hankel matrix of Markov parameters equals the minimal order
  (B. L. Ho and R. E. Kalman, "Effective construction of linear state-variable models from
  input/output functions", Regelungstechnik 14, 1966); decided here by SVD with a wide gap.
- Transfer functions with a known common factor, cancelled by hand.
"""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import catalog
import plantcore as pc


def _points(model, count=4):
    pts = catalog.random_points(count)
    return [np.exp(p) for p in pts] if model.is_discrete else pts


def _check(mr, model):
    r = mr.order
    assert mr.model.n == r and mr.V.shape == (model.n, r) and mr.W.shape == (model.n, r)
    assert_allclose(mr.W.T @ mr.V, np.eye(r), atol=1e-12)
    assert_allclose(mr.model.A, mr.W.T @ model.A @ mr.V, atol=1e-12 * max(np.linalg.norm(model.A), 1))
    assert np.array_equal(mr.model.D, model.D)
    assert mr.model.dt == model.dt
    assert mr.removed_uncontrollable + mr.removed_unobservable + r == model.n
    for s in _points(model):
        assert_allclose(mr.model.transfer_at(s), model.transfer_at(s), rtol=1e-9, atol=1e-10)


@pytest.mark.parametrize("case", catalog.catalog(), ids=lambda c: f"{c.sizes}-{'-'.join(c.tags)}")
def test_catalog(case):
    mr = pc.minimal_realization(case.model)
    assert mr.order == case.minimal_order
    assert mr.removed_uncontrollable == case.sizes[2] + case.sizes[3]
    assert mr.removed_unobservable == case.sizes[1]
    _check(mr, case.model)


def test_common_factor_cancels():
    # (s + 1)(s + 4) / ((s + 1)(s + 2)(s + 3)) = (s + 4) / ((s + 2)(s + 3)): order 2.
    num = np.polymul([1, 1], [1, 4])
    den = np.polymul(np.polymul([1, 1], [1, 2]), [1, 3])
    g = pc.from_transfer_function(list(num), list(den))
    mr = pc.minimal_realization(g)
    assert mr.order == 2 and not mr.fragile
    s = 0.5 + 1.0j
    assert_allclose(mr.model.transfer_at(s)[0, 0], (s + 4) / ((s + 2) * (s + 3)), rtol=1e-12)


def test_mimo_transfer_function_realization_is_reduced():
    # Both entries of the row share the denominator (s + 1): the minimal order is 1
    # (McMillan degree of [1/(s+1), 2/(s+1)], by hand), the companion realization has 2.
    g = pc.from_transfer_function([[[1.0], [2.0]]], [[[1.0, 1.0], [1.0, 1.0]]])
    assert g.n == 2
    assert pc.minimal_realization(g).order == 1


@pytest.mark.parametrize("seed", range(5))
def test_against_slycot_and_python_control(seed):
    slycot = pytest.importorskip("slycot")
    import control

    case = catalog.known_structure((3, 2, 1, 2), inputs=2, outputs=2, seed=300 + seed)
    m = case.model
    n, k, p = m.n, m.n_inputs, m.n_outputs
    tol = 1e-10 * max(np.linalg.norm(m.A), np.linalg.norm(m.B), np.linalg.norm(m.C))
    B = np.zeros((n, max(k, p)))
    B[:, :k] = m.B
    C = np.zeros((max(k, p), n))
    C[:p, :] = m.C
    nr = slycot.tb01pd(n, k, p, m.A.copy(), B, C, job="M", equil="N", tol=tol)[3]
    ours = pc.minimal_realization(m).order
    assert ours == nr == case.minimal_order
    # python-control's minreal (pole-zero cancellation based) with a matching tolerance.
    assert control.minreal(m.to_control(), tol=1e-8, verbose=False).nstates == ours


@pytest.mark.parametrize("seed", range(4))
def test_hankel_rank(seed):
    # Discrete time keeps the Markov parameters C A^k B bounded (eigenvalues inside the unit
    # circle), so the Hankel matrix is well scaled.
    case = catalog.known_structure((2, 1, 1, 1), inputs=1, outputs=2, seed=700 + seed, discrete=True)
    m = case.model
    n = m.n
    markov = [m.C @ np.linalg.matrix_power(m.A, k) @ m.B for k in range(2 * n)]
    H = np.block([[markov[i + j] for j in range(n)] for i in range(n)])
    sv = np.linalg.svd(H, compute_uv=False)
    hankel_rank = int(np.sum(sv > 1e-8 * sv[0]))
    assert sv[hankel_rank - 1] > 1e-5 * sv[0]  # the gap is wide: the reference is clear-cut
    assert pc.minimal_realization(m).order == hankel_rank == case.minimal_order


def test_static_and_trivial():
    static = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((2, 0)), [[1.0], [2.0]])
    mr = pc.minimal_realization(static)
    assert mr.order == 0 and mr.model.D.shape == (2, 1)
    hidden = pc.StateSpaceModel(-np.eye(3), np.zeros((3, 1)), np.ones((1, 3)), [[4.0]], dt=None)
    mr = pc.minimal_realization(hidden)
    assert mr.order == 0 and mr.removed_uncontrollable == 3
    assert_allclose(mr.model.transfer_at(1j), [[4.0]])


def test_names_and_time_domain_kept():
    case = catalog.known_structure((2, 1, 0, 1), inputs=1, outputs=1, seed=9, discrete=True)
    m = case.model.replace(inputs=["valve"], outputs=["level"], name="tank")
    mr = pc.minimal_realization(m)
    assert mr.model.inputs == ("valve",) and mr.model.outputs == ("level",)
    assert mr.model.dt == m.dt and "tank" in mr.model.name


@given(sizes=st.tuples(*[st.integers(0, 3)] * 4), seed=st.integers(0, 10**6),
       discrete=st.booleans(), m=st.integers(1, 2), p=st.integers(1, 2))
def test_property(sizes, seed, discrete, m, p):
    case = catalog.known_structure(sizes, inputs=m, outputs=p, seed=seed, discrete=discrete,
                                   condition=10.0, feedthrough=True)
    mr = pc.minimal_realization(case.model)
    _check(mr, case.model)
    if not mr.fragile:
        assert mr.order == case.minimal_order


# --- removed modes that are not stable (issue 20, item 2) -----------------------------------
# The answers are fixed by construction: a diagonal A whose mode has a zero row of B cannot be
# moved by the inputs (and one with a zero column of C cannot be seen), by the PBH test
# (M. L. J. Hautus, 1969); the mode is unstable when Re > 0 (continuous) or |z| > 1 (discrete),
# and an integrator (s = 0) or z = 1 lies on the stability boundary (common practice).

def _hidden_example(Q=None, dt=None, hidden=0.5):
    """Three states, one input, one output; the third mode is uncontrollable, observable."""
    A = np.diag([-1.0, -2.0, hidden]) if dt is None else np.diag([0.5, 0.3, hidden])
    B = np.array([[1.0], [1.0], [0.0]])
    C = np.array([[1.0, 1.0, 1.0]])
    if Q is not None:
        A, B, C = Q @ A @ Q.T, Q @ B, C @ Q.T
    return pc.StateSpaceModel(A, B, C, dt=dt)


@pytest.mark.parametrize("rotated", [False, True])
def test_unstable_uncontrollable_mode_is_named(rotated):
    Q = np.linalg.qr(np.random.default_rng(20).standard_normal((3, 3)))[0] if rotated else None
    with pytest.warns(pc.HiddenModeWarning, match=r"0\.5 \(unstable, in the uncontrollable part"):
        mr = pc.minimal_realization(_hidden_example(Q))
    assert mr.order == 2
    (mode,) = mr.removed_unstable_modes
    assert isinstance(mode, pc.RemovedMode)
    assert mode.part == "uncontrollable_observable" and mode.unstable and not mode.marginal
    assert abs(mode.value - 0.5) <= 1e-12


def test_warning_says_no_controller_can_stabilize():
    with pytest.warns(pc.HiddenModeWarning) as record:
        pc.minimal_realization(_hidden_example())
    message = str(record[0].message)
    assert "no controller designed on the reduced model can stabilize the plant" in message
    assert record[0].filename == __file__          # attributed to the caller's line


def test_discrete_mode_outside_the_unit_circle_is_named():
    with pytest.warns(pc.HiddenModeWarning, match=r"1\.2 \(unstable"):
        mr = pc.minimal_realization(_hidden_example(dt=0.1, hidden=1.2))
    (mode,) = mr.removed_unstable_modes
    assert abs(mode.value - 1.2) <= 1e-12 and mode.unstable


@pytest.mark.parametrize("dt, hidden", [(None, -0.5), (0.1, 0.9)])
def test_removed_stable_mode_gives_no_warning(dt, hidden):
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", pc.HiddenModeWarning)
        mr = pc.minimal_realization(_hidden_example(dt=dt, hidden=hidden))
    assert mr.order == 2 and mr.removed_uncontrollable == 1
    assert mr.removed_unstable_modes == ()


@pytest.mark.parametrize("dt, hidden", [(None, 0.0), (0.1, 1.0)])
def test_uncontrollable_boundary_mode_is_marginal(dt, hidden):
    with pytest.warns(pc.HiddenModeWarning, match="regulate the plant") as record:
        mr = pc.minimal_realization(_hidden_example(dt=dt, hidden=hidden))
    assert "stabilize the plant" not in str(record[0].message)
    (mode,) = mr.removed_unstable_modes
    assert mode.marginal and not mode.unstable and abs(mode.value - hidden) <= 1e-12


def test_unobservable_and_doubly_hidden_parts_are_told_apart():
    # 0.5: controllable, not seen (part 2); 0.7: neither moved nor seen (part 4)
    A = np.diag([-1.0, 0.5, 0.7])
    B = np.array([[1.0], [1.0], [0.0]])
    C = np.array([[1.0, 0.0, 0.0]])
    with pytest.warns(pc.HiddenModeWarning, match="unobservable part"):
        mr = pc.minimal_realization((A, B, C))
    parts = {round(m.value.real, 9): m.part for m in mr.removed_unstable_modes}
    assert parts == {0.5: "controllable_unobservable", 0.7: "uncontrollable_unobservable"}


def test_hidden_unstable_oscillation_is_one_conjugate_pair():
    # an uncontrollable oscillation 0.1 ± 2j beside a stable controllable mode
    A = np.zeros((3, 3))
    A[0, 0] = -1.0
    A[1:, 1:] = [[0.1, 2.0], [-2.0, 0.1]]
    with pytest.warns(pc.HiddenModeWarning, match=r"0\.1 ± 2j") as record:
        mr = pc.minimal_realization((A, [[1.0], [0.0], [0.0]], [[1.0, 1.0, 0.0]]))
    values = sorted(mr.removed_unstable_modes, key=lambda m: m.value.imag)
    assert_allclose([m.value for m in values], [0.1 - 2j, 0.1 + 2j], atol=1e-12)
    assert "2 modes that are not stable" in str(record[0].message)
