"""Tests of plantcore.reduction.gramians: Hammarling's recursion for the Gramian factors.

External references:
- For a diagonal ``A = diag(d)`` the Lyapunov equation ``A P + P A^H + M M^H = 0`` has the
  closed-form solution ``P_ij = -(M M^H)_ij / (d_i + conj(d_j))``, and ``A P A^H - P + M M^H
  = 0`` has ``P_ij = (M M^H)_ij / (1 - d_i conj(d_j))`` (common practice: entrywise
  solution of a Stein or Lyapunov equation with a diagonal coefficient).
- The eigenvalues and eigenvectors of the generated plate come from ``numpy.linalg.eigh``
  (the plate's ``A`` is symmetric), so its Gramian is ``V P V^T`` with ``P`` as above.

The first two checks failed before the explicit reflection of each pivot row (relative
errors 1.2 and 0.22 on the 625-state plate in continuous time, real and complex).
"""

import numpy as np
import pytest

from plantcore.examples.heated_plate import heated_plate
from plantcore.reduction.gramians import _hammarling, _reflect_row, gramian_factors


@pytest.fixture(scope="module")
def plate_modes():
    """The 625-state plate's eigenvalues (slowest first) and input matrix in modal coordinates.

    In this order Hammarling's recursion meets the fast, nearly uncontrollable modes first:
    the trailing Schur complements are some 1e-100 of the leading ones, and any rounding
    carried into those rows from the much larger ones destroys the result.
    """
    model = heated_plate(625)
    A = model.A.toarray()
    d, V = np.linalg.eigh(A)
    d, V = d[::-1], V[:, ::-1]
    return d, V.T @ np.asarray(model.B), model


def _relative_error(U, P):
    return np.linalg.norm(U @ U.conj().T - P, 2) / np.linalg.norm(P, 2)


def test_continuous_plate_against_closed_form(plate_modes):
    d, M, _ = plate_modes
    P = -(M @ M.T) / (d[:, None] + d[None, :])
    assert _relative_error(_hammarling(np.diag(d), M, False), P) < 1e-12


def test_complex_eigenvalues_against_closed_form(plate_modes):
    d, M, _ = plate_modes
    lam = d + 0.3j
    Mc = M * np.exp(1j * np.arange(M.shape[0]))[:, None]
    P = -(Mc @ Mc.conj().T) / (lam[:, None] + lam.conj()[None, :])
    assert _relative_error(_hammarling(np.diag(lam), Mc, False), P) < 1e-12


@pytest.mark.parametrize("phase", [0.0, 0.2])
def test_discrete_against_closed_form(plate_modes, phase):
    d, M, _ = plate_modes
    mu = (1.0 + 0.5 * d / np.abs(d).max()) * np.exp(1j * phase)
    if phase == 0.0:
        mu = mu.real
    P = (M @ M.T) / (1.0 - mu[:, None] * np.conj(mu)[None, :])
    assert _relative_error(_hammarling(np.diag(mu), M, True), P) < 1e-12


def test_gramian_factors_of_the_plate_in_its_own_coordinates(plate_modes):
    """Through the real Schur form of the full plate: the order of its eigenvalues is LAPACK's."""
    d, M, model = plate_modes
    _, V = np.linalg.eigh(model.A.toarray())
    V = V[:, ::-1]
    P = V @ (-(M @ M.T) / (d[:, None] + d[None, :])) @ V.T
    R = gramian_factors(model.to_dense()).controllability
    assert np.linalg.norm(R.T @ R - P, 2) / np.linalg.norm(P, 2) < 1e-12


@pytest.mark.parametrize("dtype", [float, complex])
@pytest.mark.parametrize("width", [1, 2, 5])
def test_reflect_row_zeroes_the_row_and_keeps_the_product(dtype, width):
    rng = np.random.default_rng(width)
    F = rng.standard_normal((6, width))
    if dtype is complex:
        F = F + 1j * rng.standard_normal((6, width))
    before = F[:5] @ F[:5].conj().T
    beta = _reflect_row(F, 4)
    assert beta == pytest.approx(np.linalg.norm(before[4, 4]) ** 0.5, rel=1e-14)
    assert np.all(F[4, :-1] == 0.0) and F[4, -1] == beta
    np.testing.assert_allclose(F[:5] @ F[:5].conj().T, before, atol=1e-13)


def test_reflect_row_of_zeros_and_of_a_tiny_row():
    F = np.array([[1.0, 2.0], [0.0, 0.0]])
    assert _reflect_row(F, 1) == 0.0
    np.testing.assert_array_equal(F, [[1.0, 2.0], [0.0, 0.0]])
    tiny = np.array([[1.0, 1.0], [3e-200, 4e-200]])
    assert _reflect_row(tiny, 1) == pytest.approx(5e-200, rel=1e-14)
    assert tiny[1, 0] == 0.0
