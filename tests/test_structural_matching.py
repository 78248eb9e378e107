"""Structural placement by maximum matching (plantcore.structure.structural_matching).

Hand-drawn graphs with known counts, from Y.-Y. Liu, J.-J. Slotine and A.-L. Barabasi,
"Controllability of complex networks", Nature 473, 167-173, 2011 (Fig. 1: a directed path
needs one driver node, a directed star with n nodes needs n - 1), and Lin's conditions
(C.-T. Lin, "Structural controllability", IEEE TAC 19(3), 1974): dilation and
inaccessibility.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse

import plantcore as pc


def _graph(n, edges):
    """A[i, j] = 1 for each edge j -> i (x_i depends on x_j)."""
    A = np.zeros((n, n))
    for tail, head in edges:
        A[head, tail] = 1.0
    return A


def _no_signals(n):
    return np.zeros((n, 0)), np.zeros((0, n))


@pytest.mark.parametrize("n", [2, 5, 9])
def test_directed_path_needs_one_driver_at_its_start(n):
    A = _graph(n, [(i, i + 1) for i in range(n - 1)])
    s = pc.structural_placement((A, *_no_signals(n)))
    assert s.minimum_count == 1 and s.unmatched_states == ("x1",)
    assert s.additional_count == 1 and s.states_needing_signal == ("x1",)
    assert len(s.inaccessible_states) == n


@pytest.mark.parametrize("n", [3, 6, 10])
def test_out_star_needs_n_minus_1_drivers(n):
    A = _graph(n, [(0, i) for i in range(1, n)])
    s = pc.structural_placement((A, *_no_signals(n)))
    assert s.minimum_count == n - 1 and s.matching_size == 1
    assert len(s.unmatched_states) == n - 1        # all leaves but the matched one
    assert "x1" in s.unmatched_states               # the hub: no edge points at it


def test_cycle_has_a_perfect_matching_and_needs_one_input():
    A = _graph(4, [(0, 1), (1, 2), (2, 3), (3, 0)])
    s = pc.structural_placement((A, *_no_signals(4)))
    assert s.minimum_count == 1 and s.unmatched_states == () and s.matching_size == 4
    # without inputs everything is inaccessible: one input, to any state of the cycle
    assert s.additional_count == 1 and len(s.states_needing_signal) == 1


def test_existing_inputs_are_counted():
    # path x1 -> x2 -> x3 and a separate self-loop x4 (matched to itself): an input at x1
    # reaches x1..x3; x4 is inaccessible (no dilation), so one more connection is needed
    A = _graph(4, [(0, 1), (1, 2), (3, 3)])
    B = np.zeros((4, 1))
    B[0, 0] = 1.0
    s = pc.structural_placement((A, B, np.zeros((0, 4))))
    assert s.inaccessible_states == ("x4",)
    assert s.additional_count == 1 and s.states_needing_signal == ("x4",)
    assert not s.structurally_complete
    B2 = np.array([[1.0], [0.0], [0.0], [1.0]])
    assert pc.structural_placement((A, B2, np.zeros((0, 4)))).structurally_complete


def test_sensors_use_the_dual_graph():
    # path x1 -> x2 -> x3: a sensor at the end x3 sees all; at x1 sees only x1
    A = _graph(3, [(0, 1), (1, 2)])
    end = pc.structural_placement((A, np.zeros((3, 0)), np.eye(3)[[2]]), sensors=True)
    start = pc.structural_placement((A, np.zeros((3, 0)), np.eye(3)[[0]]), sensors=True)
    assert end.structurally_complete and end.kind == "sensor"
    assert not start.structurally_complete and start.inaccessible_states == ("x2", "x3")
    assert pc.structural_placement((A, *_no_signals(3)), sensors=True).unmatched_states == ("x3",)


def test_sparse_model_and_names():
    n = 2000
    A = scipy.sparse.diags([np.ones(n - 1)], [-1], format="csr")     # a long path
    B = np.zeros((n, 1))
    B[0, 0] = 1.0
    names = [f"node{i}" for i in range(n)]
    model = pc.StateSpaceModel(A, B, np.zeros((0, n)), states=names)
    s = pc.structural_placement(model)
    assert s.structurally_complete and s.unmatched_states == ("node0",)


def test_explicit_zeros_are_not_edges():
    A = scipy.sparse.csr_array((np.array([0.0, 1.0]), (np.array([1, 2]), np.array([0, 1]))),
                               shape=(3, 3))
    s = pc.structural_placement(pc.StateSpaceModel(A, np.zeros((3, 0)), np.zeros((0, 3))))
    assert s.minimum_count == 2         # only x2 -> x3 remains: x1 and x2 unmatched
