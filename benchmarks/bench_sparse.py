"""Large sparse models: time, memory and accuracy of the low-rank route (issue 18 targets).

Jobs (each in a fresh child process, so its peak resident memory is its own):

* ``reduce N``: build the generated drying-table plate with N states
  (:func:`plantcore.examples.heated_plate.heated_plate`), reduce it to order 30 with
  :func:`plantcore.balanced_truncation` (structural pre-reduction, low-rank ADI Gramians,
  square-root truncation, a posteriori error by sparse solves); time, peak RSS, factor
  ranks, residuals, bound and measured error.  Memory is compared with the model's own
  storage ``nnz + n r`` (doubles; r = the larger factor rank) and with one dense ``n x n``.
* ``dense N``: the same reduction through the dense path (``model.to_dense()`` then
  :func:`plantcore.balanced_truncation`), for the ratio where it fits.
* ``hsv N``: Hankel singular values of the low-rank route against the dense path, the
  worst relative difference over the values above ``1e-8`` of the largest.
* ``exact N``: the same against Hankel singular values computed to 40 digits with mpmath
  from the closed-form eigenvectors of a Dirichlet plate (small N only, e.g. 64).

Usage::

    python benchmarks/bench_sparse.py                    # 10,000 reduce, dense 2,500, hsv 2,025
    python benchmarks/bench_sparse.py --large            # also 100,000 (about 10 minutes)
    python benchmarks/bench_sparse.py --job reduce 40000 --job hsv 400

The machine is shared: the load average is printed with the results; times are those of
this run, and the dense/low-rank figure is a ratio measured in the same run.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time


def _peak_mb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def job_reduce(n: int, order: int = 30) -> dict:
    import numpy as np

    import plantcore as pc
    from plantcore.examples.heated_plate import heated_plate

    start = time.perf_counter()
    model = heated_plate(n)
    built = time.perf_counter() - start
    red = pc.balanced_truncation(model, order=order)
    elapsed = time.perf_counter() - start
    g = red.gramians
    r = max(g.controllability.rank, g.observability.rank)
    storage_mb = (model.A.nnz * 12 + model.n * r * 8 * 2) / 1e6  # CSR values+indices, Zc, Zo
    return {"job": "reduce", "n": model.n, "nnz": int(model.A.nnz), "order": red.order,
            "seconds": elapsed, "build_seconds": built, "peak_mb": _peak_mb(),
            "nnz_plus_nr_mb": storage_mb, "dense_nxn_mb": 8.0 * model.n ** 2 / 1e6,
            "factor_ranks": [g.controllability.rank, g.observability.rank],
            "adi_steps": [g.controllability.iterations, g.observability.iterations],
            "relative_residuals": [g.controllability.relative_residual,
                                   g.observability.relative_residual],
            "shifts": int(g.shifts.size), "error_bound": red.error_bound,
            "measured_error": red.peak_error.value,
            "error_evaluations": red.peak_error.evaluations,
            "hsv_head": [float(x) for x in np.asarray(red.hankel_singular_values)[:3]]}


def job_dense(n: int, order: int = 30) -> dict:
    import plantcore as pc
    from plantcore.examples.heated_plate import heated_plate

    model = heated_plate(n).to_dense()
    start = time.perf_counter()
    red = pc.balanced_truncation(model, order=order)
    elapsed = time.perf_counter() - start
    return {"job": "dense", "n": model.n, "order": red.order, "seconds": elapsed,
            "peak_mb": _peak_mb(), "error_bound": red.error_bound}


def job_hsv(n: int) -> dict:
    import numpy as np

    import plantcore as pc
    from plantcore.examples.heated_plate import heated_plate

    model = heated_plate(n)
    start = time.perf_counter()
    low = pc.hankel_singular_values(model)
    t_low = time.perf_counter() - start
    start = time.perf_counter()
    dense = pc.hankel_singular_values(model.to_dense())
    t_dense = time.perf_counter() - start
    result = {"job": "hsv", "n": model.n, "low_rank_values": int(low.size),
              "seconds_low_rank": t_low, "seconds_dense": t_dense}
    references = {"dense": dense}
    try:  # slycot through python-control: a second reference routine
        import control

        start = time.perf_counter()
        references["slycot"] = np.sort(control.hsvd(control.ss(model.A.toarray(), model.B,
                                                               model.C, 0)).real)[::-1]
        result["seconds_slycot"] = time.perf_counter() - start
    except ImportError:
        pass
    for label, ref in references.items():
        for level in (1e-8, 1e-6):
            k = int(np.count_nonzero(ref > level * ref[0]))
            worst = float(np.max(np.abs(low[:k] - ref[:k]) / ref[:k])) if low.size >= k else None
            result[f"worst_vs_{label}_above_{level:g}"] = worst
    return result


def job_exact(n: int) -> dict:
    """Dirichlet plate, closed-form eigenvectors, Gramians and their factors in mpmath."""
    import mpmath as mp
    import numpy as np
    import scipy.sparse

    import plantcore as pc

    mp.mp.dps = 40
    N = round(n ** 0.5)
    n = N * N
    T = scipy.sparse.diags([np.ones(N - 1), -2.0 * np.ones(N), np.ones(N - 1)], [-1, 0, 1])
    A = (scipy.sparse.kron(scipy.sparse.identity(N), T)
         + scipy.sparse.kron(T, scipy.sparse.identity(N))).tocsr() * N * N
    B = np.zeros((n, 2))
    B[5, 0], B[n // 2 + 7, 1] = 1.0, 1.0
    C = np.zeros((3, n))
    C[0, n - 3], C[1, n // 3], C[2, n // 4] = 1.0, 1.0, 1.0
    # 1-D eigenpairs of the second difference (closed form), 2-D by Kronecker products
    lam1 = [(-2 + 2 * mp.cos(k * mp.pi / (N + 1))) * N * N for k in range(1, N + 1)]
    V1 = mp.matrix(N, N)
    for j in range(N):
        for k in range(N):
            V1[j, k] = mp.sqrt(mp.mpf(2) / (N + 1)) * mp.sin((j + 1) * (k + 1) * mp.pi / (N + 1))
    lam = [lam1[k] + lam1[m] for k in range(N) for m in range(N)]

    def rotate(M):
        out = mp.matrix(n, M.shape[1])
        for c in range(M.shape[1]):
            X = mp.matrix(N, N)
            for a in range(N):
                for b in range(N):
                    X[a, b] = M[a * N + b, c]
            Y = V1.T * X * V1
            for k in range(N):
                for m in range(N):
                    out[k * N + m, c] = Y[k, m]
        return out

    def gramian(F):
        G = mp.matrix(n, n)
        for i in range(n):
            for j in range(n):
                G[i, j] = -sum(F[i, c] * F[j, c] for c in range(F.cols)) / (lam[i] + lam[j])
        return G

    tiny = mp.eye(n) * mp.mpf(10) ** -35
    Lc = mp.cholesky(gramian(rotate(B)) + tiny)
    Lo = mp.cholesky(gramian(rotate(C.T)) + tiny)
    exact = np.array(sorted((float(x) for x in mp.svd_r(Lo.T * Lc, compute_uv=False)),
                            reverse=True))
    low = pc.hankel_singular_values(pc.StateSpaceModel(A, B, C))
    dense = pc.hankel_singular_values(pc.StateSpaceModel(A.toarray(), B, C))
    k = int(np.count_nonzero(exact > 1e-8 * exact[0]))

    def worst(x):
        return float(np.max(np.abs(x[:k] - exact[:k]) / exact[:k])) if x.size >= k else None

    return {"job": "exact", "n": n, "values_above_1e-8": k, "low_rank_worst": worst(low),
            "dense_worst": worst(dense)}


JOBS = {"reduce": job_reduce, "dense": job_dense, "hsv": job_hsv, "exact": job_exact}


def _run_child(name: str, n: int) -> dict:
    out = subprocess.run([sys.executable, __file__, "--child", name, str(n)],
                         capture_output=True, text=True, check=False)
    if out.returncode:
        return {"job": name, "n": n, "error": out.stderr.strip().splitlines()[-1:]}
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--job", nargs=2, action="append", metavar=("KIND", "N"),
                        help="run one job (reduce, dense, hsv, exact) at size N; repeatable")
    parser.add_argument("--large", action="store_true", help="also reduce 100,000 states")
    parser.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    parser.add_argument("--json", default=None, help="also write the results here")
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(JOBS[args.child[0]](int(args.child[1]))))
        return 0
    jobs = [(k, int(n)) for k, n in args.job] if args.job else \
        [("reduce", 10_000), ("dense", 2_500), ("reduce", 2_500), ("hsv", 2_025), ("exact", 64)]
    if args.large:
        jobs.append(("reduce", 100_000))
    print(f"load average {os.getloadavg()}, {os.cpu_count()} cores")
    results = []
    for kind, n in jobs:
        result = _run_child(kind, n)
        results.append(result)
        print(json.dumps(result))
    dense = {r["n"]: r["seconds"] for r in results if r.get("job") == "dense" and "seconds" in r}
    for r in results:
        if r.get("job") == "reduce" and r["n"] in dense:
            print(f"n = {r['n']}: dense path / low-rank path time = "
                  f"{dense[r['n']] / r['seconds']:.1f}")
    if args.json:
        with open(args.json, "w", encoding="utf-8") as f:
            json.dump(results, f, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
