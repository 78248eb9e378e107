"""Speed of the placement suggestions (issue 19), against reference computations.

Two measurements:

1. **Ranking**: ``plantcore.suggest_actuators`` on a model of ``--states`` states (default
   100) with a ``--hidden``-dimensional uncontrollable part (default 10) built in rotated
   coordinates, and ``--candidates`` random candidate columns (default 100).  Timed
   interleaved (``--repeats`` rounds) with two references on the same model:
   ``plantcore.classify_modes`` (one mode table: the floor any ranking pays), and the plain
   method, a dense SVD of ``[A - lambda I, B, b]`` for every candidate and every mode
   (``O(candidates x n^4)`` in all), run on ``--plain-candidates`` candidates (default 5) and
   scaled to all of them.  The margins of the plain method are compared with the ranking's.
2. **Structural counts**: ``plantcore.structural_placement`` on a sparse random directed
   graph of ``--structural-states`` states (default 100,000; about 3 edges per state) with 5
   inputs.

Process (CPU) and wall-clock times are both printed: on a shared machine the wall clock
includes waiting for a core.  Usage::

    python benchmarks/bench_placement.py            # the issue's sizes
    python benchmarks/bench_placement.py --quick    # 40 states, 20 candidates, 10^4 states
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np
import scipy.sparse

import plantcore as pc
from plantcore.core.equilibration import io_scaled
from plantcore.structure.kalman import _prepare


def hidden_part_model(n, hidden, inputs=3, outputs=3, seed=0):
    """A model whose last ``hidden`` coordinates (before a random rotation) no input moves."""
    rng = np.random.default_rng(seed)
    top = n - hidden
    Az = np.zeros((n, n))
    Az[:top, :top] = rng.standard_normal((top, top)) / np.sqrt(top) - 1.5 * np.eye(top)
    Az[:top, top:] = rng.standard_normal((top, hidden)) / np.sqrt(n)
    Az[top:, top:] = rng.standard_normal((hidden, hidden)) / np.sqrt(hidden) - 1.5 * np.eye(hidden)
    Bz = np.vstack([rng.standard_normal((top, inputs)), np.zeros((hidden, inputs))])
    Q = np.linalg.qr(rng.standard_normal((n, n)))[0]
    A, B = Q @ Az @ Q.T, Q @ Bz
    C = rng.standard_normal((outputs, n))
    return A, B, C


def random_candidates(n, count, seed=1):
    rng = np.random.default_rng(seed)
    return {f"candidate {j}": rng.standard_normal(n) for j in range(count)}


def plain_margins(A, B, C, candidates):
    """Smallest PBH margin over the modes for each candidate by dense SVDs, in the scaled
    measure of classify_modes (equilibrated model, columns scaled by powers of two)."""
    p = _prepare((A, B, C), None)
    n = A.shape[0]
    values = [m.value for m in pc.classify_modes((A, B, C))]
    out = {}
    for name, v in candidates.items():
        b = io_scaled(np.asarray(v)[:, None] / p.s[:, None], np.zeros((0, n)), p.scale)[0]
        M = np.hstack([p.A, p.B_dec, b]).astype(complex)
        smallest = np.inf
        for lam in values:
            M[:, :n] = p.A - lam * np.eye(n)
            smallest = min(smallest, np.linalg.svd(M, compute_uv=False)[-1])
        out[name] = smallest / p.scale
    return out


def _timed(fn):
    t0, w0 = time.process_time(), time.perf_counter()
    result = fn()
    return result, time.process_time() - t0, time.perf_counter() - w0


def ranking_benchmark(n, hidden, count, repeats, plain_count):
    A, B, C = hidden_part_model(n, hidden)
    cands = random_candidates(n, count)
    plain_subset = dict(list(cands.items())[:plain_count])
    rows = {"suggest": [], "classify_modes": [], "plain (scaled to all candidates)": []}
    suggestion = None
    for _ in range(repeats):          # interleaved: each round runs all three
        suggestion, cpu, wall = _timed(lambda: pc.suggest_actuators((A, B, C), cands))
        rows["suggest"].append((cpu, wall))
        _, cpu, wall = _timed(lambda: pc.classify_modes((A, B, C)))
        rows["classify_modes"].append((cpu, wall))
        plain, cpu, wall = _timed(lambda: plain_margins(A, B, C, plain_subset))
        scale = count / max(plain_count, 1)
        rows["plain (scaled to all candidates)"].append((cpu * scale, wall * scale))
    by_name = {r.name: r.margin for r in suggestion.ranking}
    worst = max(abs(by_name[k] - v) / max(v, 1e-300) for k, v in plain.items())
    best = {k: (min(c for c, _ in v), min(w for _, w in v)) for k, v in rows.items()}
    return {"states": n, "hidden": hidden, "candidates": count, "repeats": repeats,
            "best_cpu_seconds": {k: v[0] for k, v in best.items()},
            "best_wall_seconds": {k: v[1] for k, v in best.items()},
            "suggest_over_classify_modes_cpu": best["suggest"][0] / best["classify_modes"][0],
            "plain_over_suggest_cpu": best["plain (scaled to all candidates)"][0]
            / best["suggest"][0],
            "largest_relative_margin_difference_vs_plain": worst,
            "recommended": list(suggestion.recommended), "search": suggestion.search}


def structural_benchmark(n, seed=3):
    rng = np.random.default_rng(seed)
    edges = 3 * n
    A = scipy.sparse.csr_array((np.ones(edges), (rng.integers(0, n, edges),
                                                 rng.integers(0, n, edges))), shape=(n, n))
    B = np.zeros((n, 5))
    B[rng.integers(0, n, 5), np.arange(5)] = 1.0
    model = pc.StateSpaceModel(A, B, np.zeros((0, n)))
    s, cpu, wall = _timed(lambda: pc.structural_placement(model))
    return {"states": n, "edges": int(A.nnz), "cpu_seconds": cpu, "wall_seconds": wall,
            "minimum_count": s.minimum_count, "additional_count": s.additional_count}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--states", type=int, default=100)
    parser.add_argument("--hidden", type=int, default=10)
    parser.add_argument("--candidates", type=int, default=100)
    parser.add_argument("--plain-candidates", type=int, default=5)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--structural-states", type=int, default=100_000)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--json", default=None, help="also write the figures to this file")
    args = parser.parse_args(argv)
    if args.quick:
        args.states, args.hidden, args.candidates = 40, 5, 20
        args.structural_states, args.repeats = 10_000, 1
    out = {"ranking": ranking_benchmark(args.states, args.hidden, args.candidates,
                                        args.repeats, args.plain_candidates),
           "structural": structural_benchmark(args.structural_states)}
    print(json.dumps(out, indent=2))
    if args.json:
        with open(args.json, "w", encoding="utf-8") as f:
            json.dump(out, f, indent=2)


if __name__ == "__main__":
    main()
