"""State names of models in new coordinates (minimal realizations, Kalman decompositions).

A state of a reduced or transformed model is either one of the original states, kept
unchanged, or a combination of them.  The scheme, the same for every result:

* **An original state kept unchanged keeps its name.**  New state ``k`` is original state
  ``i`` when the new coordinates give ``z_k = x_i`` and ``x_i = z_k`` on what is kept: the
  ``k``-th row of the left basis (``W.T``, ``T_inv``) and the ``k``-th column of the right
  basis (``V``, ``T``) are the unit vector of ``x_i`` up to the rounding level
  (:data:`plantcore.core.wording.ROUNDING_LEVEL`, the one rule for values at rounding level).
  A state that is a rescaled or sign-flipped original state (``z_k = -x_i``) is a
  combination: calling it ``x_i`` would give the wrong sign or unit.
* **Every other state is** ``"combination k"``, numbered by its position ``k`` (from 1) in
  the new model, so the name says which row and column of ``A`` it is.  Which original
  states it combines is the ``k``-th column of the right basis (the reports list it).
* Names stay unique: a generated name that an original state already uses gets a ``'``
  appended until it is free.

Balanced reductions (balanced truncation and residualization, dense or from low-rank
factors) keep no original state: every balanced state mixes them, weighted by what the
inputs excite and the outputs see.  Their states are named after what they are:

* ``"balanced k"`` for the ``k``-th stable balanced state (from 1), the one whose Hankel
  singular value is ``sigma_k`` (largest first); these come first in the reduced model, so
  ``k`` is also its position.
* ``"unstable k"`` for each state of the unstable part that a balanced reduction keeps
  unreduced after the stable ones (Schur coordinates of that part, no Hankel singular
  value); ``k`` is its position in the reduced model, as for ``"combination k"``.
* The same ``'`` rule keeps them unique against the given model's names.  (They never
  collide with the ``"combination k"`` of a minimal realization reduced further.)
"""

from __future__ import annotations

import numpy as np

from plantcore.core.wording import ROUNDING_LEVEL

__all__ = ["BALANCED", "COMBINATION", "UNSTABLE", "balanced_state_names",
           "derived_state_names"]

#: The name of state ``k`` (from 1) that is no single original state.
COMBINATION = "combination {k}"

#: The name of the stable balanced state with the ``k``-th Hankel singular value (from 1).
BALANCED = "balanced {k}"

#: The name of the state at position ``k`` (from 1) of an unstable part kept unreduced.
UNSTABLE = "unstable {k}"


def _unit_index(column: np.ndarray, level: float) -> int | None:
    """Index ``i`` when ``column`` is the unit vector ``e_i`` up to ``level``, else None."""
    if column.size == 0:
        return None
    i = int(np.argmax(np.abs(column)))
    if abs(column[i] - 1.0) > level:
        return None
    rest = np.abs(np.delete(column, i))
    return i if rest.size == 0 or float(rest.max()) <= level else None


def derived_state_names(original, right, left) -> tuple:
    """Names of the new states ``z = left.T @ x`` with ``x = right @ z`` on what is kept.

    Parameters
    ----------
    original : sequence of str
        The original model's state names (length ``n``).
    right : (n, r) array_like
        Columns: each new state in original coordinates (``V`` of a minimal realization,
        ``T`` of a Kalman decomposition).
    left : (n, r) array_like
        Columns: the rows that map original states to new ones (``W``; ``T_inv.T``).

    Returns
    -------
    tuple of str
        ``r`` names, following the scheme of the module documentation.

    Examples
    --------
    >>> import numpy as np
    >>> V = np.array([[0.0, 0.6], [1.0, 0.0], [0.0, 0.8]])
    >>> derived_state_names(["pos", "vel", "flex"], V, V)
    ('vel', 'combination 2')
    >>> derived_state_names(["pos", "vel", "flex"], -V, -V)
    ('combination 1', 'combination 2')
    """
    original = tuple(original)
    right = np.asarray(right, dtype=float)
    left = np.asarray(left, dtype=float)
    r = right.shape[1] if right.ndim == 2 else 0
    kept = [None] * r
    used = set()
    for k in range(r):
        i = _unit_index(right[:, k], ROUNDING_LEVEL)
        if i is not None and i not in used and _unit_index(left[:, k], ROUNDING_LEVEL) == i:
            kept[k] = original[i]
            used.add(i)
    return _unique(original, [name or COMBINATION.format(k=k + 1) for k, name in enumerate(kept)],
                   generated=[name is None for name in kept])


def balanced_state_names(original, stable: int, unstable: int = 0) -> tuple:
    """Names of the states of a balanced reduction: ``stable`` balanced states first,
    then ``unstable`` states of the unstable part kept unreduced.

    Parameters
    ----------
    original : sequence of str
        The original model's state names (only to keep the new names unique).
    stable, unstable : int
        Numbers of stable balanced states and of unstable states kept.

    Returns
    -------
    tuple of str
        ``"balanced 1"``, ... ``"balanced <stable>"``, then ``"unstable k"`` by position,
        as the module documentation describes.

    Examples
    --------
    >>> balanced_state_names(["balanced 1", "speed"], 2, 1)
    ("balanced 1'", 'balanced 2', 'unstable 3')
    """
    names = ([BALANCED.format(k=k + 1) for k in range(int(stable))]
             + [UNSTABLE.format(k=int(stable) + k + 1) for k in range(int(unstable))])
    return _unique(tuple(original), names, generated=[True] * len(names))


def _unique(original, names, generated) -> tuple:
    """``names`` with ``'`` appended to each generated one until no other name uses it."""
    taken = set(original)
    out = []
    for name, new in zip(names, generated):
        if new:
            while name in taken:
                name += "'"
        taken.add(name)
        out.append(name)
    return tuple(out)
