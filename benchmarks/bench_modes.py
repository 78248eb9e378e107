"""Speed of the mode table and the distance estimates against an eigendecomposition.

Not a test: a script.  For each model it times, interleaved (one run of each call in turn,
repeated), ``classify_modes``, the two distance estimates together, and
``numpy.linalg.eig(A)`` with eigenvectors, and reports the medians and their ratios to the
eigendecomposition, with one BLAS thread and with two (threadpoolctl).

Models (our own scenario): a chain of masses joined by springs, fixed at both ends, with
light stiffness-proportional damping (every mode close to the imaginary axis, the case that
made the former boundary test O(n^4)), forces on a few masses and positions of a few others
measured; and random stable models.

    OPENBLAS_NUM_THREADS=1 python benchmarks/bench_modes.py --quick     # n = 100, 400
    python benchmarks/bench_modes.py --sizes 100 400 1000 1412 --repeats 3
    python benchmarks/bench_modes.py --models random beam --sizes 500 1000 1412 2000 \
        --repeats 1 --skip-distances        # issue 17: classify_modes against eig alone

``--models`` picks the families (``chain``: the spring chain above, ``random``: random stable,
``beam``: the lightly damped beam ``bench_real.damped_beam`` of the report benchmark);
``--skip-distances`` times only ``classify_modes`` and ``eig``.

``--boundary`` times instead the boundary test's ``sigma_min(A - mu I)`` at every eigenvalue's
boundary point of a damped beam (``bench_real.damped_beam``) on one Schur form, the points
in lock step (blocked multi-shift solves) against one point at a time, interleaved, and
reports the largest difference of the values:

    python benchmarks/bench_modes.py --boundary --sizes 1000 1412 --repeats 3
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from threadpoolctl import threadpool_limits

import plantcore as pc
from plantcore.structure.distance import distance_to_uncontrollability, distance_to_unobservability


def spring_chain(states: int, *, inputs: int = 3, outputs: int = 3, damping: float = 5e-3,
                 seed: int = 0) -> pc.StateSpaceModel:
    """``states / 2`` masses in a chain of springs, Rayleigh damping ``damping * K``."""
    rng = np.random.default_rng(seed)
    masses = states // 2
    mass = 1.0 + 0.2 * rng.random(masses)
    k = 1.0 + 0.2 * rng.random(masses + 1)
    K = np.diag(k[:-1] + k[1:]) - np.diag(k[1:-1], 1) - np.diag(k[1:-1], -1)
    A = np.block([[np.zeros((masses, masses)), np.eye(masses)],
                  [-K / mass[:, None], -damping * K / mass[:, None]]])
    B = np.zeros((2 * masses, inputs))
    B[masses + rng.choice(masses, inputs, replace=False), np.arange(inputs)] = 1.0
    C = np.zeros((outputs, 2 * masses))
    C[np.arange(outputs), rng.choice(masses, outputs, replace=False)] = 1.0
    return pc.StateSpaceModel(A, B, C, name=f"spring chain, {2 * masses} states")


def random_stable(states: int, *, inputs: int = 3, outputs: int = 3, seed: int = 0):
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((states, states)) / np.sqrt(states)
    A -= (np.max(np.linalg.eigvals(A).real) + 0.1) * np.eye(states)
    return pc.StateSpaceModel(A, rng.standard_normal((states, inputs)),
                              rng.standard_normal((outputs, states)),
                              name=f"random stable, {states} states")


def _calls(model, distances: bool = True):
    calls = {
        "eig": lambda: np.linalg.eig(model.A),
        "classify_modes": lambda: pc.classify_modes(model),
    }
    if distances:
        calls["distances"] = lambda: (distance_to_uncontrollability(model),
                                      distance_to_unobservability(model))
    return calls


def damped_beam(states: int) -> pc.StateSpaceModel:
    """The lightly damped beam of the real-model benchmark (``bench_real.damped_beam``)."""
    from bench_real import damped_beam as beam

    return beam(states)


MODELS = {"chain": spring_chain, "random": random_stable, "beam": damped_beam}


def measure(model, threads: int, repeats: int, distances: bool = True) -> dict:
    calls = _calls(model, distances)
    times = {name: [] for name in calls}
    with threadpool_limits(threads):
        for _ in range(repeats):
            for name, call in calls.items():      # interleaved
                start = time.perf_counter()
                call()
                times[name].append(time.perf_counter() - start)
    return {name: statistics.median(t) for name, t in times.items()}


def boundary(n: int, threads: int, repeats: int) -> dict:
    """Seconds for ``sigma_min(A - mu I)`` at the boundary points of the ``n``-state damped
    beam's eigenvalues, lock step and one point at a time (medians), and the largest
    difference of the two answers, relative and in units of ``eps ||A||_F``."""
    from bench_real import damped_beam

    from plantcore.structure import pbh_measures as pm

    A = damped_beam(n).A
    measures = pm.PBHMeasures(A)
    _ = measures.schur.complex                  # the factorizations, outside the timing
    points = [complex(0.0, v.imag) for v in np.linalg.eigvals(A) if v.imag >= 0]
    empty = np.zeros((n, 0))
    size = pm.MULTI_SHIFT_SIZE
    times = {"lock step": [], "one point": []}
    values = {}
    with threadpool_limits(threads):
        for _ in range(repeats):
            for name, limit in (("lock step", 0), ("one point", 10**9)):
                pm.MULTI_SHIFT_SIZE = limit
                try:
                    start = time.perf_counter()
                    values[name] = measures.smallest(empty, points, "c")
                    times[name].append(time.perf_counter() - start)
                finally:
                    pm.MULTI_SHIFT_SIZE = size
    gap = np.abs(values["lock step"] - values["one point"])
    out = {name: statistics.median(t) for name, t in times.items()}
    out["points"] = len(points)
    out["relative"] = float(np.max(gap / values["one point"]))
    out["rounding"] = float(np.max(gap)) / (np.finfo(float).eps * np.linalg.norm(A))
    return out


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[100, 400, 1000, 1412])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--threads", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--quick", action="store_true", help="n = 100 and 400, one repeat")
    parser.add_argument("--no-random", action="store_true", help="spring chains only")
    parser.add_argument("--models", nargs="+", choices=sorted(MODELS), default=None,
                        help="model families (default: chain and random)")
    parser.add_argument("--skip-distances", action="store_true",
                        help="time classify_modes and eig only")
    parser.add_argument("--boundary", action="store_true",
                        help="the boundary test's sigma_min, lock step against one point")
    args = parser.parse_args(argv)
    sizes, repeats = ([100, 400], 1) if args.quick else (args.sizes, args.repeats)
    if args.boundary:
        _table(["damped beam, states", "points", "BLAS threads", "one point (s)",
                "lock step (s)", "ratio", "largest difference: relative, in eps ||A||_F"],
               _boundary_rows(sizes, args.threads, repeats))
        return
    _table(["model", "BLAS threads", "eig (s)", "classify_modes (s)", "ratio",
            "distances (s)", "ratio"], _mode_rows(sizes, args, repeats))


def _table(header, rows) -> None:
    """A markdown table, each row printed as soon as it is measured."""
    print("| " + " | ".join(header) + " |")
    print("|---|" + "---:|" * (len(header) - 1))
    for cells in rows:
        print("| " + " | ".join(cells) + " |", flush=True)


def _boundary_rows(sizes, thread_counts, repeats):
    for n in sizes:
        for threads in thread_counts:
            t = boundary(n, threads, repeats)
            yield [str(n), str(t["points"]), str(threads), f"{t['one point']:.3g}",
                   f"{t['lock step']:.3g}", f"{t['one point'] / t['lock step']:.2f}",
                   f"{t['relative']:.1e}, {t['rounding']:.2g}"]


def _mode_rows(sizes, args, repeats):
    families = args.models or (["chain"] if args.no_random else ["chain", "random"])
    for n in sizes:
        for model in (MODELS[name](n) for name in families):
            for threads in args.threads:
                t = measure(model, threads, repeats, not args.skip_distances)
                distances = ([f"{t['distances']:.3g}", f"{t['distances'] / t['eig']:.1f}"]
                             if "distances" in t else ["-", "-"])
                yield [model.name, str(threads), f"{t['eig']:.3g}", f"{t['classify_modes']:.3g}",
                       f"{t['classify_modes'] / t['eig']:.1f}"] + distances

if __name__ == "__main__":
    main()
