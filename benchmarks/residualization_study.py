"""Balanced residualization on generated models: error bound, steady-state gain, reference.

Random stable models (4-30 states, 1-3 inputs and outputs, continuous and discrete time;
a quarter of them with 1-2 unstable modes), each reduced by
:func:`plantcore.balanced_residualization` to a random admissible order.  For each:

* the measured error, the peak gain of ``G - G_r`` (``plantcore.reduction.truncation_error``),
  against the bound ``2 x sum of the discarded Hankel singular values`` (Liu and Anderson
  1989; Al-Saggaf and Franklin 1988 in discrete time), allowing ``1e-10`` of the model's peak
  gain for rounding (when the order keeps every state the bound is 0 and the measured
  difference is the rounding of the balancing);
* the steady-state gain difference ``max |G(0) - G_r(0)|`` (``G(1)`` in discrete time)
  relative to ``max |G(0)|``;
* for the stable models, agreement with slycot's ``ab09nd`` (singular perturbation
  approximation, balancing-free square-root method) by ``plantcore.check_equivalence``.

Run::

    OPENBLAS_NUM_THREADS=1 python benchmarks/residualization_study.py --count 200
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from plantcore import StateSpaceModel, balanced_residualization, check_equivalence, peak_gain
from plantcore.reduction import truncation_error


def _model(rng, discrete: bool, unstable: int):
    n = int(rng.integers(4, 31))
    m, p = int(rng.integers(1, 4)), int(rng.integers(1, 4))
    A = rng.standard_normal((n, n))
    if discrete:
        A = A / (1.05 * max(abs(np.linalg.eigvals(A))))
    else:
        A = A - (max(np.linalg.eigvals(A).real) + 0.2) * np.eye(n)
    for k in range(unstable):
        A[k, :] = 0.0
        A[:, k] = 0.0
        A[k, k] = 1.5 + k if discrete else 0.5 + k
    return StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)),
                           rng.standard_normal((p, m)), dt=0.1 if discrete else None)


def _reference(model, order):
    try:
        import slycot
    except ImportError:
        return None
    out = slycot.ab09nd("D" if model.is_discrete else "C", "N", "N", model.n, model.n_inputs,
                        model.n_outputs, model.A.copy(), model.B.copy(), model.C.copy(),
                        model.D.copy(), alpha=1.0 if model.is_discrete else 0.0, nr=order)
    nr, Ar, Br, Cr, Dr = out[:5]
    return StateSpaceModel(Ar[:nr, :nr], Br[:nr], Cr[:, :nr], Dr, dt=model.dt)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=200)
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    start = time.perf_counter()
    worst_ratio, worst_dc, bound_failures, worst_rounding = 0.0, 0.0, 0, 0.0
    agree = compared = 0
    failures = []
    for i in range(args.count):
        discrete = bool(i % 2)
        unstable = int(rng.integers(1, 3)) if i % 4 == 3 else 0
        model = _model(rng, discrete, unstable)
        full = balanced_residualization(model)
        order = int(rng.integers(unstable, full.order + 1))
        try:
            red = balanced_residualization(model, order=order)
        except ValueError:  # an order through a repeated value: take the full order
            continue
        measured = truncation_error(model, red.model).value
        scale = peak_gain(model).value
        if red.error_bound > 0:
            worst_ratio = max(worst_ratio, measured / red.error_bound)
        else:  # nothing removed: what remains is the rounding of the balancing
            worst_rounding = max(worst_rounding, measured / scale)
        bound_failures += measured > red.error_bound * (1 + 1e-9) + 1e-10 * scale
        point = 1.0 if discrete else 0.0
        dc = model.transfer_at(point)
        worst_dc = max(worst_dc, float(np.abs(dc - red.model.transfer_at(point)).max()
                                       / np.abs(dc).max()))
        if not unstable:
            ref = _reference(model, order)
            if ref is not None and ref.n == red.order:
                compared += 1
                try:
                    agree += check_equivalence(ref, red.model, tol=1e-8).equivalent
                except (TypeError, ValueError, ArithmeticError) as exc:  # reported, not hidden
                    failures.append(f"model {i}: check_equivalence raised "
                                    f"{type(exc).__name__}: {exc}")
    print(f"{args.count} models, seed {args.seed}, {time.perf_counter() - start:.0f} s")
    print(f"largest measured error / bound: {worst_ratio:.9f}; bound exceeded (beyond 1e-10 of "
          f"the peak gain): {bound_failures}; largest error / peak gain with nothing removed: "
          f"{worst_rounding:.3g}")
    print(f"largest relative steady-state gain difference: {worst_dc:.3g}")
    print(f"equivalent to slycot ab09nd (tol 1e-8): {agree} of {compared}")
    for line in failures:
        print(line)


if __name__ == "__main__":
    main()
