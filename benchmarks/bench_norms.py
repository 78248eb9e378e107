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

Run::

    python benchmarks/bench_norms.py --sizes 1000 2000 --threads 1 2
    python benchmarks/bench_norms.py --sizes 200 400 --repeats 3 --kinds generic modal
"""

from __future__ import annotations

import argparse
import math
import sys
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
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore", pc.AccuracyWarning)
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
