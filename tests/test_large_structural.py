"""Structural pre-reduction and Lin's structural verdicts (plantcore.large.structural)."""

from __future__ import annotations

import numpy as np
import scipy.sparse

import plantcore as pc
from plantcore.large import structural_reduction


def _model(A, B, C, names):
    return pc.StateSpaceModel(scipy.sparse.csr_array(np.array(A, dtype=float)), B, C,
                              states=names)


def test_a_disconnected_block_and_a_state_that_feeds_no_output_are_removed_by_name():
    # built by hand: heater -> wall -> room -> sensor; "attic" drifts on its own (no input
    # reaches it, it feeds the room: reached by nothing, so removed); "floor" is heated by the
    # room but feeds nothing back and is not measured (reaches no output).
    names = ["wall", "room", "attic", "floor"]
    A = [[-1.0, 0.0, 0.0, 0.0],
         [0.5, -2.0, 0.3, 0.0],
         [0.0, 0.0, -0.5, 0.0],
         [0.0, 0.7, 0.0, -1.5]]
    B = [[1.0], [0.0], [0.0], [0.0]]
    C = [[0.0, 1.0, 0.0, 0.0]]
    red = structural_reduction(_model(A, B, C, names))
    assert red.not_reached == ("attic",)        # constructed: no input path
    assert red.not_observed == ("floor",)       # constructed: no path to the output
    assert red.model.states == ("wall", "room") and red.order == 2 and red.removed == 2
    assert red.model.is_sparse
    assert red.kept_indices.tolist() == [0, 1]
    assert red.structurally_controllable and red.structurally_observable
    full = _model(A, B, C, names)
    for s in (0.0, 1j, 2.0 + 0.5j):          # exact removal: same transfer function
        np.testing.assert_allclose(red.model.transfer_at(s), full.transfer_at(s), rtol=1e-14)


def test_a_dilation_is_structurally_uncontrollable():
    # Lin 1974, the standard dilation example: one input drives two states that do not
    # interact; [A, B] has generic rank 1 < 2 whatever the values.
    A = [[0.0, 0.0], [0.0, 0.0]]
    red = structural_reduction(_model(A, [[1.0], [1.0]], [[1.0, 1.0]], ["a", "b"]))
    assert red.order == 2 and red.not_reached == () and red.not_observed == ()
    assert not red.structurally_controllable and red.controllability_generic_rank == 1
    assert not red.structurally_observable and red.observability_generic_rank == 1
    # a numerical check agrees: the dense staircase finds controllable dimension 1
    assert pc.controllability_staircase(red.model.to_dense()).rank == 1


def test_a_chain_with_all_states_kept_and_exact_zeros_only():
    n = 50
    A = scipy.sparse.diags([np.full(n - 1, 1e-300), -np.ones(n)], [-1, 0])  # tiny, not zero
    B = np.zeros((n, 1))
    B[0] = 1.0
    C = np.zeros((1, n))
    C[0, -1] = 1.0
    red = structural_reduction(pc.StateSpaceModel(A, B, C))
    assert red.order == n and red.structurally_controllable and red.structurally_observable
    # an explicitly stored zero is not an edge
    A2 = scipy.sparse.csr_array(A)
    A2.data[A2.data == 1e-300] = 0.0
    red2 = structural_reduction(pc.StateSpaceModel(A2, B, C))
    # the input reaches x1 only, and x1 no longer reaches the output at x50
    assert red2.order == 0 and red2.not_observed == ("x1",)
    assert red2.not_reached == tuple(f"x{i}" for i in range(2, n + 1))


def test_nothing_reached_gives_an_empty_model_and_dense_input_is_accepted():
    red = structural_reduction(([[-1.0, 0.0], [0.0, -2.0]], [[0.0], [0.0]], [[1.0, 1.0]]))
    assert red.order == 0 and red.not_reached == ("x1", "x2")
    assert not red.model.is_sparse and red.model.transfer_at(1.0).tolist() == [[0.0]]
