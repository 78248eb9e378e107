"""Per-call time of the decomposition and the minimal realization on small and medium models.

Issue 17's speed targets for dense models of n = 10 to 400 states with 1-4 inputs and
outputs, each call computing its own modal certificate: ``kalman_decomposition`` and
``minimal_realization`` at most 0.5 ms per call at n = 10, and at most 2 x slycot
``tb01pd`` (job ``"M"``, no equilibration) at n = 100-400.  The models, the calls and the
interleaved timing are those of :mod:`bench_core` (seeded ``generic`` and ``nonminimal``
models; calls interleaved, order rotated each round; medians of wall and CPU seconds).
This is a benchmark, not a test: nothing here fails on time.

Example::

    python benchmarks/bench_small_core.py --threads 1 2
"""

from __future__ import annotations

import argparse
import json
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import bench_core  # noqa: E402  (the models, calls and timing of the core benchmark)

SIZES = (10, 50, 100, 200, 400)
IO_CHOICES = ("1x1", "2x2", "4x4")
CALLS = ("kalman", "minimal", "tb01pd")
SMALL_LIMIT_MS = 0.5        # target at n = 10
RATIO_LIMIT = 2.0           # target at n = 100 .. 400, against tb01pd
RATIO_SIZES = range(100, 401)


def default_repeats(n: int) -> int:
    """Enough runs for a steady median without making n = 400 slow: 200 at n = 10, 15 at 400."""
    return max(15, min(200, 6000 // n))


def measure(kind: str, n: int, m: int, p: int, repeats: int) -> dict | None:
    """Median milliseconds (wall and CPU) of the three calls on one seeded model, or None
    when the generator cannot draw that shape (non-minimal models need room for the
    chains of every part)."""
    try:
        model = bench_core.make_model(kind, n, m, p)[0]
    except ValueError:
        return None
    every = bench_core.calls(model)
    fns = {k: every[k] for k in CALLS if k in every}
    wall, cpu, _ = bench_core.time_interleaved(fns, repeats)
    return {"wall_ms": {k: 1e3 * v for k, v in wall.items()},
            "cpu_ms": {k: 1e3 * v for k, v in cpu.items()}}


def verdict(n: int, ms: float, ratio: float) -> str:
    """The issue-17 target that applies at this size, and whether the figure meets it."""
    if n == 10:
        return f"<= {SMALL_LIMIT_MS} ms: {'met' if ms <= SMALL_LIMIT_MS else 'missed'}"
    if n in RATIO_SIZES:
        return f"<= {RATIO_LIMIT} x: {'met' if ratio <= RATIO_LIMIT else 'missed'}"
    return ""


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=list(SIZES))
    parser.add_argument("--kinds", nargs="+", choices=bench_core.KINDS,
                        default=list(bench_core.KINDS))
    parser.add_argument("--io", nargs="+", choices=IO_CHOICES, default=list(IO_CHOICES))
    parser.add_argument("--threads", type=int, nargs="+", default=[1],
                        help="BLAS thread counts to run (every loaded OpenBLAS); our calls "
                             "limit themselves to one thread inside, tb01pd uses these")
    parser.add_argument("--repeats", type=int, default=None,
                        help="timed runs per call (default: 200 at n = 10 down to 15)")
    parser.add_argument("--cpu", action="store_true",
                        help="judge by CPU time instead of wall time (steadier on a "
                             "loaded machine)")
    parser.add_argument("--json", help="write every figure to this file")
    args = parser.parse_args(argv)
    if bench_core.slycot is None:
        parser.error("slycot is needed for the tb01pd reference")
    lines, env = bench_core.blas_report()
    print("BLAS:", "; ".join(lines), env or "")
    clock = "cpu_ms" if args.cpu else "wall_ms"
    rows = []
    print(f"{'threads':>7} {'model':>10} {'n':>4} {'io':>4} | {'tb01pd ms':>9} | "
          f"{'kalman ms':>9} {'x tb01pd':>8} | {'minimal ms':>10} {'x tb01pd':>8} | target")
    for threads in args.threads:
        bench_core.set_blas_threads(threads)
        for kind in args.kinds:
            for n in args.sizes:
                for io in args.io:
                    m, p = (int(x) for x in io.split("x"))
                    found = measure(kind, n, m, p, args.repeats or default_repeats(n))
                    if found is None:
                        continue
                    t = found[clock]
                    ratios = {k: t[k] / t["tb01pd"] for k in ("kalman", "minimal")}
                    rows.append({"threads": threads, "kind": kind, "n": n, "io": io,
                                 **found, "ratios": ratios})
                    worst = max(t["kalman"], t["minimal"])
                    print(f"{threads:>7} {kind:>10} {n:>4} {io:>4} | {t['tb01pd']:>9.3f} | "
                          f"{t['kalman']:>9.2f} {ratios['kalman']:>8.1f} | "
                          f"{t['minimal']:>10.2f} {ratios['minimal']:>8.1f} | "
                          f"{verdict(n, worst, max(ratios.values()))}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"argv": sys.argv, "clock": clock, "rows": rows}, fh, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
