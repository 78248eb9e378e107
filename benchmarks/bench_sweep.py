"""Envelope sweep throughput: points per second per core, local process pool against Dask.

The model family is our own: a lifting platform's flexible boom cut into ten segments (a
chain of ten masses joined by springs and dampers, 20 states), driven by a force at its foot
and measured at its tip.  Each point draws the segment stiffness, the structural damping
and the tip load.  Every point gets the full per-point analysis of :func:`plantcore.sweeps.sweep`
(Kalman parts, mode margins, distance estimates, Hankel singular values).

Both executors get the same points and the same number of worker processes (one per core).
The Dask cluster is a ``LocalCluster`` on loopback started before the clock runs (a cluster
is normally up before a sweep is sent to it), and one small warm-up sweep is run on each
executor first so that neither pays the one-time import of the library in its workers.
The executors run in alternating rounds over slices of the points, so that background
load on a shared machine affects both alike.

Besides wall-clock throughput (the target's measure), the benchmark records the CPU time
each executor spent: the worker processes' CPU seconds (the local pool's children, reaped
when the pool closes; each Dask worker's ``time.process_time``, which counts all of its
threads) and this process's own (which hosts the Dask scheduler and client, or the pool's
feeder).  On a machine that other jobs keep busy, wall-clock throughput measures the share
of the cores each executor obtained as much as its efficiency; CPU milliseconds per point
measure the work done.  The load average is printed so that a loaded run can be told apart.

Usage::

    python benchmarks/bench_sweep.py            # 10,000 points (a few minutes)
    python benchmarks/bench_sweep.py --quick    # 600 points, a first check
    python benchmarks/bench_sweep.py --points 2000 --rounds 4
    python benchmarks/bench_sweep.py --points 2000 --json result.json

Set ``OPENBLAS_NUM_THREADS=1`` (or the variable of your BLAS) for a run: the Dask workers
get one BLAS thread each from Dask's own defaults, the local pool's workers inherit this
process's setting.

The target is Dask at 80 % or more of the local pool's throughput.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time

import numpy as np

import plantcore as pc

SEGMENTS = 10


def boom_model(point):
    """Ten masses in a chain (20 states): force at the foot, tip position measured."""
    n = SEGMENTS
    k = point["segment_stiffness"]
    c = point["structural_damping"]
    masses = np.full(n, 40.0)
    masses[-1] += point["tip_load"]
    K = np.zeros((n, n))
    for i in range(n):
        K[i, i] = 2.0 * k if i < n - 1 else k
        if i:
            K[i, i - 1] = K[i - 1, i] = -k
    Minv = 1.0 / masses
    A = np.zeros((2 * n, 2 * n))
    A[:n, n:] = np.eye(n)
    A[n:, :n] = -Minv[:, None] * K
    A[n:, n:] = -Minv[:, None] * (c * K)
    B = np.zeros((2 * n, 1))
    B[n, 0] = Minv[0]
    C = np.zeros((1, 2 * n))
    C[0, n - 1] = 1.0
    return pc.StateSpaceModel(A, B, C)


def make_points(count: int, seed: int = 2024):
    return pc.random_points({
        "segment_stiffness": ("log_uniform", 2.0e4, 2.0e5),
        "structural_damping": ("uniform", 1.0e-3, 1.0e-2),
        "tip_load": ("uniform", 0.0, 400.0),
    }, count, seed)


def same_tables(a, b) -> bool:
    for ra, rb in zip(a.rows, b.rows):
        for key, x in ra.items():
            y = rb[key]
            if isinstance(x, float) and isinstance(y, float):
                if not (x == y or math.isclose(x, y, rel_tol=1e-12) or (math.isnan(x) and math.isnan(y))):
                    return False
            elif isinstance(x, tuple) and isinstance(y, tuple):
                if len(x) != len(y) or not np.allclose(x, y, rtol=1e-12, atol=0):
                    return False
            elif x != y:
                return False
    return len(a.rows) == len(b.rows)


def _worker_cpu():
    """CPU seconds of the calling process (run on each Dask worker)."""
    import time as _time

    return _time.process_time()


def _cpu_snapshot(client, executor):
    """``(own CPU seconds, worker CPU seconds)`` so far, for the given executor."""
    t = os.times()
    own = t.user + t.system
    if executor == "local":
        return own, t.children_user + t.children_system
    return own, float(sum(client.run(_worker_cpu).values()))


def timed(label, function):
    start = time.perf_counter()
    value = function()
    seconds = time.perf_counter() - start
    print(f"  {label}: {seconds:.1f} s", file=sys.stderr, flush=True)
    return value, seconds


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="600 points instead of 10,000")
    parser.add_argument("--points", type=int, default=None, help="number of points")
    parser.add_argument("--serial-points", type=int, default=40,
                        help="points of the single-process reference run")
    parser.add_argument("--rounds", type=int, default=4,
                        help="alternating local/Dask rounds the points are split into")
    parser.add_argument("--json", default=None, help="also write the numbers to this file")
    args = parser.parse_args(argv)
    count = args.points or (600 if args.quick else 10_000)
    workers = os.cpu_count() or 1     # the local pool uses every core; Dask gets as many
    points = make_points(count)
    print(f"sweep benchmark: {count} points of a {2 * SEGMENTS}-state model, {workers} worker "
          f"process(es) on {os.cpu_count()} core(s)", file=sys.stderr)

    load_start = os.getloadavg()[0]
    # Single process: the cost of one point without any executor.
    warm = make_points(2 * workers, seed=1)
    pc.sweep(boom_model, warm, executor="serial", progress=False)       # imports, caches
    cpu0 = time.process_time()
    serial, t_serial = timed("serial reference", lambda: pc.sweep(
        boom_model, points[:args.serial_points], executor="serial", progress=False))
    cpu_serial = time.process_time() - cpu0

    # The two executors run in alternating rounds (local then Dask, then Dask then local,
    # ...) over slices of the points, so that both see the same machine: on a shared
    # machine the background load drifts, and one long run each would measure the drift.
    # The Dask cluster is a LocalCluster on loopback with one single-threaded worker
    # process per core, started before the clock runs.  The local pool is made per sweep
    # (that is part of its cost); the warm-up loads the library in this process first, so
    # that the forked workers inherit it.
    (cluster, client), t_start = timed("Dask cluster start", lambda: _cluster(workers))
    t_local = t_dask = 0.0
    cpu = {"local": [0.0, 0.0], "dask": [0.0, 0.0]}      # [own, workers] CPU seconds
    local_rows, dask_rows = [], []
    try:
        pc.sweep(boom_model, warm, executor="local", progress=False)
        pc.sweep(boom_model, warm, executor="dask", scheduler=client, progress=False)
        bounds = np.linspace(0, count, args.rounds + 1).astype(int)
        for r in range(args.rounds):
            chunk = points[bounds[r]:bounds[r + 1]]
            order = ("local", "dask") if r % 2 == 0 else ("dask", "local")
            for executor in order:
                own0, work0 = _cpu_snapshot(client, executor)
                start = time.perf_counter()
                part = pc.sweep(boom_model, chunk, executor=executor,
                                scheduler=client if executor == "dask" else None,
                                progress=False)
                seconds = time.perf_counter() - start
                own1, work1 = _cpu_snapshot(client, executor)
                cpu[executor][0] += own1 - own0
                cpu[executor][1] += work1 - work0
                if executor == "local":
                    t_local += seconds
                    local_rows.extend(part.rows)
                else:
                    t_dask += seconds
                    dask_rows.extend(part.rows)
            print(f"  round {r + 1}/{args.rounds}: local {t_local:.1f} s, Dask {t_dask:.1f} s "
                  f"so far (load average {os.getloadavg()[0]:.1f})", file=sys.stderr, flush=True)
    finally:
        client.close()
        cluster.close()
    local = pc.SweepResult(tuple(local_rows), serial.parameters, executor="local")
    dask = pc.SweepResult(tuple(dask_rows), serial.parameters, executor="dask")

    identical = same_tables(local, dask) and same_tables(
        type(local)(local.rows[:len(serial.rows)], local.parameters), serial)
    results = {
        "points": count,
        "states": 2 * SEGMENTS,
        "workers": workers,
        "cores": os.cpu_count(),
        "serial_points_per_second": len(serial.rows) / t_serial,
        "local_points_per_second": count / t_local,
        "local_points_per_second_per_core": count / t_local / workers,
        "dask_points_per_second": count / t_dask,
        "dask_points_per_second_per_core": count / t_dask / workers,
        "dask_over_local": t_local / t_dask,
        "serial_cpu_ms_per_point": 1e3 * cpu_serial / len(serial.rows),
        "local_cpu_ms_per_point": 1e3 * sum(cpu["local"]) / count,
        "local_worker_cpu_ms_per_point": 1e3 * cpu["local"][1] / count,
        "dask_cpu_ms_per_point": 1e3 * sum(cpu["dask"]) / count,
        "dask_worker_cpu_ms_per_point": 1e3 * cpu["dask"][1] / count,
        "dask_over_local_cpu_efficiency": sum(cpu["local"]) / sum(cpu["dask"]),
        "local_core_share": sum(cpu["local"]) / t_local / workers,
        "dask_core_share": sum(cpu["dask"]) / t_dask / workers,
        "load_average_start": load_start,
        "load_average_end": os.getloadavg()[0],
        "rounds": args.rounds,
        "dask_cluster_start_seconds": t_start,
        "failed_points": len(local.failed),
        "tables_identical": bool(identical),
    }
    print()
    print(f"{'executor':<10} {'seconds':>9} {'points/s':>10} {'points/s/core':>14}")
    print(f"{'serial':<10} {t_serial:>9.1f} {results['serial_points_per_second']:>10.2f} "
          f"{results['serial_points_per_second']:>14.2f}   ({len(serial.rows)} points, 1 core)")
    print(f"{'local':<10} {t_local:>9.1f} {results['local_points_per_second']:>10.2f} "
          f"{results['local_points_per_second_per_core']:>14.2f}")
    print(f"{'dask':<10} {t_dask:>9.1f} {results['dask_points_per_second']:>10.2f} "
          f"{results['dask_points_per_second_per_core']:>14.2f}")
    ratio = results["dask_over_local"]
    print(f"Dask / local throughput: {ratio:.2f} (target >= 0.80: "
          f"{'met' if ratio >= 0.8 else 'NOT met'}); tables identical: "
          f"{'yes' if identical else 'NO'}; failed points: {len(local.failed)}")
    print()
    print(f"{'executor':<10} {'CPU ms/point':>13} {'of which workers':>17} {'share of cores':>15}")
    print(f"{'serial':<10} {results['serial_cpu_ms_per_point']:>13.2f} {'':>17} {'':>15}")
    for name in ("local", "dask"):
        print(f"{name:<10} {results[name + '_cpu_ms_per_point']:>13.2f} "
              f"{results[name + '_worker_cpu_ms_per_point']:>17.2f} "
              f"{results[name + '_core_share']:>15.2f}")
    print(f"Dask / local on CPU time (local CPU per point / Dask CPU per point): "
          f"{results['dask_over_local_cpu_efficiency']:.2f}; load average "
          f"{results['load_average_start']:.1f} at start, {results['load_average_end']:.1f} at end "
          f"on {os.cpu_count()} core(s)")
    if args.json:
        with open(args.json, "w", encoding="utf-8") as handle:
            json.dump(results, handle, indent=2)
    return 0


def _cluster(workers):
    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                           dashboard_address=None, host="127.0.0.1")
    return cluster, Client(cluster, set_as_default=False)


if __name__ == "__main__":
    sys.exit(main())
