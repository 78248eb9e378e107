"""Demo: a survey boat that maps buoys while locating itself (planar EKF-SLAM).

A small survey boat leaves its mooring and circles a harbour basin in which four buoys float
at unknown positions.  Where it starts is known to about 0.3 m, but its heading only from a
hand-bearing compass, to about 5 degrees.  Its own motion comes from a speed log and a rate
gyro, disturbed by currents and waves; a range-and-bearing sensor on the mast sees every
buoy at every step.  The boat estimates its pose and the buoy positions together with an
extended Kalman filter.  This is the planar simultaneous localization and mapping problem, in
which the real system cannot see three directions (a common shift of everything in x, in y,
and a common rotation about the origin): however long the boat surveys, ranges and bearings
to buoys at unknown positions never tell it its absolute heading better than the compass
did.  The standard filter's linearization, taken at estimates that jump at every update, sees
only two of the three directions, so the filter believes it learns the absolute heading: its
heading standard deviation shrinks well below the compass's 5 degrees while the actual error
stays.  The observability-constrained filter corrects its Jacobians with
:func:`plantcore.estimation.constrain_observability` so that all three stay unobservable.  :func:`run_demo` compares the two in a small seeded Monte
Carlo: audits of the Jacobians each used, the normalized estimation error squared (NEES) of
the boat pose against its chi-square bounds, and heading errors against each filter's own
three-sigma bound.

State ``x = [px, py, heading, b1x, b1y, ..., bMx, bMy]`` (metres, radians), inputs
``u = [speed, turn_rate]`` (m/s, rad/s), one step of ``dt`` seconds:

.. math::

    p_{k+1} = p_k + dt\\, v_k [\\cos\\psi_k, \\sin\\psi_k]^T, \\qquad
    \\psi_{k+1} = \\psi_k + dt\\, \\omega_k,

and for buoy ``i`` the range ``|b_i - p|`` and bearing ``atan2(b_iy - p_y, b_ix - p_x) - psi``
(relative to the bow).  The scenario (harbour, buoys, noise levels) is our own invention.

References
----------
G. P. Huang, A. I. Mourikis and S. I. Roumeliotis, "Observability-based rules for designing
consistent EKF SLAM estimators", International Journal of Robotics Research 29(5), 502-528,
2010.  Y. Bar-Shalom, X. R. Li and T. Kirubarajan, "Estimation with Applications to Tracking
and Navigation", Wiley, 2001 (chapter 5: filter consistency, the NEES test).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.estimation import (
    ObservabilityAudit,
    audit_linearized_observability,
    constrain_observability,
)
from plantcore.core.wording import SAFETY_CAUTION

__all__ = [
    "SurveyScenario",
    "DEFAULT_SCENARIO",
    "SurveyRun",
    "FilterRun",
    "SurveyBoatDemo",
    "SymbolicSurveyModel",
    "motion",
    "transition_jacobian",
    "noise_jacobian",
    "range_bearing",
    "measurement_jacobian",
    "unobservable_basis",
    "state_names",
    "jacobians_along",
    "simulate",
    "run_filter",
    "run_demo",
    "nees_bounds",
    "symbolic_model",
    "plot_heading_error",
    "plot_nees",
]


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


# ---------------------------------------------------------------------------------------------
# The model and its Jacobians
# ---------------------------------------------------------------------------------------------

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


# ---------------------------------------------------------------------------------------------
# Simulation and the two filters
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SurveyRun:
    """One simulated survey.

    Attributes
    ----------
    states : (steps + 1, n) ndarray
        True states ``x_0 .. x_steps``.
    inputs : (steps + 1, 2) ndarray
        True inputs (``inputs[k]`` moves the boat from ``k`` to ``k + 1``; the last one is
        used only for the final transition Jacobian).
    measured_inputs : (steps + 1, 2) ndarray
        Speed-log and rate-gyro readings.
    measurements : (steps + 1, 2M) ndarray
        Ranges and bearings at every step (``measurements[0]`` places the buoys).
    start_estimate : (3,) ndarray
        The boat's initial pose estimate.
    """

    states: np.ndarray = field(repr=False)
    inputs: np.ndarray = field(repr=False)
    measured_inputs: np.ndarray = field(repr=False)
    measurements: np.ndarray = field(repr=False)
    start_estimate: np.ndarray = field(repr=False)


def simulate(scenario: SurveyScenario, steps: int, rng) -> SurveyRun:
    """Simulate one survey of ``steps`` steps with the generator ``rng``."""
    sc = scenario
    n = sc.n
    x = np.concatenate([np.asarray(sc.start, float), np.asarray(sc.buoys, float).ravel()])
    states = np.empty((steps + 1, n))
    states[0] = x
    inputs = np.tile([sc.speed, sc.turn_rate], (steps + 1, 1))
    measured = inputs + rng.normal(0.0, [sc.speed_noise, sc.turn_rate_noise], size=(steps + 1, 2))
    for k in range(steps):
        states[k + 1] = motion(states[k], inputs[k], sc.dt)
    noise_std = np.tile([sc.range_noise, sc.bearing_noise], sc.n_buoys)
    z = np.stack([range_bearing(s) for s in states]) + rng.normal(0.0, noise_std,
                                                                  size=(steps + 1, noise_std.size))
    z[:, 1::2] = _wrap(z[:, 1::2])
    start = states[0, :3] + rng.normal(0.0, [sc.start_position_std, sc.start_position_std,
                                             sc.start_heading_std])
    return SurveyRun(states, inputs, measured, z, start)


@dataclass(frozen=True)
class FilterRun:
    """What one filter did in one survey.

    Attributes
    ----------
    estimates : (steps + 1, n) ndarray
        Posterior estimates ``x_{k|k}``.
    pose_covariances : (steps + 1, 3, 3) ndarray
        The filter's own covariance of the boat pose.
    priors : (steps + 1, n) ndarray
        Prior estimates ``x_{k|k-1}`` (row 0: the initial estimate).
    transition_jacobians : (steps, n, n) ndarray
        In the audit's convention: entry ``j`` is the Jacobian the filter used to predict from
        step ``j + 1`` to ``j + 2`` (after the update with the measurement of ``j + 1``).
    measurement_jacobians : (steps, 2M, n) ndarray
        Entry ``j`` is the Jacobian of the update at step ``j + 1``.
    nullspaces : (steps + 1, n, 3) ndarray
        ``unobservable_basis`` at the point of each measurement Jacobian, and last at the
        prediction beyond the horizon.
    transition_corrections, measurement_corrections : (steps,) ndarray
        Relative size of the observability constraint's corrections (zeros for the standard
        filter).
    """

    estimates: np.ndarray = field(repr=False)
    pose_covariances: np.ndarray = field(repr=False)
    priors: np.ndarray = field(repr=False)
    transition_jacobians: np.ndarray = field(repr=False)
    measurement_jacobians: np.ndarray = field(repr=False)
    nullspaces: np.ndarray = field(repr=False)
    transition_corrections: np.ndarray = field(repr=False)
    measurement_corrections: np.ndarray = field(repr=False)


def _initialize(run: SurveyRun, sc: SurveyScenario):
    """Place the buoys from the first ranges and bearings; pose covariance from the mooring."""
    n = sc.n
    x = np.zeros(n)
    x[:3] = run.start_estimate
    P0 = np.diag([sc.start_position_std, sc.start_position_std, sc.start_heading_std]) ** 2
    T = np.zeros((n, n))
    T[:3, :3] = np.eye(3)
    extra = np.zeros((n, n))
    z = run.measurements[0]
    Rz = np.diag([sc.range_noise ** 2, sc.bearing_noise ** 2])
    for i in range(sc.n_buoys):
        r, b = z[2 * i], z[2 * i + 1]
        a = x[2] + b
        c, s = math.cos(a), math.sin(a)
        x[3 + 2 * i] = x[0] + r * c
        x[4 + 2 * i] = x[1] + r * s
        rows = slice(3 + 2 * i, 5 + 2 * i)
        T[rows, :3] = [[1.0, 0.0, -r * s], [0.0, 1.0, r * c]]
        Jz = np.array([[c, -r * s], [s, r * c]])
        extra[rows, rows] = Jz @ Rz @ Jz.T
    P = np.zeros((n, n))
    P[:3, :3] = P0
    return x, T @ P @ T.T + extra


def run_filter(run: SurveyRun, scenario: SurveyScenario = DEFAULT_SCENARIO, *,
               constrained: bool = False) -> FilterRun:
    """Run the standard (or the observability-constrained) extended Kalman filter.

    The constrained filter replaces, at every step, the measurement Jacobian ``H_k`` and the
    transition Jacobian ``F_k`` by their minimal corrections from
    :func:`plantcore.estimation.constrain_observability`, with ``N_k`` the unobservable basis
    at the prior estimate where ``H_k`` is evaluated, so that ``F'_k N_k = N_{k+1}`` and
    ``H'_k N_k = 0``.  Everything else (means, noise Jacobians, innovations) is identical.
    """
    sc = scenario
    n = sc.n
    steps = run.states.shape[0] - 1
    p = 2 * sc.n_buoys
    Rm = sc.measurement_covariance
    Qu = sc.input_covariance
    x, P = _initialize(run, sc)
    est = np.empty((steps + 1, n))
    priors = np.empty((steps + 1, n))
    covs = np.empty((steps + 1, 3, 3))
    est[0] = priors[0] = x
    covs[0] = P[:3, :3]
    F_used = np.empty((steps + 1, n, n))
    H_used = np.empty((steps, p, n))
    N_seq = np.empty((steps + 2, n, 3))
    f_corr = np.zeros(steps + 1)
    h_corr = np.zeros(steps)
    N_seq[0] = unobservable_basis(x)
    eye = np.eye(n)
    for t in range(steps + 1):
        # prediction from t to t + 1 (the one after the last step only yields the Jacobian)
        u = run.measured_inputs[t]
        F = transition_jacobian(x, u, sc.dt)
        x_next = motion(x, u, sc.dt)
        N_next = unobservable_basis(x_next)
        if constrained:
            fixed = constrain_observability(F[None], np.zeros((1, 0, n)),
                                            np.stack([N_seq[t], N_next]))
            F = fixed.transition_jacobians[0]
            f_corr[t] = fixed.transition_corrections[0]
        F_used[t] = F
        N_seq[t + 1] = N_next
        if t == steps:
            break
        G = noise_jacobian(x, sc.dt)
        P = F @ P @ F.T + G @ Qu @ G.T
        x = x_next
        priors[t + 1] = x
        # update at t + 1
        H = measurement_jacobian(x)
        if constrained:
            fixed = constrain_observability(eye[None], H[None], N_seq[t + 1][None])
            H = fixed.measurement_jacobians[0]
            h_corr[t] = fixed.measurement_corrections[0]
        H_used[t] = H
        innovation = run.measurements[t + 1] - range_bearing(x)
        innovation[1::2] = _wrap(innovation[1::2])
        S = H @ P @ H.T + Rm
        K = np.linalg.solve(S, H @ P).T
        x = x + K @ innovation
        x[2] = float(_wrap(x[2]))
        IKH = eye - K @ H
        P = IKH @ P @ IKH.T + K @ Rm @ K.T      # Joseph form: stays symmetric positive
        est[t + 1] = x
        covs[t + 1] = P[:3, :3]
    return FilterRun(estimates=est, pose_covariances=covs, priors=priors,
                     transition_jacobians=F_used[1:], measurement_jacobians=H_used,
                     nullspaces=N_seq[1:], transition_corrections=f_corr[1:],
                     measurement_corrections=h_corr)


def nees_bounds(runs: int, dimension: int = 3, probability: float = 0.95):
    """Two-sided chi-square bounds for the NEES averaged over ``runs`` Monte Carlo runs.

    ``runs`` times the average NEES of a consistent filter is chi-square distributed with
    ``runs * dimension`` degrees of freedom (Bar-Shalom, Li and Kirubarajan, 2001, ch. 5).

    Examples
    --------
    >>> low, high = nees_bounds(1, dimension=1, probability=0.95)
    >>> round(high, 2)      # the 97.5 % point of chi-square with one degree of freedom
    5.02
    """
    from scipy.stats import chi2

    tail = (1.0 - probability) / 2.0
    dof = runs * dimension
    return float(chi2.ppf(tail, dof) / runs), float(chi2.ppf(1.0 - tail, dof) / runs)


def _pose_error(truth: np.ndarray, estimate: np.ndarray) -> np.ndarray:
    e = truth[:, :3] - estimate[:, :3]
    e[:, 2] = _wrap(e[:, 2])
    return e


# ---------------------------------------------------------------------------------------------
# The demo
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SurveyBoatDemo:
    """Results of :func:`run_demo`.

    Attributes
    ----------
    scenario : SurveyScenario
    seed, runs, steps : int
    time : (steps,) ndarray
        Seconds since leaving the mooring, for the steps ``1 .. steps``.
    nees_standard, nees_constrained : (runs, steps) ndarray
        NEES of the boat pose (3 degrees of freedom) of each run and step.
    nees_bounds : (float, float)
        Two-sided 95 % chi-square bounds of the NEES averaged over the runs.
    heading_error_standard, heading_error_constrained : (runs, steps) ndarray
        True minus estimated heading, radians.
    heading_std_standard, heading_std_constrained : (runs, steps) ndarray
        Each filter's own standard deviation of its heading, radians.
    audit_truth : ObservabilityAudit
        Jacobians along the true trajectory with the true inputs (run 0): consistent.
    audit_standard, audit_constrained : ObservabilityAudit
        Jacobians each filter used (run 0), against the basis at its first update.
    first_run : SurveyRun
        The simulated data of run 0.
    first_standard, first_constrained : FilterRun
        What each filter did in run 0.
    """

    scenario: SurveyScenario
    seed: int
    runs: int
    steps: int
    time: np.ndarray = field(repr=False)
    nees_standard: np.ndarray = field(repr=False)
    nees_constrained: np.ndarray = field(repr=False)
    nees_bounds: tuple
    heading_error_standard: np.ndarray = field(repr=False)
    heading_error_constrained: np.ndarray = field(repr=False)
    heading_std_standard: np.ndarray = field(repr=False)
    heading_std_constrained: np.ndarray = field(repr=False)
    audit_truth: ObservabilityAudit = field(repr=False)
    audit_standard: ObservabilityAudit = field(repr=False)
    audit_constrained: ObservabilityAudit = field(repr=False)
    first_run: SurveyRun = field(repr=False)
    first_standard: FilterRun = field(repr=False)
    first_constrained: FilterRun = field(repr=False)

    @property
    def average_nees_standard(self) -> np.ndarray:
        """NEES averaged over the runs, per step (steps,)."""
        return self.nees_standard.mean(axis=0)

    @property
    def average_nees_constrained(self) -> np.ndarray:
        return self.nees_constrained.mean(axis=0)

    @property
    def mean_nees_standard(self) -> float:
        """Run-averaged NEES, then averaged over time (3 for a consistent filter)."""
        return float(self.average_nees_standard.mean())

    @property
    def mean_nees_constrained(self) -> float:
        return float(self.average_nees_constrained.mean())

    def fraction_within_bounds(self, which: str) -> float:
        """Share of steps whose run-averaged NEES lies within the chi-square bounds."""
        avg = {"standard": self.average_nees_standard,
               "constrained": self.average_nees_constrained}[which]
        lo, hi = self.nees_bounds
        return float(np.mean((avg >= lo) & (avg <= hi)))

    def fraction_outside_three_sigma(self, which: str) -> float:
        """Share of (run, step) pairs whose heading error exceeds the filter's own 3 sigma."""
        err, std = {"standard": (self.heading_error_standard, self.heading_std_standard),
                    "constrained": (self.heading_error_constrained,
                                    self.heading_std_constrained)}[which]
        return float(np.mean(np.abs(err) > 3.0 * std))

    def to_text(self) -> str:
        """A plain-text summary with the safety caution."""
        lo, hi = self.nees_bounds
        lines = [
            f"Survey boat demo: {self.runs} runs of {self.steps} steps, seed {self.seed}, "
            f"{self.scenario.n_buoys} buoys",
            f"boat-pose NEES averaged over runs and time (3 when consistent; 95% bounds per step "
            f"{lo:.2f} .. {hi:.2f}):",
            f"  standard filter      {self.mean_nees_standard:7.2f}   steps within bounds "
            f"{100 * self.fraction_within_bounds('standard'):5.1f}%   heading outside 3 sigma "
            f"{100 * self.fraction_outside_three_sigma('standard'):5.1f}%",
            f"  constrained filter   {self.mean_nees_constrained:7.2f}   steps within bounds "
            f"{100 * self.fraction_within_bounds('constrained'):5.1f}%   heading outside 3 sigma "
            f"{100 * self.fraction_outside_three_sigma('constrained'):5.1f}%",
            "audit of the Jacobians (run 0): unobservable directions kept / expected",
        ]
        for label, audit in (("true trajectory", self.audit_truth),
                             ("standard filter", self.audit_standard),
                             ("constrained filter", self.audit_constrained)):
            kept = audit.n - audit.rank
            lines.append(f"  {label:20s} {kept} / {audit.n - audit.expected_rank}   leakage "
                         + ", ".join(f"{v:.1e}" for v in audit.leakage))
        lines.append("")
        lines.append(SAFETY_CAUTION)
        return "\n".join(lines)


def run_demo(seed: int = 7, runs: int = 20, steps: int = 150,
             scenario: SurveyScenario | None = None) -> SurveyBoatDemo:
    """Compare the standard and the observability-constrained filter on the survey boat.

    Parameters
    ----------
    seed : int
        Seed of ``np.random.default_rng``; the whole demo is reproducible from it.
    runs : int
        Monte Carlo runs (both filters see the same simulated data in each run).
    steps : int
        Steps per run (0.5 s each by default).
    scenario : SurveyScenario, optional
        Default :data:`DEFAULT_SCENARIO`.

    Returns
    -------
    SurveyBoatDemo

    Examples
    --------
    >>> demo = run_demo(seed=3, runs=2, steps=20)
    >>> demo.nees_standard.shape
    (2, 20)
    >>> demo.audit_truth.spurious_dimension, demo.audit_constrained.spurious_dimension
    (0, 0)
    """
    if isinstance(runs, bool) or not isinstance(runs, (int, np.integer)) or runs < 1:
        raise ValueError(f"runs must be a positive integer, got {runs!r}.")
    if isinstance(steps, bool) or not isinstance(steps, (int, np.integer)) or steps < 2:
        raise ValueError(f"steps must be an integer of at least 2, got {steps!r}.")
    sc = DEFAULT_SCENARIO if scenario is None else scenario
    rng = np.random.default_rng(seed)
    shape = (runs, steps)
    nees = {"s": np.empty(shape), "c": np.empty(shape)}
    herr = {"s": np.empty(shape), "c": np.empty(shape)}
    hstd = {"s": np.empty(shape), "c": np.empty(shape)}
    first = None
    for r in range(runs):
        data = simulate(sc, steps, rng)
        results = {"s": run_filter(data, sc, constrained=False),
                   "c": run_filter(data, sc, constrained=True)}
        for key, res in results.items():
            e = _pose_error(data.states[1:], res.estimates[1:])
            nees[key][r] = np.einsum("ki,ki->k", e, np.linalg.solve(res.pose_covariances[1:],
                                                                     e[:, :, None])[:, :, 0])
            herr[key][r] = e[:, 2]
            hstd[key][r] = np.sqrt(res.pose_covariances[1:, 2, 2])
        if r == 0:
            first = (data, results["s"], results["c"])
    data, std_run, oc_run = first
    common = {"measurement_noise": sc.measurement_covariance,
              "state_names": state_names(sc.n_buoys)}
    # Consistent reference: the true states with the inputs that produced them.
    F_true, H_true = jacobians_along(data.states[1:], data.inputs[1:], sc.dt)
    audit_truth = audit_linearized_observability(
        F_true, H_true, unobservable_basis(data.states[1]), **common)
    audit_std = audit_linearized_observability(
        std_run.transition_jacobians, std_run.measurement_jacobians, std_run.nullspaces[0],
        **common)
    audit_oc = audit_linearized_observability(
        oc_run.transition_jacobians, oc_run.measurement_jacobians, oc_run.nullspaces[0],
        **common)
    return SurveyBoatDemo(
        scenario=sc, seed=seed, runs=runs, steps=steps, time=sc.dt * np.arange(1, steps + 1),
        nees_standard=nees["s"], nees_constrained=nees["c"], nees_bounds=nees_bounds(runs),
        heading_error_standard=herr["s"], heading_error_constrained=herr["c"],
        heading_std_standard=hstd["s"], heading_std_constrained=hstd["c"],
        audit_truth=audit_truth, audit_standard=audit_std, audit_constrained=audit_oc,
        first_run=data, first_standard=std_run, first_constrained=oc_run)


# ---------------------------------------------------------------------------------------------
# Symbolic model for the nonlinear observability rank
# ---------------------------------------------------------------------------------------------

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


# ---------------------------------------------------------------------------------------------
# Plots (matplotlib; no pyplot state is touched when an axes is given)
# ---------------------------------------------------------------------------------------------

def _axes(ax, figsize=(7.0, 3.6)):
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    return fig, fig.add_subplot(1, 1, 1)


def plot_heading_error(demo: SurveyBoatDemo, *, run: int = 0, ax=None):
    """Heading error of each filter against its own three-sigma bound, in degrees.

    Returns the matplotlib figure.
    """
    fig, ax = _axes(ax)
    t = demo.time
    for err, std, colour, label in (
            (demo.heading_error_standard, demo.heading_std_standard, "#b5562b", "standard"),
            (demo.heading_error_constrained, demo.heading_std_constrained, "#2b6f8a",
             "observability-constrained")):
        ax.plot(t, np.degrees(err[run]), color=colour, lw=1.2, label=f"{label}: error")
        ax.plot(t, 3 * np.degrees(std[run]), color=colour, lw=0.9, ls="--",
                label=f"{label}: own 3 sigma")
        ax.plot(t, -3 * np.degrees(std[run]), color=colour, lw=0.9, ls="--")
    ax.set_xlabel("time since leaving the mooring (s)")
    ax.set_ylabel("heading error (deg)")
    ax.set_title(f"Heading error against the filter's own bound (run {run})")
    ax.legend(fontsize=7, ncol=2, loc="upper left")
    ax.grid(True, lw=0.3)
    return fig


def plot_nees(demo: SurveyBoatDemo, *, ax=None):
    """Run-averaged NEES of the boat pose over time with the chi-square bounds."""
    fig, ax = _axes(ax)
    lo, hi = demo.nees_bounds
    ax.plot(demo.time, demo.average_nees_standard, color="#b5562b", lw=1.2, label="standard")
    ax.plot(demo.time, demo.average_nees_constrained, color="#2b6f8a", lw=1.2,
            label="observability-constrained")
    ax.axhline(hi, color="0.3", lw=0.8, ls=":", label="95% chi-square bounds")
    ax.axhline(lo, color="0.3", lw=0.8, ls=":")
    ax.axhline(3.0, color="0.6", lw=0.6)
    ax.set_xlabel("time since leaving the mooring (s)")
    ax.set_ylabel(f"average NEES over {demo.runs} runs")
    ax.set_title("Consistency of the boat-pose estimate")
    ax.legend(fontsize=7)
    ax.grid(True, lw=0.3)
    return fig

