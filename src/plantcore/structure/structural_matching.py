"""Structural placement: how many independent inputs (outputs) the sparsity pattern needs.

A model is *structurally controllable* when some choice of the nonzero entries of ``A`` and
``B`` (their pattern kept) makes it controllable; then almost every choice does.  Lin's
theorem says this holds exactly when (1) every state can be reached in the state graph from
an input (no *inaccessible* state) and (2) the pattern of ``[A, B]`` has full generic rank
``n`` (no *dilation*).  The generic rank is the size of a maximum matching of the bipartite
graph whose rows are the states (as heads of edges) and whose columns are the states (as
tails) and the inputs, with an edge for every nonzero entry.

Liu, Slotine and Barabasi turned this into a count: with ``M`` a maximum matching of the
state graph alone, the fewest independent input signals that make the model structurally
controllable is ``max(n - |M|, 1)``, and the *unmatched* states (no matched edge points at
them) are the ones that must receive an input.  The same reasoning with the existing inputs
among the columns gives how many **more** inputs a given model needs: each new input column
raises the matching by at most one, so ``n - |M([A, B])|`` more are needed, wired to the
states left unmatched; and at least one when some state is still inaccessible, wired (as a
second connection of a new input) to one state of every source component of the
inaccessible part.  Sensors are the dual: the graph of ``A^T`` with the rows of ``C``.

These counts use only the pattern (entries exactly zero are absent edges; a tiny nonzero
entry is an edge), so they scale to very large sparse models: the matching is scipy's
Hopcroft-Karp, ``O(|E| sqrt(n))``, and reachability a breadth-first search.  They are a
lower bound for the numerical question (:mod:`plantcore.structure.placement`): a model can
be structurally controllable and still numerically uncontrollable for its particular
values (two identical masses driven by one shared force).  A maximum matching is not unique,
so neither is the list of unmatched states; its length is.

References
----------
.. [1] C.-T. Lin, "Structural controllability", IEEE Transactions on Automatic Control
   19(3), 201-208, 1974.
.. [2] Y.-Y. Liu, J.-J. Slotine and A.-L. Barabasi, "Controllability of complex networks",
   Nature 473, 167-173, 2011.
.. [3] J. E. Hopcroft and R. M. Karp, "An n^(5/2) algorithm for maximum matchings in
   bipartite graphs", SIAM Journal on Computing 2(4), 225-231, 1973.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse
from scipy.sparse.csgraph import (
    breadth_first_order,
    connected_components,
    maximum_bipartite_matching,
)

from plantcore.core.model import as_model

__all__ = ["StructuralPlacement", "structural_placement"]


@dataclass(frozen=True)
class StructuralPlacement:
    """What the sparsity pattern of a model needs, by maximum matching.

    Attributes
    ----------
    kind : str
        ``"actuator"`` (controllability) or ``"sensor"`` (observability, the dual graph).
    minimum_count : int
        Fewest independent inputs (outputs) that make the pattern of ``A`` alone
        structurally controllable (observable): ``max(n - |M|, 1)`` for a maximum matching
        ``M`` of the state graph (Liu, Slotine and Barabasi 2011); 0 for a model without states.
    unmatched_states : tuple of str
        The states left unmatched by that matching (they must each receive an input, or be
        measured); empty when the matching is perfect (then any one state will do).
    matching_size : int
        ``|M|`` for the state graph alone.
    additional_count : int
        How many inputs (outputs) must be added to the existing ones for structural
        controllability (observability): 0 when the model already has it.
    states_needing_signal : tuple of str
        Where the added inputs go (or what the added sensors measure): the states left
        unmatched with the existing inputs among the columns, then one state of each source
        component of the part still inaccessible (a second connection of an added input).
    inaccessible_states : tuple of str
        States that no existing input reaches in the state graph (for sensors: that no
        existing output sees).
    structurally_complete : bool
        True when the existing inputs (outputs) already make the model structurally
        controllable (observable).
    """

    kind: str
    minimum_count: int
    unmatched_states: tuple
    matching_size: int
    additional_count: int
    states_needing_signal: tuple
    inaccessible_states: tuple
    structurally_complete: bool

    def to_dict(self) -> dict:
        """JSON-safe dictionary."""
        return {"kind": self.kind, "minimum_count": self.minimum_count,
                "unmatched_states": list(self.unmatched_states),
                "matching_size": self.matching_size, "additional_count": self.additional_count,
                "states_needing_signal": list(self.states_needing_signal),
                "inaccessible_states": list(self.inaccessible_states),
                "structurally_complete": self.structurally_complete}


def _pattern(matrix) -> scipy.sparse.csr_array:
    """The nonzero pattern as a CSR array of ones (explicit zeros removed)."""
    if scipy.sparse.issparse(matrix):
        M = scipy.sparse.csr_array(matrix, copy=True)
        M.eliminate_zeros()
        M.data = np.ones_like(M.data)
        return M
    dense = np.asarray(matrix)
    rows, cols = np.nonzero(dense)
    return scipy.sparse.csr_array((np.ones(rows.size), (rows, cols)), shape=dense.shape)


def _unmatched_rows(biadjacency) -> np.ndarray:
    """Rows (edge heads) that a maximum matching leaves unmatched, and the matching size."""
    if biadjacency.shape[0] == 0:
        return np.zeros(0, dtype=int)
    if biadjacency.shape[1] == 0:
        return np.arange(biadjacency.shape[0])
    match = maximum_bipartite_matching(scipy.sparse.csr_array(biadjacency), perm_type="column")
    return np.flatnonzero(match < 0)


def _reached(graph, sources) -> np.ndarray:
    """Boolean mask of the nodes reachable from ``sources`` along edges tail -> head.

    ``graph[i, j] != 0`` is the edge ``j -> i`` (state i depends on state j), so the search
    runs on the transpose, where row ``j`` lists the heads of ``j``'s edges.
    """
    n = graph.shape[0]
    mask = np.zeros(n, dtype=bool)
    if not len(sources):
        return mask
    forward = scipy.sparse.csr_array(graph.T)
    # one super-source joined to every source: a single breadth-first search
    src = np.asarray(sources, dtype=int)
    extra_row = scipy.sparse.csr_array((np.ones(src.size), (np.zeros(src.size, dtype=int), src)),
                                       shape=(1, n))
    top = scipy.sparse.hstack([scipy.sparse.csr_array((1, 1)), extra_row])
    bottom = scipy.sparse.hstack([scipy.sparse.csr_array((n, 1)), forward])
    joined = scipy.sparse.csr_array(scipy.sparse.vstack([top, bottom]))
    order = breadth_first_order(joined, 0, directed=True, return_predecessors=False)
    mask[order[order > 0] - 1] = True
    return mask


def _source_components(graph, nodes: np.ndarray) -> list[int]:
    """One node of each source component (no edge entering from another component) of the
    subgraph of ``graph`` on ``nodes``; ``graph[i, j] != 0`` is the edge ``j -> i``."""
    if nodes.size == 0:
        return []
    sub = scipy.sparse.csr_array(graph[nodes][:, nodes])
    count, labels = connected_components(sub, directed=True, connection="strong")
    sub = sub.tocoo()
    entered = np.zeros(count, dtype=bool)
    cross = labels[sub.row] != labels[sub.col]
    entered[labels[sub.row[cross]]] = True       # the head's component has an entering edge
    chosen = []
    for comp in np.flatnonzero(~entered):
        chosen.append(int(nodes[np.flatnonzero(labels == comp)[0]]))
    return sorted(chosen)


def structural_placement(model, *, sensors: bool = False) -> StructuralPlacement:
    """Count the inputs (outputs) the sparsity pattern needs, by maximum matching.

    Parameters
    ----------
    model : StateSpaceModel (dense or sparse ``A``), python-control StateSpace, or tuple
    sensors : bool, optional
        False (default): inputs and structural controllability.  True: outputs and
        structural observability (the graph of ``A^T`` with the rows of ``C``).

    Returns
    -------
    StructuralPlacement

    Notes
    -----
    The state graph has the edge ``j -> i`` when ``A[i, j] != 0``.  A maximum matching of its
    bipartite form (heads against tails) is found by Hopcroft-Karp
    (:func:`scipy.sparse.csgraph.maximum_bipartite_matching`); the unmatched heads are the
    driver states of Liu, Slotine and Barabasi (2011), whose count (at least one) is the
    fewest independent inputs for structural controllability by Lin's theorem (1974).  With
    the existing inputs as extra tails, the unmatched heads are where new inputs must go;
    states no input reaches (breadth-first search) need one more connection per source
    component.  Everything is linear or ``O(|E| sqrt(n))`` in the pattern, so a sparse model
    of ``10^5`` states takes seconds.  See the module notes for what the pattern can and
    cannot tell.

    References
    ----------
    .. [1] C.-T. Lin, "Structural controllability", IEEE Trans. Automatic Control 19(3),
       201-208, 1974.
    .. [2] Y.-Y. Liu, J.-J. Slotine and A.-L. Barabasi, "Controllability of complex
       networks", Nature 473, 167-173, 2011.

    Examples
    --------
    A directed path needs one driver, at its start; an out-star with ``n`` states needs
    ``n - 1``:

    >>> import numpy as np
    >>> path = np.diag(np.ones(3), -1)          # x1 -> x2 -> x3 -> x4
    >>> s = structural_placement((path, np.zeros((4, 0)), np.zeros((0, 4))))
    >>> s.minimum_count, s.unmatched_states
    (1, ('x1',))
    >>> star = np.zeros((5, 5)); star[1:, 0] = 1.0   # x1 -> every other state
    >>> structural_placement((star, np.zeros((5, 0)), np.zeros((0, 5)))).minimum_count
    4
    """
    model = as_model(model, allow_sparse=True)
    kind = "sensor" if sensors else "actuator"
    n = model.n
    names = model.states
    if n == 0:
        return StructuralPlacement(kind, 0, (), 0, 0, (), (), True)
    graph = _pattern(model.A)
    signals = _pattern(model.C.T if sensors else model.B)       # n x (outputs or inputs)
    if sensors:
        graph = scipy.sparse.csr_array(graph.T)
    unmatched = _unmatched_rows(graph)
    minimum = max(int(unmatched.size), 1)
    with_signals = _unmatched_rows(scipy.sparse.hstack([graph, signals], format="csr"))
    driven = np.flatnonzero(np.asarray(signals.sum(axis=1)).ravel() > 0)
    inaccessible = np.flatnonzero(~_reached(graph, driven))
    # new inputs at the unmatched states; what they still leave unreached needs a connection
    still = np.flatnonzero(~_reached(graph, np.union1d(driven, with_signals)))
    roots = _source_components(graph, still)
    needing = [int(i) for i in with_signals] + [i for i in roots if i not in set(with_signals)]
    additional = int(with_signals.size) if with_signals.size else (1 if roots else 0)
    return StructuralPlacement(
        kind=kind,
        minimum_count=minimum,
        unmatched_states=tuple(names[i] for i in unmatched),
        matching_size=n - int(unmatched.size),
        additional_count=additional,
        states_needing_signal=tuple(names[i] for i in needing),
        inaccessible_states=tuple(names[i] for i in inaccessible),
        structurally_complete=additional == 0,
    )
