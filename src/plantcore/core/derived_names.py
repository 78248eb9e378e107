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
"""

from __future__ import annotations

import numpy as np

from plantcore.core.wording import ROUNDING_LEVEL

__all__ = ["COMBINATION", "derived_state_names"]

#: The name of state ``k`` (from 1) that is no single original state.
COMBINATION = "combination {k}"


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
    taken = set(original)
    names = []
    for k, name in enumerate(kept):
        if name is None:
            name = COMBINATION.format(k=k + 1)
            while name in taken:
                name += "'"
        taken.add(name)
        names.append(name)
    return tuple(names)
