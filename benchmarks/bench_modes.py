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


def _calls(model):
    return {
        "eig": lambda: np.linalg.eig(model.A),
        "classify_modes": lambda: pc.classify_modes(model),
        "distances": lambda: (distance_to_uncontrollability(model),
                              distance_to_unobservability(model)),
    }


def measure(model, threads: int, repeats: int) -> dict:
    calls = _calls(model)
    times = {name: [] for name in calls}
    with threadpool_limits(threads):
        for _ in range(repeats):
            for name, call in calls.items():      # interleaved
                start = time.perf_counter()
                call()
                times[name].append(time.perf_counter() - start)
    return {name: statistics.median(t) for name, t in times.items()}


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[100, 400, 1000, 1412])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--threads", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--quick", action="store_true", help="n = 100 and 400, one repeat")
    parser.add_argument("--no-random", action="store_true", help="spring chains only")
    args = parser.parse_args(argv)
    sizes, repeats = ([100, 400], 1) if args.quick else (args.sizes, args.repeats)
    print("| model | BLAS threads | eig (s) | classify_modes (s) | ratio | distances (s) | ratio |")
    print("|---|---:|---:|---:|---:|---:|---:|")
    for n in sizes:
        models = [spring_chain(n)] + ([] if args.no_random else [random_stable(n)])
        for model in models:
            for threads in args.threads:
                t = measure(model, threads, repeats)
                print(f"| {model.name} | {threads} | {t['eig']:.3g} | {t['classify_modes']:.3g} | "
                      f"{t['classify_modes'] / t['eig']:.1f} | {t['distances']:.3g} | "
                      f"{t['distances'] / t['eig']:.1f} |", flush=True)


if __name__ == "__main__":
    main()
