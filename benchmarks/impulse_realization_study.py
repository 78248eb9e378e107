"""Does the impulse-response realization find the true order from noisy data?

Generated discrete-time models of known minimal order (2-40 states, 1-3 inputs and 1-3
outputs), their exact pulse responses (300 samples) with white noise at 40 dB
signal-to-noise (noise standard deviation = RMS of the samples h_1.. / 100), realized by
:func:`plantcore.realize_impulse_response` twice: with the noise level estimated from the
data (the default) and with the true noise level given.

Families:

* ``separated``: poles of modulus 0.90-0.97 at evenly spread angles (a jittered grid over
  (0.1, 3.0) rad), Gaussian B and C: every mode rings long enough to stand above the
  noise unless its residue is small; 16 of 200 models (seeds 2026 and 4242 alike) have a
  state below the noise norm in every window, so not every order is identifiable.
* ``random``: poles of modulus 0.5-0.95 at random angles: many models have modes whose
  contribution lies below the noise; no method can see those, and the right answer is
  then the number of states the data show.

For each model the study also counts the *visible order*, decided from the true response
and the drawn noise before the model is realized: the largest number, over the windows of
samples the realization examines (the first 300, 200, 133, 89, 59 and 39 samples), of
singular values of the noise-free Hankel matrix that exceed the spectral norm of the actual
noise Hankel matrix of that window.  By Weyl's inequality a state below it can be hidden by
the noise; a model is *identifiable* when its visible order is its true order.  The
generators make unidentifiable data too (the separated family 16 of 200 at seeds 2026 and
7), so the target is reported over all data and over the identifiable data.  With the
residual search (:mod:`plantcore.reduction.damped_exponentials`), 189 (seed 2026) and
189-190 (seed 7) of the 200 separated models are found, 183 of 184 identifiable ones at both seeds;
the misses left have a state almost inside the others' responses or far below the noise
(README).  A second, model-intrinsic
criterion (column ``identifiable by Gramians``): every Hankel singular value of the model from
its own Gramians (:func:`plantcore.hankel_singular_values`) exceeds the expected spectral
norm of the noise Hankel matrix of the whole record (noise level times the mean norm of
seeded unit white-noise draws).  The two differ for states near the noise: the first uses the
actual noise and every window, the second neither.  Models that are not identifiable are
counted, in their own column, not removed.

Record length: the slowest pole has modulus 0.97 (time constant 1 / -ln 0.97 = 33 samples),
so 300 samples are 9 time constants and the slowest envelope ends at 0.97^300 = 1e-4 of its
start, two orders below the noise.  A longer record adds noise but no signal (the
realization's shorter windows discard it), so the unidentifiable states are weak because
of their small residues against the noise, not because the records are short.

Outcomes per family and order band: ``right`` (order = true order), ``right, unflagged``,
``identifiable`` and ``right / identifiable``, ``order too high``, ``wrong, fragile``,
``wrong, unflagged`` (the failure that must not happen), and how many of the unflagged wrong
answers miss only states that are not visible (``hidden``).

The last lines give the target (the true order on at least 95 % of the data) per family and
noise-level mode, over all data and over the identifiable data; ``--misses`` then describes
each wrong order: true and found order, visible order, the window and Hankel shape used,
the floor and the noise level against the actual noise, the data's and the noise-free Hankel
singular values around the true order over the actual noise norm ``||E||``, and the
noise-free value number ``n`` over ``||E||`` in every window.

``--records FILE`` writes one JSON line per fit: orders, flags and the residual search's
``(states, statistic, threshold)`` steps.

Run (one BLAS thread; about ten minutes on a 2-core machine)::

    OPENBLAS_NUM_THREADS=1 python benchmarks/impulse_realization_study.py --count 200 --misses
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np
import scipy.linalg

from plantcore import (
    StateSpaceModel,
    hankel_singular_values,
    markov_parameters,
    realize_impulse_response,
)
from plantcore.reduction.impulse_realization import (
    _block_hankel,
    _hankel_shape,
    _noise_spectra,
    _window_lengths,
)

SAMPLES = 300
SNR_DB = 40.0
BANDS = ((2, 10), (11, 20), (21, 30), (31, 40))
TARGET = 0.95  # issue 22: the true order on at least 95 % of the data


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


def _visible_order(exact, noise) -> int:
    """Most noise-free Hankel singular values above the actual noise norm in any window the
    realization examines (decided from the true response and the noise alone)."""
    best = 0
    for L in _window_lengths(SAMPLES - 1):
        q, r = _hankel_shape(L)
        clean = scipy.linalg.svdvals(_block_hankel(exact, q, r))
        e_norm = np.linalg.norm(_block_hankel(noise, q, r), 2)
        best = max(best, int(np.count_nonzero(clean > e_norm)))
    return best


def _describe_miss(family, index, mode, model, exact, noise, fit, visible) -> str:
    """One miss: orders, shapes, and the values around the true order against the noise."""
    n, q, r = model.n, fit.block_rows, fit.block_columns
    clean = scipy.linalg.svdvals(_block_hankel(exact, q, r))
    e_norm = np.linalg.norm(_block_hankel(noise, q, r), 2)
    low, s = max(min(fit.order, n) - 2, 0), fit.hankel_singular_values
    ratios = []
    for L in _window_lengths(SAMPLES - 1):
        qq, rr = _hankel_shape(L)
        c = scipy.linalg.svdvals(_block_hankel(exact, qq, rr))
        if c.size >= n:
            ratios.append(f"{L + 1}: {c[n - 1] / np.linalg.norm(_block_hankel(noise, qq, rr), 2):.2f}")
    return (f"{family} #{index} ({mode} level): true order {n}, found {fit.order} "
            f"({'fragile' if fit.fragile else 'UNFLAGGED'}), visible {visible}, {model.n_outputs} x "
            f"{model.n_inputs}, record {SAMPLES}, window {fit.window_samples} samples, Hankel "
            f"{q} x {r} blocks; floor / ||E|| = {fit.noise_floor / e_norm:.2f}, noise level used / "
            f"RMS of the actual noise = {fit.noise_level / np.sqrt(np.mean(noise[1:] ** 2)):.3f}\n"
            f"    Hankel values {low + 1}..{n + 1} / ||E||: data {_values(s[low:n + 1] / e_norm)}; "
            f"noise-free {_values(clean[low:n + 1] / e_norm)}\n"
            f"    noise-free value {n} / ||E|| per window: {', '.join(ratios)}")


def _values(x) -> str:
    return " ".join(f"{v:.2f}" for v in x)


def _band(n: int) -> str:
    low, high = next(b for b in BANDS if b[0] <= n <= b[1])
    return f"{low}-{high}"


def run(count: int, seed: int, misses=None, records=None):
    """The outcome table; ``misses`` (a list) collects a description of each wrong order,
    ``records`` (a list) one dictionary per fit (orders and the residual search's steps)."""
    rng = np.random.default_rng(seed)
    table = {}
    keys = ("models", "right", "right_unflagged", "identifiable", "right_identifiable",
            "too_high", "wrong_fragile", "wrong_unflagged", "wrong_unflagged_hidden", "wrong_margin",
            "gramian_identifiable", "right_gramian_identifiable")
    for family in ("separated", "random"):
        for low, high in BANDS:
            for mode in ("estimated", "given"):
                table[(family, f"{low}-{high}", mode)] = dict.fromkeys(keys, 0) | {
                    "noise_ratio": []}
        for index in range(count):
            model = _model(rng, family)
            exact = markov_parameters(model, SAMPLES).values
            sigma = np.sqrt(np.mean(exact[1:] ** 2)) / 10 ** (SNR_DB / 20)
            noise = sigma * rng.standard_normal(exact.shape)
            noise[0] = 0.0
            data = exact + noise
            q, r = _hankel_shape(SAMPLES - 1)
            expected = sigma * float(_noise_spectra(SAMPLES - 1, model.n_outputs,
                                                    model.n_inputs, q, r)[:, 0].mean())
            intrinsic = bool(np.all(hankel_singular_values(model) > expected))
            visible = _visible_order(exact, noise)
            for mode in ("estimated", "given"):
                fit = realize_impulse_response(data, sample_time=1.0,
                                               noise_level=sigma if mode == "given" else None)
                row = table[(family, _band(model.n), mode)]
                if records is not None:
                    records.append({"family": family, "index": index, "mode": mode,
                                    "true_order": model.n, "visible_order": visible,
                                    "hankel_order": fit.hankel_order, "order": fit.order,
                                    "fragile": fit.fragile,
                                    "residual_search": [list(step) for step in
                                                        fit.residual_search]})
                row["models"] += 1
                row["too_high"] += fit.order > model.n
                row["identifiable"] += visible == model.n
                row["gramian_identifiable"] += intrinsic
                row["noise_ratio"].append(fit.noise_level / sigma)
                if fit.order == model.n:
                    row["right"] += 1
                    row["right_unflagged"] += not fit.fragile
                    row["right_identifiable"] += visible == model.n
                    row["right_gramian_identifiable"] += intrinsic
                    continue
                if misses is not None:
                    misses.append(_describe_miss(family, index, mode, model, exact, noise, fit,
                                                 visible))
                row["wrong_margin"] = max(row["wrong_margin"],
                                          fit.signal_margin if fit.order else 0.0)
                if fit.fragile:
                    row["wrong_fragile"] += 1
                else:
                    row["wrong_unflagged"] += 1
                    row["wrong_unflagged_hidden"] += fit.order >= visible
    return table


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=200, help="models per family")
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--misses", action="store_true",
                        help="describe every wrong order after the table")
    parser.add_argument("--records", metavar="PATH",
                        help="write one JSON line per fit (orders, residual search steps)")
    args = parser.parse_args(argv)
    start = time.perf_counter()
    misses = [] if args.misses else None
    records = [] if args.records else None
    table = run(args.count, args.seed, misses, records)
    if records is not None:
        with open(args.records, "w", encoding="utf-8") as stream:
            for record in records:
                stream.write(json.dumps(record) + "\n")
    print(f"{SAMPLES} samples, {SNR_DB:g} dB, orders 2-40, 1-3 inputs and outputs, seed "
          f"{args.seed}; {time.perf_counter() - start:.0f} s")
    print("| family | orders | noise level | models | right | right, unflagged | identifiable | "
          "right / identifiable | right / identifiable by Gramians | order too high | wrong, fragile | wrong, unflagged (hidden "
          "states only) | largest margin of a wrong order | estimated / true noise (median, max) |")
    print("|---|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|")
    for (family, band, mode), row in table.items():
        ratio = np.array(row["noise_ratio"]) if row["noise_ratio"] else np.full(1, np.nan)
        print(f"| {family} | {band} | {mode} | {row['models']} | {row['right']} | "
              f"{row['right_unflagged']} | {row['identifiable']} | "
              f"{row['right_identifiable']} / {row['identifiable']} | "
              f"{row['right_gramian_identifiable']} / {row['gramian_identifiable']} | "
              f"{row['too_high']} | "
              f"{row['wrong_fragile']} | {row['wrong_unflagged']} "
              f"({row['wrong_unflagged_hidden']}) | {row['wrong_margin']:.3g} | {np.median(ratio):.3f}, {ratio.max():.3f} |")
    for family in ("separated", "random"):
        for mode in ("estimated", "given"):
            rows = [table[(family, f"{lo}-{hi}", mode)] for lo, hi in BANDS if lo > 20]
            right = sum(r["right"] for r in rows)
            models = sum(r["models"] for r in rows)
            ident = sum(r["identifiable"] for r in rows)
            right_ident = sum(r["right_identifiable"] for r in rows)
            gram = sum(r["gramian_identifiable"] for r in rows)
            right_gram = sum(r["right_gramian_identifiable"] for r in rows)
            every = [table[(family, f"{lo}-{hi}", mode)] for lo, hi in BANDS]
            print(f"{family}, {mode} noise level, orders 21-40: true order {right} / {models}; "
                  f"identifiable {ident}, of which found {right_ident}; identifiable by "
                  f"Gramians {gram}, of which found {right_gram}; all orders: true order "
                  f"{sum(r['right'] for r in every)} / {sum(r['models'] for r in every)}, "
                  f"identifiable found {sum(r['right_identifiable'] for r in every)} / "
                  f"{sum(r['identifiable'] for r in every)}, too high "
                  f"{sum(r['too_high'] for r in every)}, wrong and unflagged "
                  f"{sum(r['wrong_unflagged'] for r in every)}")
    print(f"Target: the true order on at least {TARGET:.0%} of the data.")
    for family in ("separated", "random"):
        for mode in ("estimated", "given"):
            every = [table[(family, f"{lo}-{hi}", mode)] for lo, hi in BANDS]
            right, models = (sum(r[k] for r in every) for k in ("right", "models"))
            found, ident = (sum(r[k] for r in every) for k in ("right_identifiable", "identifiable"))
            print(f"{family}, {mode} noise level: all data {right} / {models} "
                  f"({_rate(right, models)}, {_verdict(right, models)}); identifiable data "
                  f"{found} / {ident} ({_rate(found, ident)}, {_verdict(found, ident)}); "
                  f"{models - ident} not identifiable (a state below the noise norm in every "
                  "window)")
    for line in misses or ():
        print(line)


def _rate(part: int, whole: int) -> str:
    return f"{100.0 * part / whole:.1f} %" if whole else "-"


def _verdict(part: int, whole: int) -> str:
    return "met" if whole and part >= TARGET * whole else "not met"


if __name__ == "__main__":
    main()
