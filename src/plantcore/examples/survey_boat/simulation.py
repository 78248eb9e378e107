"""The survey boat simulated, and estimated by two extended Kalman filters (the standard
one and the observability-constrained one), with the seeded Monte Carlo comparison of
:func:`run_demo` (see :mod:`plantcore.examples.survey_boat` for the scenario).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.wording import SAFETY_CAUTION
from plantcore.estimation import (
    ObservabilityAudit,
    audit_linearized_observability,
    constrain_observability,
)
from plantcore.examples.survey_boat.model import (
    DEFAULT_SCENARIO,
    SurveyScenario,
    _wrap,
    jacobians_along,
    measurement_jacobian,
    motion,
    noise_jacobian,
    range_bearing,
    state_names,
    transition_jacobian,
    unobservable_basis,
)

__all__ = ["SurveyRun", "simulate", "FilterRun", "run_filter", "nees_bounds", "SurveyBoatDemo", "run_demo"]


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
