"""The public calls side by side with the reference routines a user could call instead.

Not a test: a script (issue 17, item 7).  For every model it times, interleaved (one run of
each call in turn, the order rotated each round, medians over the rounds), the plantcore
calls and the Fortran reference routines through slycot, and prints the ratio of each call
to its reference, with one BLAS thread and with two (threadpoolctl):

| plantcore call | reference |
|---|---|
| ``kalman_decomposition``, ``minimal_realization`` | ``tb01pd`` (minimal realization) |
| ``peak_gain``, ``check_equivalence(model, minimal)`` | ``ab13dd`` (L-infinity norm) |
| ``h2_norm`` (stable models) | ``ab13bd`` (H2 norm) |
| ``hankel_singular_values``, ``balanced_truncation`` | ``ab09ad`` (stable) / ``ab09md`` (stable part) |
| ``classify_modes``, ``analyze`` | ``numpy.linalg.eig`` with eigenvectors |
| ``write_html_report`` | the sum of ``tb01pd``, ``ab13dd``, ``ab09ad``/``ab09md`` and ``eig`` (what a user would run for the same content) |

Every plantcore call starts with the per-model certificate cache emptied, so its cost is in
the figure.  Models (our own scenarios): random models with 1-4 inputs and outputs, stable
and with a few unstable modes, of n = 10, 50, 100, 400, 1000 and 2000 states; and a
clamped-free damped beam (Euler-Bernoulli, in modal coordinates, light modal damping, a
force and a displacement sensor at the tip and one at mid-span) of 300 to 1,500 states, the
size of the models in the public benchmark collections.  Timings are wall-clock seconds;
on a shared machine they are loaded: read the ratios, which interleaving keeps comparable.

    python benchmarks/bench_real.py --quick                      # n = 10, 50, 100; beam 300
    python benchmarks/bench_real.py --sizes 400 1000 --beams 348 --threads 1 2
    python benchmarks/bench_real.py --sizes 2000 --calls hankel_singular_values --repeats 1
    python benchmarks/bench_real.py --sizes 500 1000 2000 --beams --no-unstable --memory

With ``--memory`` every call runs once more under ``tracemalloc`` (one BLAS thread) and its
peak allocation is printed in units of ``n^2`` doubles; after the table, the growth
exponent of each call (least-squares slope of log time over log n, one BLAS thread, random
stable models with n >= 500) is printed for every call timed at two or more such sizes.
"""

from __future__ import annotations

import argparse
import gc
import math
import os
import statistics
import tempfile
import time
import warnings

import numpy as np
import slycot
from bench_core import peak_memory
from threadpoolctl import threadpool_limits

import plantcore as pc
from plantcore.reports.html import write_html_report
from plantcore.structure.kalman import _RECENT_CERTIFICATES

# --- models -------------------------------------------------------------------------------

def random_model(states: int, ports: int, *, unstable: int = 0, seed: int = 0):
    """Random model, ``ports`` inputs and outputs; ``unstable`` real unstable modes mixed in
    by a random orthogonal similarity, the rest stable (largest real part -0.1)."""
    rng = np.random.default_rng(seed)
    k = states - unstable
    S = rng.standard_normal((k, k)) / np.sqrt(max(k, 1))
    S -= (np.max(np.linalg.eigvals(S).real) + 0.1) * np.eye(k) if k else 0.0
    A = np.zeros((states, states))
    A[:k, :k] = S
    A[k:, k:] = np.diag(0.2 + 0.3 * np.arange(unstable))
    A[:k, k:] = 0.1 * rng.standard_normal((k, unstable))
    if unstable:
        Q, _ = np.linalg.qr(rng.standard_normal((states, states)))
        A = Q.T @ A @ Q
    kind = f"{unstable} unstable" if unstable else "stable"
    return pc.StateSpaceModel(A, rng.standard_normal((states, ports)),
                              rng.standard_normal((ports, states)),
                              name=f"random {states}, {ports} in/out, {kind}")


def damped_beam(states: int, *, damping: float = 5e-3):
    """A clamped-free beam (unit length, stiffness and mass per length) in modal
    coordinates: ``states // 2`` bending modes with natural frequencies ``beta_k^2``
    (``beta_1 = 1.875``, ``beta_k ~ (2k - 1) pi / 2``), modal damping ratio ``damping``;
    inputs: forces at the tip and at mid-span; outputs: deflections there, through the
    asymptotic mode shapes ``cos(beta x) - sin(beta x) - exp(-beta x) +- exp(-beta (1 - x))``.
    States: modal deflections times their frequencies, then the modal rates (the scaling that
    keeps ``||A||`` near the highest frequency).  Every mode is lightly damped, as in the
    structural models of the benchmark collections (a finite-element form with its
    ``1 / h^4`` stiffness would instead be dominated by a few stiff, overdamped modes)."""
    modes = max(1, states // 2)
    k = np.arange(1, modes + 1)
    beta = (2 * k - 1) * np.pi / 2
    beta[0] = 1.8751040687
    omega = beta ** 2
    sign = np.where(k % 2 == 1, 1.0, -1.0)

    def shape(x):
        return (np.cos(beta * x) - np.sin(beta * x) - np.exp(-beta * x)
                + sign * np.exp(-beta * (1 - x)))

    at = np.vstack([shape(1.0), shape(0.5)])          # (2, modes): tip and mid-span
    W = np.diag(omega)
    A = np.block([[np.zeros((modes, modes)), W], [-W, -2 * damping * W]])
    B = np.vstack([np.zeros((modes, 2)), at.T])
    C = np.hstack([at / omega[None, :], np.zeros((2, modes))])
    return pc.StateSpaceModel(A, B, C, name=f"damped beam, {2 * modes} states")


# --- calls --------------------------------------------------------------------------------

def _fresh(call):
    def run():
        _RECENT_CERTIFICATES.clear()
        return call()
    return run


def references(model) -> dict:
    n, m, p = model.n, model.n_inputs, model.n_outputs
    A, B, C, D = (np.asfortranarray(X) for X in (model.A, model.B, model.C, model.D))
    w = max(m, p)
    Bp = np.zeros((n, w), order="F")
    Bp[:, :m] = B
    Cp = np.zeros((w, n), order="F")
    Cp[:p, :] = C
    stable = bool(np.max(np.linalg.eigvals(model.A).real) < 0)
    order = min(10, n // 2)
    out = {
        "tb01pd": lambda: slycot.tb01pd(n, m, p, A.copy(order="F"), Bp.copy(order="F"),
                                        Cp.copy(order="F"), job="M", equil="N", tol=1e-10),
        "ab13dd": lambda: slycot.ab13dd("C", "I", "N", "D", n, m, p, A.copy(order="F"),
                                        np.eye(n, order="F"), B.copy(order="F"),
                                        C.copy(order="F"), D.copy(order="F")),
        "eig": lambda: np.linalg.eig(model.A),
    }
    if stable:
        out["ab13bd"] = lambda: slycot.ab13bd("C", "H", n, m, p, A.copy(order="F"),
                                              B.copy(order="F"), C.copy(order="F"),
                                              D.copy(order="F"))
        out["ab09"] = lambda: slycot.ab09ad("C", "B", "N", n, m, p, A.copy(order="F"),
                                            B.copy(order="F"), C.copy(order="F"), nr=order)
    else:
        out["ab09"] = lambda: slycot.ab09md("C", "B", "N", n, m, p, A.copy(order="F"),
                                            B.copy(order="F"), C.copy(order="F"),
                                            alpha=0.0, nr=order + _unstable_count(model))
    return out


def _unstable_count(model) -> int:
    return int(np.sum(np.linalg.eigvals(model.A).real >= 0))


def ours(model, folder: str) -> dict:
    """name -> (function, reference names whose sum is the reference)."""
    stable = _unstable_count(model) == 0
    order = min(10, model.n // 2) + _unstable_count(model)
    minimal = pc.minimal_realization(model).model
    path = os.path.join(folder, "report.html")
    out = {
        "kalman_decomposition": (lambda: pc.kalman_decomposition(model), ("tb01pd",)),
        "minimal_realization": (lambda: pc.minimal_realization(model), ("tb01pd",)),
        "peak_gain": (lambda: pc.peak_gain(model), ("ab13dd",)),
        "check_equivalence": (lambda: pc.check_equivalence(model, minimal), ("ab13dd",)),
        "hankel_singular_values": (lambda: pc.hankel_singular_values(model), ("ab09",)),
        "balanced_truncation": (lambda: pc.balanced_truncation(model, order=order), ("ab09",)),
        "classify_modes": (lambda: pc.classify_modes(model), ("eig",)),
        "analyze": (lambda: pc.analyze(model), ("eig",)),
        "report": (lambda: write_html_report(model, path),
                   ("tb01pd", "ab13dd", "ab09", "eig")),
    }
    if stable:
        out["h2_norm"] = (lambda: pc.h2_norm(model), ("ab13bd",))
    return {k: (_fresh(f), refs) for k, (f, refs) in out.items()}


def time_interleaved(fns: dict, repeats: int) -> dict:
    """Median wall seconds per call; calls interleaved, the order rotated each round."""
    names = list(fns)
    wall = {k: [] for k in names}
    for r in range(repeats):
        for k in names[r % len(names):] + names[:r % len(names)]:
            gc.collect()
            t0 = time.perf_counter()
            fns[k]()
            wall[k].append(time.perf_counter() - t0)
    return {k: statistics.median(v) for k, v in wall.items()}


def measure(model, threads: int, repeats: int, selected, memory: bool = False) -> list[tuple]:
    with tempfile.TemporaryDirectory() as folder:
        mine = ours(model, folder)
        if selected:
            mine = {k: v for k, v in mine.items() if k in selected}
        refs = references(model)
        needed = {r for _, names in mine.values() for r in names}
        fns = {k: f for k, (f, _) in mine.items()}
        fns.update({f"ref:{k}": f for k, f in refs.items() if k in needed})
        with threadpool_limits(threads), np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t = time_interleaved(fns, repeats)
            peaks = {}
            if memory:
                with threadpool_limits(1):
                    peaks = {k: peak_memory(f, model.n) for k, (f, _) in mine.items()}
    rows = []
    for name, (_, names) in mine.items():
        ref = sum(t[f"ref:{r}"] for r in names)
        rows.append((name, t[name], " + ".join(names), ref, t[name] / ref,
                     peaks.get(name, math.nan)))
    return rows


def growth_exponents(samples: dict) -> dict:
    """call -> least-squares slope of log(seconds) over log(n), from ``{call: [(n, s)]}``."""
    out = {}
    for call, points in samples.items():
        sizes = sorted({n for n, _ in points})
        if len(sizes) < 2:
            continue
        x = np.log([n for n, _ in points])
        y = np.log([max(t, 1e-9) for _, t in points])
        out[call] = float(np.polyfit(x, y, 1)[0])
    return out


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="*", default=[10, 50, 100, 400, 1000, 2000])
    parser.add_argument("--ports", type=int, nargs="+", default=[3],
                        help="inputs = outputs of the random models (1-4)")
    parser.add_argument("--beams", type=int, nargs="*", default=[348, 1000])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--threads", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--calls", nargs="+", default=None, help="only these plantcore calls")
    parser.add_argument("--no-unstable", action="store_true", help="stable random models only")
    parser.add_argument("--memory", action="store_true",
                        help="also the peak allocation of each call (n^2 doubles) and growth exponents")
    parser.add_argument("--quick", action="store_true",
                        help="n = 10, 50, 100 (2 inputs/outputs), a 300-state beam, one round")
    args = parser.parse_args(argv)
    if args.quick:
        args.sizes, args.ports, args.beams, args.repeats = [10, 50, 100], [2], [300], 1
    models = []
    for n in args.sizes:
        for ports in args.ports:
            models.append(random_model(n, ports, seed=n))
            if not args.no_unstable and n >= 10:
                models.append(random_model(n, ports, unstable=2, seed=n + 1))
    models += [damped_beam(s) for s in args.beams]
    memory_head = " peak memory (n^2 doubles) |" if args.memory else ""
    print(f"| model | BLAS threads | call | plantcore (s) | reference | reference (s) | ratio |"
          f"{memory_head}")
    print("|---|---:|---|---:|---|---:|---:|" + ("---:|" if args.memory else ""))
    growth: dict = {}
    for model in models:
        for threads in args.threads:
            rows = measure(model, threads, args.repeats, args.calls,
                           memory=args.memory and threads == args.threads[0])
            for name, mine, ref_name, ref, ratio, peak in rows:
                cell = f" {peak:.1f} |" if args.memory else ""
                print(f"| {model.name} | {threads} | {name} | {mine:.3g} | {ref_name} | "
                      f"{ref:.3g} | {ratio:.2f} |{cell}", flush=True)
                if (threads == 1 and model.n >= 500 and model.name.startswith("random")
                        and "stable" in model.name and "unstable" not in model.name):
                    growth.setdefault(name, []).append((model.n, mine))
    exponents = growth_exponents(growth)
    if exponents:
        print("\nGrowth exponents (one BLAS thread, random stable models, n >= 500):")
        for call, slope in exponents.items():
            print(f"  {call}: {slope:.2f}")


if __name__ == "__main__":
    main()
