"""Sparse StateSpaceModel (issue 18 item 1): kept sparse, validated, refused by dense routines."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
import scipy.sparse

import plantcore as pc


def _chain(n=40):
    A = scipy.sparse.diags([np.ones(n - 1), -2.0 * np.ones(n), 0.5 * np.ones(n - 1)], [-1, 0, 1])
    B = np.zeros((n, 1))
    B[0, 0] = 1.0
    C = np.zeros((1, n))
    C[0, -1] = 1.0
    return pc.StateSpaceModel(A, B, C, name="chain")


def test_a_sparse_a_stays_sparse_read_only_and_named():
    model = _chain()
    assert model.is_sparse and scipy.sparse.issparse(model.A) and model.A.format == "csr"
    assert not _chain().to_dense().is_sparse
    assert model.states[0] == "x1" and model.n == 40
    with pytest.raises(ValueError, match="read-only"):
        model.A.data[0] = 1.0
    back = pickle.loads(pickle.dumps(model))
    assert back.is_sparse and (back.A != model.A).nnz == 0
    assert model.replace(name="other").is_sparse
    assert model.to_dense().to_sparse().is_sparse


@pytest.mark.parametrize("point", [0.0, 1j, 0.3 + 2j])
def test_transfer_at_by_sparse_lu_equals_the_dense_solve(point):
    model = _chain()
    np.testing.assert_allclose(model.transfer_at(point), model.to_dense().transfer_at(point),
                               rtol=1e-12, atol=1e-15)


def test_transfer_at_an_eigenvalue_is_refused():
    model = pc.StateSpaceModel(scipy.sparse.diags([-1.0, -2.0]).tocsr(), [[1.0], [1.0]],
                               [[1.0, 1.0]])
    with pytest.raises(ValueError, match="eigenvalue of A"):
        model.transfer_at(-1.0)


@pytest.mark.parametrize("call", [
    lambda m: pc.minimal_realization(m),
    lambda m: pc.kalman_decomposition(m),
    lambda m: pc.analyze(m),
    lambda m: pc.peak_gain(m),
    lambda m: m.to_control(),
])
def test_dense_routines_refuse_a_sparse_model_in_one_line_with_the_size(call):
    with pytest.raises(ValueError) as info:
        call(_chain(3000))
    text = str(info.value)
    assert "\n" not in text and "3,000 x 3,000" in text and "72 MB" in text
    assert "plantcore.balanced_truncation" in text   # points to the sparse route


@pytest.mark.parametrize("A, fragment", [
    (scipy.sparse.csr_array(np.array([[-1.0, np.nan], [0.0, -1.0]])),
     "A has a non-finite entry (nan) at row 1, column 2"),
    (scipy.sparse.csr_array(np.array([[-1.0j, 0], [0, -1.0]])), "A holds complex numbers"),
    (scipy.sparse.csr_array(np.ones((2, 3))), "A is 2 x 3 but must be square"),
])
def test_bad_sparse_matrices_are_named(A, fragment):
    with pytest.raises(ValueError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        pc.StateSpaceModel(A, [[1.0], [1.0]], [[1.0, 1.0]])


def test_sparse_b_and_c_are_stored_dense_and_checked():
    A = scipy.sparse.identity(3, format="csr") * -1.0
    model = pc.StateSpaceModel(A, scipy.sparse.csr_array(np.ones((3, 1))),
                               scipy.sparse.csr_array(np.ones((1, 3))))
    assert isinstance(model.B, np.ndarray) and isinstance(model.C, np.ndarray)
    with pytest.raises(ValueError, match="B has 2 rows but A is 3 x 3"):
        pc.StateSpaceModel(A, scipy.sparse.csr_array(np.ones((2, 1))), np.ones((1, 3)))


def test_a_dense_model_is_unchanged():
    model = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]])
    assert not model.is_sparse and isinstance(model.A, np.ndarray)
    assert pc.as_model(model) is model
