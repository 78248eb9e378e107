"""Is an order read from noisy impulse-response data confident exactly when its gap is large?

Generated discrete-time models of known minimal order (2-12 states, 1-3 inputs and outputs,
poles of modulus 0.6-0.9), 200 samples of their exact pulse response plus white noise whose
level is set so that the weakest noise-free Hankel singular value stands a chosen factor
``g`` above the typical spectral norm of the noise Hankel matrix (``g`` log-uniform in
[1, 1e4]).  Each model is realized by :func:`plantcore.realize_impulse_response` with the
noise level estimated from the data.  Outcomes per band of ``g``: ``right, unflagged``,
``right, fragile``, ``wrong, fragile``, ``wrong, unflagged`` (must be 0) and ``order too
high``, with the smallest ``signal_margin`` among the unflagged answers.

A second family, ``one state hidden``, adds to such a model (``g`` in [300, 1e4]) one more
state whose noise-free Hankel singular value lies at 0.02-0.3 of the noise norm: no method
can see it (Weyl's inequality; the noise alone reaches further), so the data show one state
fewer than the model has.  These rows show what a confident answer means: the order the data
support, with every missed state below the noise.

Run (one BLAS thread)::

    OPENBLAS_NUM_THREADS=1 python benchmarks/impulse_order_confidence_study.py --count 300
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
import scipy.linalg

from plantcore import StateSpaceModel, markov_parameters, realize_impulse_response
from plantcore.reduction.impulse_realization import _block_hankel, _hankel_shape, _noise_spectra

SAMPLES = 200
BANDS = ((1.0, 3.0), (3.0, 10.0), (10.0, 100.0), (100.0, 1e3), (1e3, 1e4))


def modal_model(rng, n: int, m: int, p: int) -> StateSpaceModel:
    """A minimal discrete model of order ``n`` with poles of modulus 0.6-0.9 (known order)."""
    blocks = []
    for _ in range(n // 2):
        r, a = rng.uniform(0.6, 0.9), rng.uniform(0.2, 2.8)
        blocks.append(r * np.array([[np.cos(a), np.sin(a)], [-np.sin(a), np.cos(a)]]))
    if n % 2:
        blocks.append(np.array([[rng.uniform(0.6, 0.9) * rng.choice([-1.0, 1.0])]]))
    return StateSpaceModel(scipy.linalg.block_diag(*blocks), rng.standard_normal((n, m)),
                           rng.standard_normal((p, n)), rng.standard_normal((p, m)), dt=1.0)


def noisy_draw(rng, model: StateSpaceModel, ratio: float, weakest: int | None = None):
    """Exact pulse response plus white noise such that noise-free Hankel singular value
    number ``weakest`` (default: the last, ``model.n``) is ``ratio`` times the typical
    spectral norm of the noise Hankel matrix.  Returns ``(data, sigma)``."""
    exact = markov_parameters(model, SAMPLES).values
    L = SAMPLES - 1
    q, r = _hankel_shape(L)
    clean = scipy.linalg.svdvals(_block_hankel(exact, q, r))
    unit = float(_noise_spectra(L, model.n_outputs, model.n_inputs, q, r)[:, 0].mean())
    sigma = clean[(weakest or model.n) - 1] / (ratio * unit)
    noise = sigma * rng.standard_normal(exact.shape)
    noise[0] = 0.0
    return exact + noise, sigma


def _hidden_model(rng, n: int, m: int, p: int):
    """``A, B, C`` of ``modal_model`` of order ``n`` plus one real state, and the base model."""
    base = modal_model(rng, n, m, p)
    pole = rng.uniform(0.6, 0.9) * rng.choice([-1.0, 1.0])
    A = scipy.linalg.block_diag(base.A, [[pole]])
    B = np.vstack([base.B, rng.standard_normal((1, m))])
    C = np.hstack([base.C, rng.standard_normal((p, 1))])
    return A, B, C, base


def run(count: int, seed: int):
    rng = np.random.default_rng(seed)
    rows = {}
    keys = ("models", "right_unflagged", "right_fragile", "wrong_fragile", "wrong_unflagged",
            "too_high", "visible_order")
    for band in BANDS:
        rows[("known order", band)] = dict.fromkeys(keys, 0) | {"margins": []}
    rows[("one state hidden", None)] = dict.fromkeys(keys, 0) | {"margins": []}
    for _ in range(count):
        n, m, p = int(rng.integers(2, 13)), int(rng.integers(1, 4)), int(rng.integers(1, 4))
        ratio = 10 ** rng.uniform(0.0, 4.0)
        model = modal_model(rng, n, m, p)
        data, _ = noisy_draw(rng, model, ratio)
        fit = realize_impulse_response(data, sample_time=1.0)
        band = next(b for b in BANDS if b[0] <= ratio < b[1] or b == BANDS[-1])
        _tally(rows[("known order", band)], fit, model.n, model.n)
    for _ in range(count // 3):
        n, m, p = int(rng.integers(2, 12)), int(rng.integers(1, 4)), int(rng.integers(1, 4))
        A, B, C, base = _hidden_model(rng, n, m, p)
        strong = 10 ** rng.uniform(math.log10(300.0), 4.0)
        hidden = rng.uniform(0.02, 0.3)
        # Scale the extra state's column until its own Hankel value sits at `hidden` x the
        # noise norm, the noise being set by the weakest of the n other states at `strong`.
        exact_base = markov_parameters(base, SAMPLES).values
        L = SAMPLES - 1
        q, r = _hankel_shape(L)
        weakest = scipy.linalg.svdvals(_block_hankel(exact_base, q, r))[n - 1]
        extra = StateSpaceModel(A[n:, n:], B[n:], C[:, n:], np.zeros((p, m)), dt=1.0)
        own = scipy.linalg.svdvals(_block_hankel(markov_parameters(extra, SAMPLES).values, q, r))[0]
        B = B.copy()
        B[n:] *= (weakest * hidden / strong) / own
        model = StateSpaceModel(A, B, C, base.D, dt=1.0)
        data, _ = noisy_draw(rng, base, strong)
        data = data - exact_base + markov_parameters(model, SAMPLES).values
        fit = realize_impulse_response(data, sample_time=1.0)
        _tally(rows[("one state hidden", None)], fit, model.n, n)
    return rows


def _tally(row, fit, true_order: int, visible_order: int):
    row["models"] += 1
    row.setdefault("search_ratios", []).append(
        max((statistic / threshold for _, statistic, threshold in fit.residual_search),
            default=0.0))
    row["search_added"] = row.get("search_added", 0) + (fit.order > fit.hankel_order)
    row["too_high"] += fit.order > true_order
    row["visible_order"] += fit.order == visible_order
    if not fit.fragile and fit.order:
        row["margins"].append(fit.signal_margin)
    if fit.order == true_order:
        row["right_fragile" if fit.fragile else "right_unflagged"] += 1
    else:
        row["wrong_fragile" if fit.fragile else "wrong_unflagged"] += 1


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=300, help="models with a known order")
    parser.add_argument("--seed", type=int, default=2027)
    args = parser.parse_args(argv)
    start = time.perf_counter()
    rows = run(args.count, args.seed)
    print(f"{SAMPLES} samples, orders 2-12, 1-3 inputs and outputs, seed {args.seed}; "
          f"{time.perf_counter() - start:.0f} s")
    print("| family | weakest state / noise norm | models | right, unflagged | right, fragile | "
          "wrong, fragile | wrong, unflagged | order too high | order = visible order | "
          "smallest unflagged margin | residual search added states | largest search "
          "statistic / threshold |")
    print("|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for (family, band), row in rows.items():
        shown = f"{band[0]:g}-{band[1]:g}" if band else "0.02-0.3 (others 300-1e4)"
        margin = f"{min(row['margins']):.3g}" if row["margins"] else "-"
        print(f"| {family} | {shown} | {row['models']} | {row['right_unflagged']} | "
              f"{row['right_fragile']} | {row['wrong_fragile']} | {row['wrong_unflagged']} | "
              f"{row['too_high']} | {row['visible_order']} | {margin} | "
              f"{row.get('search_added', 0)} | {max(row.get('search_ratios', [0.0])):.3g} |")


if __name__ == "__main__":
    main()
