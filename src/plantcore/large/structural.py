"""Exact structural pre-reduction and structural (generic) verdicts of sparse models.

The sparsity graph of ``(A, B, C)`` has an edge ``x_j -> x_i`` for every nonzero ``A[i, j]``,
an edge ``u_k -> x_i`` for every nonzero ``B[i, k]`` and ``x_j -> y_l`` for every nonzero
``C[l, j]``.  Nothing here rounds: an entry is in the graph when it is not exactly zero.

* A state that no input reaches along the graph is exactly uncontrollable: ordering the
  reached states ``R`` first, ``A[U, R] = 0`` and ``B[U] = 0``, so ``x_U`` never leaves zero.
* A state from which no output is reached is exactly unobservable (the dual argument:
  ``A[O, N] = 0`` and ``C[:, N] = 0``).

Both are removed without changing the transfer matrix, for every value of the nonzero
entries.  On what remains, Lin's conditions decide structural controllability: every state
reached from an input (true after the removal) and no dilation, i.e. the generic rank of
``[A, B]`` is ``n`` (the size of a maximum matching of its bipartite row/column graph).
Observability is the dual, with ``[A; C]``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse
from scipy.sparse.csgraph import breadth_first_order, structural_rank

from plantcore.core.model import StateSpaceModel, as_model

__all__ = ["StructuralReduction", "structural_reduction"]


@dataclass(frozen=True)
class StructuralReduction:
    """What the sparsity graph alone proves about a model, and the model without the rest.

    Attributes
    ----------
    model : StateSpaceModel
        The model restricted to the kept states, sparse when the input was sparse; same
        inputs, outputs, ``D`` and time domain, and the same transfer matrix exactly.
    original_order, order : int
        Number of states before and after.
    kept_indices : (order,) ndarray of int
        Positions of the kept states in the original model, ascending.
    not_reached : tuple of str
        Names of the removed states that no input reaches (exactly uncontrollable).
    not_observed : tuple of str
        Names of the removed states that every input path may reach but from which no
        output is reached (exactly unobservable); a state in both groups is listed in
        ``not_reached`` only.
    structurally_controllable, structurally_observable : bool
        Lin's verdicts on the kept model.  True means controllable (observable) for almost
        every value of the nonzero entries, not for these values: a symmetric placement can
        still hide modes, which only a numerical test (Hankel singular values) shows.  False
        is exact: uncontrollable (unobservable) for every value.
    controllability_generic_rank, observability_generic_rank : int
        Generic ranks of ``[A, B]`` and ``[A; C]`` of the kept model (``order`` when there is
        no dilation).
    """

    model: StateSpaceModel = field(repr=False)
    original_order: int
    order: int
    kept_indices: np.ndarray = field(repr=False)
    not_reached: tuple
    not_observed: tuple
    structurally_controllable: bool
    structurally_observable: bool
    controllability_generic_rank: int
    observability_generic_rank: int

    @property
    def removed(self) -> int:
        """Number of removed states."""
        return self.original_order - self.order


def _pattern(M) -> scipy.sparse.csr_array:
    """0/1 pattern of the exactly nonzero entries."""
    M = scipy.sparse.csr_array(M, dtype=float, copy=True)
    M.eliminate_zeros()
    return scipy.sparse.csr_array((np.ones(M.nnz), M.indices, M.indptr), shape=M.shape)


def _reached(adjacency, seeds: np.ndarray) -> np.ndarray:
    """Boolean mask of the nodes reachable from ``seeds`` along ``adjacency[i, j]`` (i -> j)."""
    n = adjacency.shape[0]
    mask = np.zeros(n, dtype=bool)
    if not seeds.size:
        return mask
    # one super source with an edge to every seed, then one breadth-first search
    source = scipy.sparse.csr_array((np.ones(seeds.size), (np.zeros(seeds.size, dtype=int), seeds)),
                                    shape=(1, n + 1))
    graph = scipy.sparse.vstack([scipy.sparse.hstack([adjacency, scipy.sparse.csr_array((n, 1))]),
                                 source]).tocsr()
    order = breadth_first_order(graph, n, directed=True, return_predecessors=False)
    mask[order[order < n]] = True
    return mask


def structural_reduction(model) -> StructuralReduction:
    """Remove the states the sparsity graph proves uncontrollable or unobservable.

    Parameters
    ----------
    model : StateSpaceModel (sparse or dense), or tuple (A, B, C[, D])

    Returns
    -------
    StructuralReduction

    Notes
    -----
    Reachability by breadth-first search on the sparsity graph (``scipy.sparse.csgraph``),
    ``O(nnz)``; generic ranks by maximum bipartite matching
    (``scipy.sparse.csgraph.structural_rank``).  Exact: no tolerance is involved, so there
    is no margin to record and nothing is fragile.  Structural controllability after Lin
    (accessibility from the inputs and no dilation, i.e. generic rank ``n`` of ``[A, B]``);
    for more than one input this is Shields and Pearson's extension.

    References
    ----------
    .. [1] C.-T. Lin, "Structural controllability", IEEE Trans. Automatic Control 19(3),
       201-208, 1974.
    .. [2] R. W. Shields and J. B. Pearson, "Structural controllability of multiinput linear
       systems", IEEE Trans. Automatic Control 21(2), 203-212, 1976.

    Examples
    --------
    >>> import numpy as np, scipy.sparse
    >>> import plantcore as pc
    >>> A = scipy.sparse.csr_array(np.array([[-1.0, 0, 0], [1.0, -2.0, 0], [0, 0, -3.0]]))
    >>> red = pc.structural_reduction(pc.StateSpaceModel(A, [[1.0], [0], [0]], [[0, 1.0, 0]]))
    >>> red.order, red.not_reached
    (2, ('x3',))
    """
    model = as_model(model, allow_sparse=True)
    n = model.n
    A = _pattern(model.A) if n else scipy.sparse.csr_array((0, 0))
    driven = np.flatnonzero(np.any(model.B != 0, axis=1))
    seen = np.flatnonzero(np.any(model.C != 0, axis=0))
    # A[i, j] != 0 is the edge x_j -> x_i: forward search on A^T, backward search on A.
    reached = _reached(A.T.tocsr(), driven)
    observed = _reached(A, seen)
    keep = np.flatnonzero(reached & observed)
    names = np.array(model.states, dtype=object)
    not_reached = tuple(names[~reached].tolist())
    not_observed = tuple(names[reached & ~observed].tolist())
    if keep.size == n:
        kept = model
    else:
        A_kept = model.A[keep][:, keep] if model.is_sparse else model.A[np.ix_(keep, keep)]
        kept = StateSpaceModel(A_kept, model.B[keep], model.C[:, keep], model.D, model.dt,
                               states=[model.states[i] for i in keep], inputs=model.inputs,
                               outputs=model.outputs, name=model.name)
    r = keep.size
    if r:
        A_r = _pattern(kept.A)
        rank_c = int(structural_rank(scipy.sparse.hstack([A_r, _pattern(kept.B)]).tocsr()))
        rank_o = int(structural_rank(scipy.sparse.vstack([A_r, _pattern(kept.C)]).tocsr()))
    else:
        rank_c = rank_o = 0
    return StructuralReduction(kept, n, r, keep, not_reached, not_observed, rank_c == r,
                               rank_o == r, rank_c, rank_o)
