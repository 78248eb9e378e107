"""Does the impulse-response realization find the true order from noisy data?

Generated discrete-time models of known minimal order (2-40 states, 1-3 inputs and 1-3
outputs), their exact pulse responses (300 samples) with white noise at 40 dB
signal-to-noise (noise standard deviation = RMS of the samples h_1.. / 100), realized by
:func:`plantcore.realize_impulse_response` twice: with the noise level estimated from the
data (the default) and with the true noise level given.

Families:

* ``separated``: poles of modulus 0.90-0.97 at evenly spread angles (a jittered grid over
  (0.1, 3.0) rad), Gaussian B and C: every mode rings long enough to stand above the
  noise, so the true order is identifiable from the data.
* ``random``: poles of modulus 0.5-0.95 at random angles: many models have modes whose
  contribution lies below the noise; no method can see those, and the right answer is
  then the number of states the data show.

For each model the study also counts the *visible order*: how many singular values of the
noise-free Hankel matrix exceed the spectral norm of the actual noise Hankel matrix (by
Weyl's inequality, states below it can be hidden by the noise).

Outcomes per family: ``right`` (order = true order), ``right, fragile``, ``visible`` (order
= visible order), ``wrong, fragile``, ``wrong, unflagged`` (the failure that must not
happen when the decision is inside the factor-100 window).

Run (one BLAS thread; a few minutes on a loaded 2-core machine)::

    OPENBLAS_NUM_THREADS=1 python benchmarks/impulse_realization_study.py --count 200
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import scipy.linalg

from plantcore import StateSpaceModel, markov_parameters, realize_impulse_response
from plantcore.reduction.impulse_realization import _block_hankel

SAMPLES = 300
SNR_DB = 40.0
BANDS = ("2-20", "21-40")


def _model(rng, family: str):
    n = int(rng.integers(2, 41))
    m, p = int(rng.integers(1, 4)), int(rng.integers(1, 4))
    pairs = n // 2
    if family == "separated":
        radius = rng.uniform(0.90, 0.97, pairs + 1)
        grid = np.linspace(0.1, 3.0, pairs + 2)[1:-1] if pairs else np.zeros(0)
        spacing = (2.9 / (pairs + 1)) if pairs else 0.0
        angles = grid + rng.uniform(-0.25, 0.25, pairs) * spacing
    else:
        radius = rng.uniform(0.5, 0.95, pairs + 1)
        angles = rng.uniform(0.05, 3.1, pairs)
    blocks = [r * np.array([[np.cos(a), np.sin(a)], [-np.sin(a), np.cos(a)]])
              for r, a in zip(radius[:pairs], angles)]
    if n % 2:
        blocks.append(np.array([[radius[-1] * rng.choice([-1.0, 1.0])]]))
    A = scipy.linalg.block_diag(*blocks)
    return StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)),
                           rng.standard_normal((p, m)), dt=1.0)


def run(count: int, seed: int):
    rng = np.random.default_rng(seed)
    table = {}
    for family in ("separated", "random"):
        for band in BANDS:
            for mode in ("estimated", "given"):
                table[(family, band, mode)] = {"models": 0, "right": 0, "right_fragile": 0,
                                                   "visible": 0, "too_high": 0, "wrong_fragile": 0,
                                                   "wrong_unflagged": 0, "noise_ratio": []}
        for _ in range(count):
            model = _model(rng, family)
            exact = markov_parameters(model, SAMPLES).values
            sigma = np.sqrt(np.mean(exact[1:] ** 2)) / 10 ** (SNR_DB / 20)
            noise = sigma * rng.standard_normal(exact.shape)
            noise[0] = 0.0
            data = exact + noise
            for mode in ("estimated", "given"):
                fit = realize_impulse_response(data, sample_time=1.0,
                                               noise_level=sigma if mode == "given" else None)
                q, r = fit.block_rows, fit.block_columns
                if mode == "estimated":
                    clean = scipy.linalg.svdvals(_block_hankel(exact, q, r))
                    e_norm = np.linalg.norm(_block_hankel(noise, q, r), 2)
                    visible = int(np.count_nonzero(clean > e_norm))
                band = BANDS[0] if model.n <= 20 else BANDS[1]
                row = table[(family, band, mode)]
                row["models"] += 1
                row["too_high"] += fit.order > model.n
                row["noise_ratio"].append(fit.noise_level / sigma)
                if fit.order == model.n:
                    row["right"] += 1
                    row["right_fragile"] += fit.fragile
                elif fit.fragile:
                    row["wrong_fragile"] += 1
                else:
                    row["wrong_unflagged"] += 1
                row["visible"] += fit.order == visible
    return table


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=200, help="models per family")
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args(argv)
    start = time.perf_counter()
    table = run(args.count, args.seed)
    print(f"{SAMPLES} samples, {SNR_DB:g} dB, orders 2-40, 1-3 inputs and outputs, seed "
          f"{args.seed}; {time.perf_counter() - start:.0f} s")
    print("| family | orders | noise level | models | right | right, fragile | order = visible "
          "order | order too high | wrong, fragile | wrong, unflagged | estimated / true noise "
          "(median, max) |")
    print("|---|---|---|---:|---:|---:|---:|---:|---:|---:|---|")
    for (family, band, mode), row in table.items():
        ratio = np.array(row["noise_ratio"]) if row["noise_ratio"] else np.full(1, np.nan)
        print(f"| {family} | {band} | {mode} | {row['models']} | {row['right']} | "
              f"{row['right_fragile']} | {row['visible']} | {row['too_high']} | "
              f"{row['wrong_fragile']} | {row['wrong_unflagged']} | "
              f"{np.median(ratio):.3f}, {ratio.max():.3f} |")


if __name__ == "__main__":
    main()
