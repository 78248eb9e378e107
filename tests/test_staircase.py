"""Tests of plantcore.structure.staircase: structure, orthogonality, ranks, scaling invariance.

External references used here:
- slycot's controllability-staircase routine ab01nd (orthogonal canonical form), whose
  controllable dimension is compared on models where the answer is clear-cut.
- Known-structure systems from the catalog: part sizes fixed by construction (Kalman, 1963).
"""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import catalog
import plantcore as pc


def _check_controllability_form(form, model):
    n, r = model.n, form.rank
    Az, Bz = form.model.A, form.model.B
    # exact structural zeros
    assert np.all(Az[r:, :r] == 0.0)
    assert np.all(Bz[r:, :] == 0.0)
    # reconstruction: x = Q z
    scale = max(np.linalg.norm(model.A), 1.0)
    assert_allclose(form.Q @ Az @ form.Q_inv, model.A, atol=1e-12 * scale * max(n, 1))
    assert_allclose(form.Q @ Bz, model.B, atol=1e-12 * max(np.linalg.norm(model.B), 1.0) * max(n, 1))
    assert_allclose(form.model.C, model.C @ form.Q, atol=1e-12 * max(np.linalg.norm(model.C), 1.0) * max(n, 1))
    # block upper Hessenberg with full-row-rank subdiagonal blocks
    sizes = form.block_sizes
    assert sum(sizes) == r
    starts = np.cumsum((0,) + sizes)
    for k in range(1, len(sizes)):
        rows = slice(starts[k], starts[k + 1])
        assert np.all(Az[starts[k + 1]:r, starts[k - 1]:starts[k]] == 0.0)  # below subdiagonal
        sub = Az[rows, starts[k - 1]:starts[k]]
        assert np.linalg.matrix_rank(sub) == sizes[k]
    if sizes:
        assert np.linalg.matrix_rank(Bz[:sizes[0], :]) == sizes[0]
        assert all(a >= b for a, b in zip(sizes, sizes[1:]))  # staircase widths never grow


@pytest.mark.parametrize("case", catalog.catalog(), ids=lambda c: f"{c.sizes}-{'-'.join(c.tags)}")
def test_catalog_controllability(case):
    form = pc.controllability_staircase(case.model)
    assert form.rank == case.controllable_dimension
    _check_controllability_form(form, case.model)
    assert form.kind == "controllability"
    if np.all(form.scaling == 1.0):
        assert_allclose(form.Q.T @ form.Q, np.eye(case.model.n), atol=1e-13)


@pytest.mark.parametrize("case", catalog.catalog()[::3], ids=lambda c: f"{c.sizes}-{'-'.join(c.tags)}")
def test_catalog_observability(case):
    form = pc.observability_staircase(case.model)
    r = form.rank
    assert r == case.observable_dimension
    Az, Cz = form.model.A, form.model.C
    assert np.all(Az[:r, r:] == 0.0)
    assert np.all(Cz[:, r:] == 0.0)
    assert_allclose(form.Q @ Az @ form.Q_inv, case.model.A, atol=1e-11 * np.linalg.norm(case.model.A))
    assert form.kind == "observability"


def test_decisions_are_recorded_with_margins():
    A = np.diag([-1.0, -2.0, -3.0])
    B = np.array([[1.0], [1.0], [0.0]])
    form = pc.controllability_staircase((A, B, np.eye(3)))
    assert form.rank == 2 and form.block_sizes == (1, 1)
    steps = [d for d in form.decisions if not d.label.startswith("modal certificate")]
    assert len(steps) == 3  # two steps that gain rank, one that stops
    check = form.decisions[-1]  # the modal certificate: one certainly uncontrollable mode
    assert check.label.startswith("modal certificate") and check.rank == 2
    assert not check.conflict and not check.fragile
    last = steps[-1]
    assert last.rank == 0 and last.smallest_kept == np.inf
    assert last.largest_dropped < 1e-15
    assert not form.fragile
    d = form.decisions[0].to_dict()
    assert d["smallest_kept"] > 0 and d["largest_dropped"] == 0.0 and d["fragile"] is False


def test_fragile_when_coupling_is_near_the_tolerance():
    # A coupling of 1e-10 relative sits within a factor 100 of the default tolerance 5e-11.
    A = np.array([[-1.0, 0.0], [1e-10, -2.0]])
    B = np.array([[1.0], [0.0]])
    form = pc.controllability_staircase((A, B, np.eye(2)))
    assert form.fragile
    # a coupling of 1e-8 relative is real and safely kept (DESIGN.md requirement)
    A[1, 0] = 1e-8 * np.linalg.norm(A)
    form = pc.controllability_staircase((A, B, np.eye(2)))
    assert form.rank == 2 and not form.fragile


def test_rounding_noise_after_similarity_is_dropped_not_fragile():
    # Rounding noise near 1e-13 relative (what a similarity of condition 1e3 leaves behind)
    # must be treated as zero without a fragility flag (DESIGN.md requirement).
    A = np.array([[-1.0, 0.3], [1e-13 * 2.2, -2.0]])
    B = np.array([[1.0], [0.0]])
    form = pc.controllability_staircase((A, B, np.eye(2)))
    assert form.rank == 1 and not form.fragile


def test_modal_cross_check_flags_a_confident_wrong_staircase():
    # A single input driving a 70-state controllable part of a dense random model, with 30
    # uncontrollable states, hidden by an orthogonal similarity: the staircase's Krylov-like
    # chain drifts and keeps rounding noise (slycot's ab01nd gives the same wrong answer).
    # The PBH measures sigma_min([A - lambda I, B]) at every eigenvalue (Hautus 1969)
    # prove exactly 30 modes uncontrollable; the staircase form is then rebuilt on the
    # controllable Schur vectors, so the answer is the constructed one, not only flagged.
    rng = np.random.default_rng(0)
    n = 100
    A = rng.standard_normal((n, n))
    A[70:, :70] = 0.0
    B = rng.standard_normal((n, 1))
    B[70:] = 0.0
    Q = catalog.random_orthogonal(n, rng)
    form = pc.controllability_staircase((Q @ A @ Q.T, Q @ B, np.ones((1, n))))
    assert form.rank == 70 and not form.fragile
    _check_controllability_form(form, pc.as_model((Q @ A @ Q.T, Q @ B, np.ones((1, n)))))
    check = form.decisions[-1]
    assert check.label.startswith("modal certificate") and check.rank == 70
    assert check.conflict == (form.rank != 70)


def test_krylov_rank_fails_but_staircase_does_not():
    # Diagonal A with 30 well separated eigenvalues and b = ones is controllable: every
    # eigenvalue is distinct and every entry of b is nonzero (PBH test, Hautus 1969).  The
    # Krylov matrix is a Vandermonde matrix whose floating-point rank comes out far too low.
    n = 30
    A = np.diag(-np.arange(1.0, n + 1))
    b = np.ones((n, 1))
    K = np.hstack([np.linalg.matrix_power(A, k) @ b for k in range(n)])
    assert np.linalg.matrix_rank(K) < n  # the unreliable answer
    form = pc.controllability_staircase((A, b, np.ones((1, n))))
    assert form.rank == n and not form.fragile


@pytest.mark.parametrize("seed", range(6))
def test_against_slycot_controllable_dimension(seed):
    slycot = pytest.importorskip("slycot")
    case = catalog.known_structure((3, 1, 2, 2), inputs=2, outputs=2, seed=500 + seed, condition=10.0)
    A, B = case.model.A, case.model.B
    n, m = B.shape
    # slycot ab01nd: orthogonal controllability staircase (reference implementation).  Its
    # default tolerance (about n*eps*norm) is too tight for data that went through a
    # similarity of condition 10, so it is given an absolute tolerance of the same relative
    # size as ours.
    tol = 1e-10 * max(np.linalg.norm(A), np.linalg.norm(B))
    out = slycot.ab01nd(n, m, A.copy(), B.copy(), jobz="N", tol=tol)
    ncont = out[2]
    form = pc.controllability_staircase(case.model)
    assert form.rank == ncont == case.controllable_dimension


@pytest.mark.parametrize("seed", range(4))
def test_state_scaling_does_not_change_answers(seed):
    rng = np.random.default_rng(seed)
    case = catalog.known_structure((2, 2, 1, 2), inputs=2, outputs=2, seed=900 + seed)
    base_c = pc.controllability_staircase(case.model)
    base_o = pc.observability_staircase(case.model)
    s = 10.0 ** rng.uniform(-6, 6, case.model.n)
    A = case.model.A / s[:, None] * s[None, :]
    model = pc.StateSpaceModel(A, case.model.B / s[:, None], case.model.C * s[None, :])
    c = pc.controllability_staircase(model)
    o = pc.observability_staircase(model)
    assert (c.rank, c.block_sizes) == (base_c.rank, base_c.block_sizes)
    assert (o.rank, o.block_sizes) == (base_o.rank, base_o.block_sizes)
    assert not c.fragile and not o.fragile
    assert_allclose(c.Q @ c.model.A @ c.Q_inv, A, rtol=0, atol=1e-9 * np.abs(A).max())


def test_input_units_do_not_change_answers():
    case = catalog.known_structure((2, 1, 1, 1), inputs=2, outputs=1, seed=77)
    base = pc.controllability_staircase(case.model)
    B = case.model.B * np.array([1e-7, 1e5])[None, :]
    form = pc.controllability_staircase(case.model.replace(B=B, D=None))
    assert form.rank == base.rank and not form.fragile
    assert np.all(form.model.B[form.rank:] == 0.0)


def test_edge_cases():
    empty = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)))
    f = pc.controllability_staircase(empty)
    assert f.rank == 0 and f.block_sizes == () and f.Q.shape == (0, 0)
    no_inputs = pc.StateSpaceModel(-np.eye(2), np.zeros((2, 0)), np.eye(2))
    f = pc.controllability_staircase(no_inputs)
    assert f.rank == 0
    zero_b = pc.StateSpaceModel(-np.eye(2), np.zeros((2, 1)), np.eye(2))
    f = pc.controllability_staircase(zero_b)
    assert f.rank == 0
    assert len([d for d in f.decisions if not d.label.startswith("modal certificate")]) == 1
    one = pc.StateSpaceModel([[0.5]], [[2.0]], [[1.0]], dt=1.0)
    assert pc.observability_staircase(one).rank == 1


def test_tolerance_validation():
    with pytest.raises(ValueError, match="tol is relative"):
        pc.controllability_staircase(([[1.0]], [[1.0]], [[1.0]]), tol=2.0)
    with pytest.raises(ValueError, match="tol must be a positive number"):
        pc.controllability_staircase(([[1.0]], [[1.0]], [[1.0]]), tol="small")


@given(sizes=st.tuples(*[st.integers(0, 3)] * 4), m=st.integers(1, 3), seed=st.integers(0, 10**6),
       discrete=st.booleans())
def test_property_known_structure(sizes, m, seed, discrete):
    case = catalog.known_structure(sizes, inputs=m, outputs=2, seed=seed, condition=1.0,
                                   discrete=discrete)
    form = pc.controllability_staircase(case.model)
    _check_controllability_form(form, case.model)
    if not form.fragile:
        assert form.rank == case.controllable_dimension
