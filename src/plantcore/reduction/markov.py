r"""Markov parameters: the impulse-response coefficients ``D, C B, C A B, C A^2 B, ...``.

For a model ``(A, B, C, D)`` the ``k``-th Markov parameter is ``h_0 = D`` and
``h_k = C A^{k-1} B`` for ``k >= 1``, a ``p x m`` matrix.  Their meaning depends on the time
domain:

* **discrete time**: ``h_k`` is the response at sample ``k`` to a unit pulse at sample 0
  (the pulse response), ``G(z) = sum_k h_k z^{-k}``;
* **continuous time**: ``h_k`` are the coefficients of the expansion of the transfer
  function at infinity, ``G(s) = sum_k h_k s^{-k}``; for ``k >= 1``, ``h_k`` is the
  ``(k-1)``-th derivative of the impulse response at ``t = 0+``.

In both cases two models have the same transfer function exactly when their Markov
parameters agree (for ``k <= n_a + n_b``), which is why a realization can be built from
them (:mod:`plantcore.reduction.impulse_realization`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import as_model

__all__ = ["MarkovParameters", "markov_parameters"]

#: Largest number of Markov parameters computed in one call (each is a p x m matrix).
MAX_MARKOV_COUNT = 1_000_000


@dataclass(frozen=True)
class MarkovParameters:
    """The first Markov parameters of a model (or of measured data).

    Attributes
    ----------
    values : (count, p, m) ndarray
        ``values[0] = D`` and ``values[k] = C A^{k-1} B``: ``values[k][i, j]`` is the
        response of output ``i`` to input ``j``.
    sample_time : float or None
        The sample time of a discrete-time model (the values are then pulse-response
        samples); ``None`` for continuous time (the values are expansion coefficients at
        infinity).
    inputs, outputs : tuple of str
        Names of the inputs (the last axis) and outputs (the middle axis).
    """

    values: np.ndarray = field(repr=False)
    sample_time: float | None
    inputs: tuple
    outputs: tuple

    @property
    def count(self) -> int:
        """Number of Markov parameters, ``D`` included."""
        return int(self.values.shape[0])

    @property
    def is_discrete(self) -> bool:
        """True for pulse-response samples of a discrete-time model."""
        return self.sample_time is not None


def markov_parameters(model, count) -> MarkovParameters:
    r"""The first ``count`` Markov parameters ``D, C B, C A B, ...`` of a model.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
        Continuous or discrete time, any number of inputs and outputs.
    count : int
        How many to compute, ``D`` included (at least 1).

    Returns
    -------
    MarkovParameters
        ``values`` of shape ``(count, p, m)``.

    Raises
    ------
    ValueError
        When ``count`` is not a whole number from 1 to ``MAX_MARKOV_COUNT``, or when the
        parameters overflow (``A`` with eigenvalues far outside the unit circle and many
        parameters asked for); the message says after how many.

    Notes
    -----
    Computed by the recursion ``X_1 = B``, ``X_{k+1} = A X_k``, ``h_k = C X_k``: ``count``
    products with the ``n x m`` block, ``O(count n^2 m)``; ``A^k`` is never formed.  The
    definition goes back to the realization problem of B. L. Ho and R. E. Kalman,
    "Effective construction of linear state-variable models from input/output functions",
    Regelungstechnik 14(12), 545-548, 1966.

    Examples
    --------
    For ``1/(s + 2)``: ``h_k = (-2)^{k-1}``, the coefficients of ``s^{-1} / (1 + 2/s)``.

    >>> from plantcore.reduction.markov import markov_parameters
    >>> markov_parameters(([[-2.0]], [[1.0]], [[1.0]]), 4).values[:, 0, 0].tolist()
    [0.0, 1.0, -2.0, 4.0]
    """
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)):
        raise TypeError(f"count must be a whole number of Markov parameters, got {count!r}.")
    if not 1 <= count <= MAX_MARKOV_COUNT:
        raise ValueError(f"count must lie between 1 and {MAX_MARKOV_COUNT}, got {count}.")
    model = as_model(model)
    p, m = model.n_outputs, model.n_inputs
    values = np.zeros((int(count), p, m))
    values[0] = model.D
    X = model.B.copy()
    with np.errstate(over="ignore", invalid="ignore"):
        for k in range(1, int(count)):
            values[k] = model.C @ X
            if not np.all(np.isfinite(values[k])):
                raise ValueError(
                    f"the Markov parameters overflow after {k} terms (A has eigenvalues far "
                    "outside the unit circle); ask for fewer, or rescale time.")
            X = model.A @ X
    return MarkovParameters(values, model.dt, model.inputs, model.outputs)
