"""Speed and agreement of the norms and the certificate against the reference routines.

Not a test.  For generated models (n states, m inputs, p outputs) it times, interleaved and
in rotated order, with the median over ``--repeats`` rounds:

* ``peak_gain`` against slycot's ``ab13dd`` (L-infinity norm, tolerance 1e-10) and
  python-control's ``linfnorm``;
* ``h2_norm`` against slycot's ``ab13bd`` (H2 norm);
* ``check_equivalence(model, minimal_realization(model).model)`` against ``ab13dd`` on the
  model (issue 17's target is at most twice ``ab13dd``); the minimal realization is computed
  once, outside the timing;

and prints the ratios and the relative differences of the values.  Every plantcore call
starts from an empty shared-Schur cache (:data:`plantcore.reduction.norms._SHARED`), so
each pays its own factorization.  BLAS threads are set with threadpoolctl for every
``--threads`` value given.  Two kinds of model: ``generic`` (``A = G / sqrt(n) - 1.5 I``
with ``G`` standard normal) and ``modal`` (lightly damped resonances, damping 1e-3 to 1e-1,
natural frequencies 0.1 to 100, hidden by a random orthogonal similarity), continuous time;
``--discrete`` samples them by exact zero-order hold at a sample time of a tenth of the
fastest time constant.

With ``--bound-study COUNT`` it checks instead, on COUNT small generated models (continuous
and sampled, lightly damped, MIMO), that the interval ``[value, upper_bound]`` of
``peak_gain`` holds the peak of a dense sweep and slycot's ``ab13dd`` value (issue 22).

Run::

    python benchmarks/bench_norms.py --sizes 1000 2000 --threads 1 2
    python benchmarks/bench_norms.py --bound-study 1000
    python benchmarks/bench_norms.py --sizes 200 400 --repeats 3 --kinds generic modal
"""

from __future__ import annotations

import argparse
import math
import sys
import time
import warnings

import numpy as np
from threadpoolctl import threadpool_limits

import plantcore as pc
from plantcore.reduction import norms

sys.path.insert(0, str(__import__("pathlib").Path(__file__).resolve().parent))
from bench_core import time_interleaved  # interleaved, rotated, medians

try:
    import slycot
except ImportError:                      # pragma: no cover - the references are optional
    slycot = None
try:
    import control
except ImportError:                      # pragma: no cover
    control = None


def _orthogonal(rng, n):
    Q, R = np.linalg.qr(rng.standard_normal((n, n)))
    return Q * np.sign(np.diag(R))


def generic_model(n, m, p, seed):
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((n, n)) / math.sqrt(n) - 1.5 * np.eye(n)
    return pc.StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)))


def modal_model(n, m, p, seed):
    rng = np.random.default_rng(seed)
    A = np.zeros((n, n))
    k = 0
    while k + 1 < n:
        wn = 10.0 ** rng.uniform(-1, 2)
        zeta = 10.0 ** rng.uniform(-3, -1)
        re, im = -zeta * wn, wn * math.sqrt(1 - zeta * zeta)
        A[k:k + 2, k:k + 2] = [[re, im], [-im, re]]
        k += 2
    if k < n:
        A[k, k] = -1.0
    Q = _orthogonal(rng, n)
    B, C = rng.standard_normal((n, m)), rng.standard_normal((p, n))
    return pc.StateSpaceModel(Q @ A @ Q.T, Q @ B, C @ Q.T)


def make_model(kind, n, m, p, discrete):
    seed = 7919 * n + 31 * m + p + (0 if kind == "generic" else 1)
    model = (generic_model if kind == "generic" else modal_model)(n, m, p, seed)
    if discrete:
        fastest = float(np.max(np.abs(np.linalg.eigvals(model.A))))
        model = pc.discretize(model, 0.1 / fastest).model
    return model


def calls(model, minimal):
    n, m, p = model.n, model.n_inputs, model.n_outputs
    dico = "D" if model.is_discrete else "C"
    A, B, C, D = (np.asfortranarray(x) for x in (model.A, model.B, model.C, model.D))

    def fresh(fn):
        def run():
            norms._SHARED.clear()
            return fn()
        return run

    out = {
        "peak_gain": fresh(lambda: pc.peak_gain(model).value),
        "h2_norm": fresh(lambda: pc.h2_norm(model)),
        "check_equivalence": fresh(lambda: pc.check_equivalence(model, minimal).verdict),
    }
    if slycot is not None:
        out["ab13dd"] = lambda: float(slycot.ab13dd(dico, "I", "N", "D", n, m, p, A.copy(order="F"),
                                                    np.eye(n, order="F"), B.copy(order="F"),
                                                    C.copy(order="F"), D.copy(order="F"),
                                                    1e-10)[0])
        out["ab13bd"] = lambda: float(slycot.ab13bd(dico, "H", n, m, p, A.copy(order="F"),
                                                    B.copy(order="F"), C.copy(order="F"),
                                                    D.copy(order="F"), 1e-10))
    if control is not None:
        sys_ = model.to_control()
        out["linfnorm"] = lambda: float(control.linfnorm(sys_, tol=1e-10)[0])
    return out


def _study_model(rng):
    """One model of the bound study: random stable (some lightly damped) continuous model,
    SISO or MIMO, sampled by exact zero-order hold half of the time at 1e-6..1 of the fastest
    time constant."""
    n, m, p = int(rng.integers(2, 9)), int(rng.integers(1, 4)), int(rng.integers(1, 4))
    A = np.zeros((n, n))
    k = 0
    while k < n:
        if k + 1 < n and rng.random() < 0.7:
            wn = 10.0 ** rng.uniform(-1, 1)
            zeta = 10.0 ** rng.uniform(-4, -0.3)
            re, im = -zeta * wn, wn * math.sqrt(1 - zeta * zeta)
            A[k:k + 2, k:k + 2] = [[re, im], [-im, re]]
            k += 2
        else:
            A[k, k] = -(10.0 ** rng.uniform(-1, 1))
            k += 1
    Q = _orthogonal(rng, n)
    D = rng.standard_normal((p, m)) if rng.random() < 0.3 else np.zeros((p, m))
    model = pc.StateSpaceModel(Q @ A @ Q.T, Q @ rng.standard_normal((n, m)),
                               rng.standard_normal((p, n)) @ Q.T, D)
    if rng.random() < 0.5:
        fastest = float(np.max(np.abs(np.linalg.eigvals(model.A))))
        model = pc.discretize(model, 10.0 ** rng.uniform(-6, 0) / fastest).model
    return model


def _dense_sweep_peak(model, count=2000):
    """Largest gain of a dense sweep (numpy dense solves through transfer_at) refined by a
    bounded scalar search around the best point: an estimate from below of the true peak."""
    import scipy.optimize

    lam = np.linalg.eigvals(model.A)

    def gain(w):
        if math.isinf(w):
            return float(np.linalg.norm(model.D, 2))
        point = np.exp(1j * w) if model.is_discrete else 1j * w
        return float(np.linalg.norm(model.transfer_at(point), 2))

    if model.is_discrete:
        angles = np.abs(np.angle(lam))
        low = max(float(angles[angles > 0].min()) / 100.0, 1e-12) if np.any(angles > 0) else 1e-9
        grid = np.unique(np.concatenate([[0.0, math.pi], np.geomspace(low, math.pi, count),
                                         angles]))
    else:
        mags = np.abs(lam)
        grid = np.unique(np.concatenate([[0.0], np.geomspace(mags.min() / 100, mags.max() * 100,
                                                             count), np.abs(lam.imag)]))
    vals = np.array([gain(w) for w in grid])
    k = int(np.argmax(vals))
    best = float(vals[k])
    lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
    if hi > lo:
        res = scipy.optimize.minimize_scalar(lambda w: -gain(w), bounds=(lo, hi),
                                             method="bounded", options={"xatol": 1e-13 * hi})
        best = max(best, -float(res.fun))
    if not model.is_discrete:
        best = max(best, gain(math.inf))
    return best


def bound_study(count, seed=2026):
    """Does [value, upper_bound] hold the peak?  Counts, over ``count`` generated models,
    the dense-sweep peaks above the upper bound and the ab13dd values outside the interval
    widened by ab13dd's own tolerance (1e-10 relative)."""
    rng = np.random.default_rng(seed)
    above_sweep = outside_reference = 0
    worst = 0.0
    start = time.perf_counter()
    for trial in range(count):
        model = _study_model(rng)
        pk = pc.peak_gain(model)
        sweep = _dense_sweep_peak(model)
        if sweep > pk.upper_bound * (1 + 1e-13):
            above_sweep += 1
            print(f"  sweep above the bound: trial {trial}, {sweep!r} > {pk.upper_bound!r}")
        worst = max(worst, sweep / pk.upper_bound - 1.0)
        if slycot is not None:
            dico = "D" if model.is_discrete else "C"
            ref = float(slycot.ab13dd(dico, "I", "N", "D", model.n, model.n_inputs,
                                      model.n_outputs, model.A, np.eye(model.n), model.B,
                                      model.C, model.D, 1e-10)[0])
            if not (pk.value * (1 - 1e-10) - pk.rounding_bound <= ref
                    <= pk.upper_bound * (1 + 1e-10)):
                outside_reference += 1
                print(f"  ab13dd outside the interval: trial {trial}, {ref!r} not in "
                      f"[{pk.value!r}, {pk.upper_bound!r}]")
    print(f"bound study: {count} models (continuous and sampled at 1e-6..1 of the fastest "
          f"time constant, damping down to 1e-4, 1-3 inputs and outputs), "
          f"{time.perf_counter() - start:.0f} s")
    print(f"  dense-sweep peak above the upper bound: {above_sweep} (largest excess "
          f"{max(worst, 0.0):.1e} relative)")
    print(f"  ab13dd value outside [value - rounding, upper_bound] (1e-10 slack): "
          f"{outside_reference}")
    return above_sweep, outside_reference


def ratio(a, b):
    return a / b if b and math.isfinite(a) and math.isfinite(b) else math.nan


def relative(x, ref):
    return abs(x - ref) / abs(ref) if ref else abs(x)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 2000])
    parser.add_argument("--inputs", type=int, default=3)
    parser.add_argument("--outputs", type=int, default=3)
    parser.add_argument("--threads", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--repeats", type=int, default=1)
    parser.add_argument("--kinds", nargs="+", default=["generic"], choices=["generic", "modal"])
    parser.add_argument("--discrete", action="store_true")
    parser.add_argument("--skip", nargs="*", default=[],
                        help="calls to leave out (e.g. linfnorm, check_equivalence)")
    parser.add_argument("--bound-study", type=int, default=0, metavar="COUNT",
                        help="instead of timing, check the peak-gain interval on COUNT models")
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore", pc.AccuracyWarning)
    if args.bound_study:
        with threadpool_limits(1):
            bound_study(args.bound_study)
        return 0
    print("call timings in seconds (median of --repeats), ratios to the reference; the "
          "machine may be loaded: read the ratios, which are interleaved")
    for threads in args.threads:
        for kind in args.kinds:
            for n in args.sizes:
                model = make_model(kind, n, args.inputs, args.outputs, args.discrete)
                with threadpool_limits(threads):
                    minimal = pc.minimal_realization(model).model
                    fns = {k: f for k, f in calls(model, minimal).items() if k not in args.skip}
                    wall, _, res = time_interleaved(fns, args.repeats)
                line = (f"threads={threads} {kind} n={n} m={args.inputs} p={args.outputs}"
                        f"{' discrete' if args.discrete else ''}:")
                print(line)
                for k in sorted(wall):
                    print(f"  {k:<18} {wall[k]:9.3f} s   result {res[k]}")
                if "ab13dd" in wall:
                    for k in ("peak_gain", "check_equivalence", "linfnorm"):
                        if k in wall:
                            print(f"  {k} / ab13dd = {ratio(wall[k], wall['ab13dd']):.2f}")
                    if "peak_gain" in res:
                        print(f"  peak gain relative difference to ab13dd: "
                              f"{relative(res['peak_gain'], res['ab13dd']):.2e}")
                if "ab13bd" in wall and "h2_norm" in wall:
                    print(f"  h2_norm / ab13bd = {ratio(wall['h2_norm'], wall['ab13bd']):.2f}; "
                          f"relative difference {relative(res['h2_norm'], res['ab13bd']):.2e}")
                sys.stdout.flush()
    return 0


if __name__ == "__main__":
    sys.exit(main())
