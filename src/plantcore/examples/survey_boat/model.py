"""The survey boat's model: scenario, motion and measurement functions, their Jacobians,
the directions the real system cannot see, and the symbolic model for the Lie-derivative
rank (see :mod:`plantcore.examples.survey_boat` for the scenario).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["SurveyScenario", "DEFAULT_SCENARIO", "motion", "transition_jacobian", "noise_jacobian", "range_bearing", "measurement_jacobian", "state_names", "unobservable_basis", "jacobians_along", "SymbolicSurveyModel", "symbolic_model"]


@dataclass(frozen=True)
class SurveyScenario:
    """The survey: harbour layout, boat motion and sensor noise.

    Attributes
    ----------
    buoys : tuple of (x, y)
        True buoy positions in metres.
    start : (x, y, heading)
        The mooring the boat leaves from (m, m, rad).
    speed : float
        Commanded speed through the water, m/s.
    turn_rate : float
        Commanded turn rate, rad/s (a circle of ``2 pi speed / turn_rate`` metres).
    dt : float
        Step, seconds.
    speed_noise : float
        Standard deviation of the speed-log reading, m/s.
    turn_rate_noise : float
        Standard deviation of the rate-gyro reading, rad/s.
    range_noise : float
        Standard deviation of a range, m.
    bearing_noise : float
        Standard deviation of a bearing, rad.
    start_position_std, start_heading_std : float
        Uncertainty of the start position and of the compass heading (m, rad).
    """

    buoys: tuple = ((4.0, 2.0), (-7.0, 10.0), (-3.0, -4.0), (9.0, -12.0))
    start: tuple = (0.0, -10.0, 0.0)
    speed: float = 1.0
    turn_rate: float = 2.0 * math.pi / 60.0
    dt: float = 0.5
    speed_noise: float = 0.2
    turn_rate_noise: float = math.radians(5.0)
    range_noise: float = 0.3
    bearing_noise: float = math.radians(2.0)
    start_position_std: float = 0.3
    start_heading_std: float = math.radians(5.0)

    @property
    def n_buoys(self) -> int:
        return len(self.buoys)

    @property
    def n(self) -> int:
        return 3 + 2 * len(self.buoys)

    @property
    def measurement_covariance(self) -> np.ndarray:
        """Covariance of one step's stacked ranges and bearings, (2M, 2M)."""
        return np.kron(np.eye(self.n_buoys), np.diag([self.range_noise ** 2,
                                                        self.bearing_noise ** 2]))

    @property
    def input_covariance(self) -> np.ndarray:
        return np.diag([self.speed_noise ** 2, self.turn_rate_noise ** 2])

DEFAULT_SCENARIO = SurveyScenario()


def _wrap(angle):
    return (np.asarray(angle) + np.pi) % (2.0 * np.pi) - np.pi


def motion(state, inputs, dt: float) -> np.ndarray:
    """One step of the boat's motion; buoys stay put.  Returns the next state (n,)."""
    x = np.array(state, dtype=float)
    v, w = float(inputs[0]), float(inputs[1])
    th = x[2]
    x[0] += dt * v * math.cos(th)
    x[1] += dt * v * math.sin(th)
    x[2] = float(_wrap(th + dt * w))
    return x


def transition_jacobian(state, inputs, dt: float) -> np.ndarray:
    """Jacobian of :func:`motion` with respect to the state at ``(state, inputs)``, (n, n)."""
    x = np.asarray(state, dtype=float)
    F = np.eye(x.size)
    v = float(inputs[0])
    F[0, 2] = -dt * v * math.sin(x[2])
    F[1, 2] = dt * v * math.cos(x[2])
    return F


def noise_jacobian(state, dt: float) -> np.ndarray:
    """Jacobian of :func:`motion` with respect to the inputs, (n, 2)."""
    x = np.asarray(state, dtype=float)
    G = np.zeros((x.size, 2))
    G[0, 0] = dt * math.cos(x[2])
    G[1, 0] = dt * math.sin(x[2])
    G[2, 1] = dt
    return G


def range_bearing(state) -> np.ndarray:
    """Ranges and bearings (relative to the bow) of every buoy, ``[r1, b1, r2, b2, ...]``."""
    x = np.asarray(state, dtype=float)
    d = x[3:].reshape(-1, 2) - x[None, :2]
    z = np.empty(2 * d.shape[0])
    z[0::2] = np.hypot(d[:, 0], d[:, 1])
    z[1::2] = _wrap(np.arctan2(d[:, 1], d[:, 0]) - x[2])
    return z


def measurement_jacobian(state) -> np.ndarray:
    """Jacobian of :func:`range_bearing` with respect to the state, (2M, n)."""
    x = np.asarray(state, dtype=float)
    M = (x.size - 3) // 2
    H = np.zeros((2 * M, x.size))
    for i in range(M):
        dx, dy = x[3 + 2 * i] - x[0], x[4 + 2 * i] - x[1]
        q = dx * dx + dy * dy
        r = math.sqrt(q)
        H[2 * i, 0:2] = (-dx / r, -dy / r)
        H[2 * i, 3 + 2 * i:5 + 2 * i] = (dx / r, dy / r)
        H[2 * i + 1, 0:3] = (dy / q, -dx / q, -1.0)
        H[2 * i + 1, 3 + 2 * i:5 + 2 * i] = (-dy / q, dx / q)
    return H


def state_names(n_buoys: int) -> tuple:
    """Names of the states, for reports: ``boat x, boat y, heading, buoy1 x, ...``."""
    names = ["boat x", "boat y", "heading"]
    for i in range(n_buoys):
        names += [f"buoy{i + 1} x", f"buoy{i + 1} y"]
    return tuple(names)


def unobservable_basis(state) -> np.ndarray:
    """The three directions the real system cannot see, at ``state``, (n, 3).

    Columns: a common shift in x, a common shift in y, and a common rotation about the
    origin (``d(px, py) = (-py, px)``, ``d heading = 1``, ``d(bx, by) = (-by, bx)``); Huang,
    Mourikis and Roumeliotis (2010), section 4.
    """
    x = np.asarray(state, dtype=float)
    n = x.size
    N = np.zeros((n, 3))
    N[0, 0] = N[1, 1] = 1.0
    N[3::2, 0] = 1.0
    N[4::2, 1] = 1.0
    N[0, 2], N[1, 2], N[2, 2] = -x[1], x[0], 1.0
    N[3::2, 2] = -x[4::2]
    N[4::2, 2] = x[3::2]
    return N


def jacobians_along(states, inputs, dt: float):
    """Transition and measurement Jacobians evaluated along given states and inputs.

    Parameters
    ----------
    states : (K, n) array_like
        The linearization points ``x_0 .. x_{K-1}``.
    inputs : (K, 2) array_like
        The inputs ``u_0 .. u_{K-1}`` used in the transition Jacobians.
    dt : float

    Returns
    -------
    (F, H) : ((K, n, n) ndarray, (K, 2M, n) ndarray)
        ``F[k] = transition_jacobian(states[k], inputs[k])``,
        ``H[k] = measurement_jacobian(states[k])``.  The sequence is *consistent* (keeps
        three unobservable directions) only when ``states[k + 1] = motion(states[k],
        inputs[k])``.
    """
    X = np.asarray(states, dtype=float)
    U = np.asarray(inputs, dtype=float)
    F = np.stack([transition_jacobian(X[k], U[k], dt) for k in range(X.shape[0])])
    H = np.stack([measurement_jacobian(X[k]) for k in range(X.shape[0])])
    return F, H


@dataclass(frozen=True)
class SymbolicSurveyModel:
    """The continuous-time survey model in sympy, ready for ``nonlinear_observability``.

    Attributes
    ----------
    f : sympy.Matrix
        ``dx/dt``: ``[v cos(psi), v sin(psi), omega, 0, ..., 0]``.
    h : sympy.Matrix
        The measurement (relative positions in the boat frame, or ranges and bearings).
    states : tuple of sympy.Symbol
    inputs : tuple of sympy.Symbol
        ``(v, omega)``.
    """

    f: object
    h: object
    states: tuple
    inputs: tuple


def symbolic_model(buoys: int = 2, measurement: str = "relative_position") -> SymbolicSurveyModel:
    """The survey model with ``buoys`` buoys in sympy.

    ``measurement="relative_position"`` measures each buoy's position in the boat frame,
    ``R(psi)^T (b_i - p)``; ``"range_bearing"`` its range and bearing.  Both are invariant
    under a common shift and rotation, so both leave three directions unobservable.
    """
    import sympy

    kinds = ("relative_position", "range_bearing")
    if measurement not in kinds:
        raise ValueError(f"measurement must be one of {', '.join(kinds)}, got {measurement!r}.")
    if isinstance(buoys, bool) or not isinstance(buoys, int) or buoys < 1:
        raise ValueError(f"buoys must be a positive integer, got {buoys!r}.")
    px, py, psi = sympy.symbols("p_x p_y psi", real=True)
    v, omega = sympy.symbols("v omega", real=True)
    bs = [sympy.symbols(f"b{i + 1}_x b{i + 1}_y", real=True) for i in range(buoys)]
    states = (px, py, psi) + tuple(s for pair in bs for s in pair)
    f = sympy.Matrix([v * sympy.cos(psi), v * sympy.sin(psi), omega] + [0] * (2 * buoys))
    rows = []
    c, s = sympy.cos(psi), sympy.sin(psi)
    for bx, by in bs:
        dx, dy = bx - px, by - py
        if measurement == "relative_position":
            rows += [c * dx + s * dy, -s * dx + c * dy]
        else:
            rows += [sympy.sqrt(dx ** 2 + dy ** 2), sympy.atan2(dy, dx) - psi]
    return SymbolicSurveyModel(f=f, h=sympy.Matrix(rows), states=states, inputs=(v, omega))
