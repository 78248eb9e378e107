"""Tests of plantcore.structure.crosscheck: the modal certificates behind the cross-check decisions.

External references:
- The PBH test (M. L. J. Hautus, "Controllability and observability conditions of linear
  autonomous systems", 1969) and the distance to uncontrollability
  ``min sigma_min([A - lambda I, B])`` (R. Eising, "Between controllable and
  uncontrollable", Systems & Control Letters, 1984), evaluated here independently with
  numpy's SVD.
- Known-structure systems (catalog): part sizes fixed by construction (Kalman, 1963).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

import catalog
import plantcore as pc
from plantcore.structure import crosscheck as _crosscheck
from plantcore.structure.kalman import _prepare


def _pbh_distances(A, B, scale):
    """sigma_min([A - lambda I, B]) / scale at every computed eigenvalue (numpy SVD)."""
    n = A.shape[0]
    return np.array([np.linalg.svd(np.hstack([A - lam * np.eye(n), B]), compute_uv=False)[-1]
                     for lam in np.linalg.eigvals(A)]) / scale


def test_every_mode_nearly_uncontrollable_is_flagged_not_presented_as_clear():
    # A discrete-time catalog model of 145 states (parts 56, 33, 19, 37; one input; hidden by
    # an orthogonal similarity) with strongly non-normal random blocks.  The staircase runs
    # 146 steps with clear margins and calls everything controllable and observable, while
    # the construction has 56 uncontrollable states.  Found in a random study of 150 such
    # models (seed 23, draw 81); values below measured here.
    case = catalog.known_structure((56, 33, 19, 37), inputs=1, outputs=4, seed=434686820,
                                   discrete=True, coupling=3.0)
    p = _prepare(case.model, None)
    # Independent evidence that the answer depends on the tolerance: at many computed
    # eigenvalues the PBH distance is below it, so a perturbation within the tolerance
    # makes that mode uncontrollable (Eising 1984).
    distances = _pbh_distances(p.A, p.B_dec, p.scale)
    assert np.count_nonzero(distances <= p.tol) >= 10
    # The eigenvector bound ||w^H B|| / ||w|| alone certifies none of them (its eigenvectors
    # are inaccurate), which is how this went unflagged before the direct measurement.
    plain = _crosscheck.modal_measures(p.A, p.B_dec, scale=p.scale, tol=np.inf, side="left")
    assert plain.min() > p.tol
    sharpened = _crosscheck.modal_measures(p.A, p.B_dec, scale=p.scale, tol=p.tol, side="left")
    assert sharpened.min() <= p.tol
    kd = pc.kalman_decomposition(case.model)
    assert kd.fragile                       # whatever the sizes, they depend on the tolerance
    check = next(d for d in kd.decisions if d.label.endswith("not proven uncontrollable"))
    if kd.sizes.uncontrollable_observable + kd.sizes.uncontrollable_unobservable == 0:
        assert check.conflict               # "all controllable" against a certified mode


def test_sharpened_value_is_the_pbh_distance_at_the_most_suspicious_mode():
    # Diagonal A with separated modes and b = ones is controllable (Hautus 1969); no mode is
    # certified, so the smallest eigenvector measure is replaced by the PBH distance at its
    # eigenvalue when that is smaller.  Reference: numpy's SVD of [A - lambda I, b].
    n = 12
    A = np.diag(-np.arange(1.0, n + 1))
    b = np.ones((n, 1))
    scale = 3.0
    plain = _crosscheck.modal_measures(A, b, scale=scale, tol=np.inf, side="left")
    sharpened = _crosscheck.modal_measures(A, b, scale=scale, tol=5e-11, side="left")
    i = int(np.argmin(plain))
    lam = np.linalg.eigvals(A)[i]   # same LAPACK routine and order as the check uses
    reference = np.linalg.svd(np.hstack([A - lam * np.eye(n), b]), compute_uv=False)[-1]
    assert_allclose(sharpened[i], min(plain[i], reference / scale), rtol=1e-12)
    others = np.arange(n) != i
    assert_allclose(sharpened[others], plain[others], rtol=0)
    assert sharpened.min() > 5e-11
    form = pc.controllability_staircase((A, b, np.ones((1, n))))
    assert form.rank == n and not form.fragile


def test_observability_side_uses_the_stacked_matrix():
    # The dual: sigma_min([A - lambda I; C]) for the right eigenvector side.  An output
    # that sees only the first of two separated modes leaves the second exactly
    # unobservable; its eigenvector measure is already zero, so nothing is replaced
    # (measures ||C v|| for the unit eigenvectors e1, e2: 1 and 0, derived here).
    A = np.diag([-1.0, -5.0])
    C = np.array([[1.0, 0.0]])
    values = _crosscheck.modal_measures(A, C, scale=1.0, tol=5e-11, side="right")
    assert sorted(values) == pytest.approx([0.0, 1.0])
    # With C seeing both, nothing is certified; the replaced value is the stacked
    # matrix's smallest singular value at that eigenvalue (numpy SVD as the reference).
    C = np.array([[1.0, 1e-3]])
    plain = _crosscheck.modal_measures(A, C, scale=1.0, tol=np.inf, side="right")
    values = _crosscheck.modal_measures(A, C, scale=1.0, tol=5e-11, side="right")
    i = int(np.argmin(plain))
    lam = np.linalg.eigvals(A)[i]
    reference = np.linalg.svd(np.vstack([A - lam * np.eye(2), C]), compute_uv=False)[-1]
    assert_allclose(values[i], min(plain[i], reference), rtol=1e-12)


def test_repeated_eigenvalue_is_not_counted_twice():
    # A double eigenvalue -1 with one uncontrollable direction (x2) and one controllable
    # one (x1), and a separate controllable mode -2: exactly one mode is uncontrollable
    # (PBH: rank [A + I, B] = 2 of 3).  Its eigenvector certifies it; measuring the PBH
    # distance at the other copy of -1 would certify the same direction again and report
    # a conflict that is not there, so nothing is replaced once a mode is certified.
    A = np.diag([-1.0, -1.0, -2.0])
    B = np.array([[1.0], [0.0], [2.0]])
    values = _crosscheck.modal_measures(A, B, scale=1.0, tol=5e-11, side="left")
    assert np.count_nonzero(values <= 5e-11) == 1
    form = pc.controllability_staircase((A, B, np.ones((1, 3))))
    assert form.rank == 2 and not form.fragile
    assert not form.decisions[-1].conflict
