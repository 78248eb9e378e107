r"""A generated large sparse example: the drying table of a circuit-board coating line.

Scenario (our own): a square aluminium table, 0.6 m x 0.6 m and 4 mm thick, carries freshly
coated circuit panels through a drying station.  Three heater strips are bonded underneath
(along the entry edge, across the middle and near the exit edge); four thermocouples read
the temperature at the corners of the panel area.  The edges are insulated; the top loses
heat to the air of the station by convection.

The temperature field ``T(x, y, t)`` above the air temperature obeys

.. math::

    \rho c d \, \partial_t T = k d \, \nabla^2 T - h_{conv} T + q_{heaters}(x, y, t)

discretized by the 5-point finite-difference stencil on an ``N x N`` grid of cells with
insulated (zero-flux) edges, so ``A = (k / (\rho c)) L / \Delta^2 - h_{conv} / (\rho c d) I``
is symmetric negative definite with about five nonzeros per row; the slowest mode is the
convective loss ``h_{conv}/(\rho c d) \approx 1.4 \cdot 10^{-3}`` 1/s (the uniform field) and the
fastest about ``8 k / (\rho c \Delta^2)``.  Inputs are heater powers (W), outputs sensor
temperatures (K above the air).  The grid is built on demand (nothing large is stored in
the package): ``size`` states give ``N = round(sqrt(size))``.

>>> from plantcore.examples.heated_plate import heated_plate
>>> plate = heated_plate(400)
>>> plate.n, plate.n_inputs, plate.n_outputs, plate.is_sparse
(400, 3, 4, True)
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse

from plantcore.core.model import StateSpaceModel

__all__ = ["DEFAULT_PLATE_SIZE", "heated_plate"]

#: States of the default plate (a 100 x 100 grid).
DEFAULT_PLATE_SIZE = 10_000

_SIDE = 0.6            # m
_THICKNESS = 0.004     # m
_CONDUCTIVITY = 205.0  # W/(m K), aluminium
_DENSITY = 2700.0      # kg/m^3
_HEAT_CAPACITY = 900.0  # J/(kg K)
_CONVECTION = 15.0     # W/(m^2 K), top surface in the station's air stream


def _neumann_laplacian(N: int) -> scipy.sparse.csr_array:
    """1-D second difference with zero-flux ends (rows sum to zero)."""
    main = -2.0 * np.ones(N)
    if N > 1:
        main[0] = main[-1] = -1.0
    else:
        main[0] = 0.0
    return scipy.sparse.diags_array([np.ones(N - 1), main, np.ones(N - 1)], offsets=[-1, 0, 1],
                                    shape=(N, N), format="csr")


def heated_plate(size: int = DEFAULT_PLATE_SIZE) -> StateSpaceModel:
    """The drying-table plate with about ``size`` states (``N x N`` cells, ``N = round(sqrt(size))``).

    Returns a sparse continuous-time model (seconds) with states ``T_r<row>_c<col>``, inputs
    ``heater_entry``, ``heater_middle``, ``heater_exit`` (W) and outputs ``sensor_1`` ..
    ``sensor_4`` (K).

    Raises
    ------
    ValueError
        When ``size`` is not a whole number of at least 16 (a 4 x 4 grid).
    """
    if isinstance(size, bool) or not isinstance(size, int | np.integer) or size < 16:
        raise ValueError(f"size must be a whole number of states, at least 16, got {size!r}.")
    N = max(4, round(math.sqrt(size)))
    n = N * N
    delta = _SIDE / N
    diffusivity = _CONDUCTIVITY / (_DENSITY * _HEAT_CAPACITY)
    loss = _CONVECTION / (_DENSITY * _HEAT_CAPACITY * _THICKNESS)
    L1 = _neumann_laplacian(N)
    eye = scipy.sparse.identity(N, format="csr")
    A = (diffusivity / delta ** 2) * (scipy.sparse.kron(eye, L1) + scipy.sparse.kron(L1, eye)) \
        - loss * scipy.sparse.identity(n)
    cell_capacity = _DENSITY * _HEAT_CAPACITY * _THICKNESS * delta ** 2  # J/K per cell
    B = np.zeros((n, 3))
    rows = {0: max(1, N // 10), 1: N // 2, 2: N - 1 - max(1, N // 10)}  # strip rows
    columns = np.arange(N // 8, N - N // 8)
    for k, row in rows.items():
        B[row * N + columns, k] = 1.0 / (columns.size * cell_capacity)  # power spread evenly
    C = np.zeros((4, n))
    a, b = N // 4, N - 1 - N // 4
    for k, (row, col) in enumerate([(a, a), (a, b), (b, a), (b, b + (N > 4))]):
        C[k, row * N + min(col, N - 1)] = 1.0
    states = [f"T_r{r + 1}_c{c + 1}" for r in range(N) for c in range(N)]
    return StateSpaceModel(scipy.sparse.csr_array(A), B, C, states=states,
                           inputs=["heater_entry", "heater_middle", "heater_exit"],
                           outputs=[f"sensor_{k + 1}" for k in range(4)],
                           name=f"drying table plate, {N} x {N} cells")
