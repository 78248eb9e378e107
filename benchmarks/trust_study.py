"""Trust study: are plantcore's structural answers right, and flagged when they are not?

This is a study, not a test: it draws thousands of models whose answer is known by
construction (``benchmarks/known_structure.py``), runs

* ``plantcore.kalman_decomposition`` (the four part sizes),
* ``plantcore.minimal_realization`` (the minimal order),
* ``plantcore.controllability_staircase`` and ``plantcore.observability_staircase``
  (the controllable dimension ``n1 + n2`` and the observable dimension ``n1 + n3``),

all with the default tolerance, and counts per family (per size for ``large``) how many
models came out

* **right**: all four answers equal the truth, none flagged fragile;
* **right, fragile**: all four answers acceptable, at least one flagged fragile;
* **wrong, fragile**: some answer wrong, and every wrong answer flagged fragile;
* **wrong, unflagged**: some answer wrong and not flagged -- the case that must not
  happen;
* **breakdown**: one of the calls raised (e.g. ``plantcore.NumericalBreakdown``).

"Acceptable" follows the project's tolerance policy as encoded in
``KnownModel.accepts``: the constructed answer is always right; for an ambiguous model
(a coupling measured between 1e-12 and 1e-8 relative, or constructed parts that are
themselves that weak) the other answer is right only when flagged fragile; below 1e-12
it is right either way.  Models built in exact rational arithmetic (n <= 14) are also
checked with ``known_structure.exact_sizes``; if the construction was degenerate there,
the exact answer is taken as the truth (and counted).

The same models go through slycot's ``tb01pd`` (minimal order only; it has no fragility
flag, so it is right or wrong), with balancing (``equil="S"``) and without
(``equil="N"``), at ``tol = max(5e-11, 20 n eps)``: tb01pd's ``tol`` is a lower bound for
a reciprocal condition number, already relative to the matrices' size, so plantcore's
default relative tolerance (``5e-11``, growing as ``20 n eps`` beyond about 11,000 states)
is passed as is.

For ``kalman_decomposition`` it also measures the backward error
``||T A_z T^-1 - A||_F / ||A||_F`` and compares it with the reported ``.residual``,
counting the models where the measured figure exceeds the reported one more than 10x.

Usage::

    python benchmarks/trust_study.py                       # the default study (>= 2,000 models)
    python benchmarks/trust_study.py --count-scale 0.05 --max-n 500   # a quick run (a minute)
    python benchmarks/trust_study.py --fresh               # a fresh random seed, printed
    python benchmarks/trust_study.py --families general chain --json out.json

The default study draws 700 ``general``, 300 ``scaled``, 250 ``chain``, 450
``near_cancellation`` and 300 ``repeated`` models and, in ``large``, 40 at n = 100, 20 at
200, 6 at 500, 2 at 1000 and 1 at 2000; the n = 2000 model alone takes about a minute.
Progress goes to standard error, the markdown tables to standard output.  Every model
listed as wrong can be rebuilt with ``known_structure.draw(family, seed, **options)`` as
printed.
"""

from __future__ import annotations

import argparse
import collections
import dataclasses
import datetime
import json
import math
import os
import platform
import secrets
import sys
import time
import warnings

import numpy as np

import plantcore as pc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import known_structure as ks

try:
    import slycot
except ImportError:  # pragma: no cover - slycot comes with the test extra
    slycot = None

EPS = np.finfo(float).eps

#: Fixed default seed, so that the default study is reproducible.
DEFAULT_SEED = 20261203

#: Models per family in the default study (``large`` is per size, below).
DEFAULT_COUNTS = {
    "general": 700,
    "scaled": 300,
    "chain": 250,
    "near_cancellation": 450,
    "repeated": 300,
}

#: Models per size of the ``large`` family in the default study.
LARGE_COUNTS = {100: 40, 200: 20, 500: 6, 1000: 2, 2000: 1}

#: plantcore's default relative rank tolerance (``max(5e-11, 20 n eps)``); tb01pd gets it.
PLANTCORE_RELATIVE_TOLERANCE = 5e-11

CATEGORIES = ("right", "right_fragile", "wrong_fragile", "wrong_unflagged", "breakdown")
CATEGORY_TITLES = ("right", "right, fragile", "wrong, fragile", "wrong, unflagged",
                   "breakdown")
CALLS = ("kalman", "minimal", "ctrb", "obsv")
CALL_TITLES = {"kalman": "kalman_decomposition", "minimal": "minimal_realization",
               "ctrb": "controllability_staircase", "obsv": "observability_staircase"}
QUANTITY = {"kalman": "sizes", "minimal": "minimal_order", "ctrb": "controllable_rank",
            "obsv": "observable_rank"}
TB01PD_MODES = ("S", "N")


# ----------------------------------------------------------------------------------------
# The plan
# ----------------------------------------------------------------------------------------

def reference_tolerance(n: int) -> float:
    """The relative tolerance given to tb01pd: plantcore's default for ``n`` states."""
    return max(PLANTCORE_RELATIVE_TOLERANCE, 20.0 * n * EPS)


def build_plan(families, count_scale: float, seed: int, max_n: int | None):
    """The list of models to draw, as ``(row, family, seed tuple, options)``.

    Parameters
    ----------
    families : sequence of str
        Families to include.
    count_scale : float
        Multiplies every count (at least one model per family and size is kept).
    seed : int
        Base seed; model ``i`` of family ``f`` is drawn with seed ``(seed, i)`` (``large``:
        ``(seed, n, i)``).
    max_n : int or None
        Largest number of states; families drawing above it get their size drawn (seeded)
        from the part of their range at or below it, and larger ``large`` sizes are left
        out.

    Returns
    -------
    list of tuple
    """
    plan = []
    for family in families:
        if family == "large":
            for n, count in LARGE_COUNTS.items():
                if max_n is not None and n > max_n:
                    continue
                for i in range(max(1, round(count * count_scale))):
                    plan.append((f"large n={n}", "large", (seed, n, i), {"n": n}))
            continue
        lo, hi = ks.SIZE_RANGES[family]
        if max_n is not None and max_n < lo:
            continue
        count = max(1, round(DEFAULT_COUNTS[family] * count_scale))
        for i in range(count):
            options = {}
            if max_n is not None and max_n < hi:
                rng = np.random.default_rng((seed, ks.FAMILIES.index(family), i, 99))
                options["n"] = int(rng.integers(lo, max_n + 1))
            plan.append((family, family, (seed, i), options))
    return plan


# ----------------------------------------------------------------------------------------
# One model
# ----------------------------------------------------------------------------------------

def _call(name, model):
    if name == "kalman":
        return pc.kalman_decomposition(model)
    if name == "minimal":
        return pc.minimal_realization(model)
    if name == "ctrb":
        return pc.controllability_staircase(model)
    return pc.observability_staircase(model)


def _answer(name, result):
    if name == "kalman":
        return [int(k) for k in result.sizes]
    if name == "minimal":
        return int(result.order)
    return int(result.rank)


def run_plantcore(km: ks.KnownModel) -> dict:
    """The four plantcore calls on one model: answers, flags, times, Kalman accuracy."""
    model = km.model()
    out = {}
    A = np.asarray(km.A)
    for name in CALLS:
        t0 = time.perf_counter()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                res = _call(name, model)
            except Exception as exc:  # noqa: BLE001 - any exception is a breakdown
                out[name] = {"error": f"{type(exc).__name__}: {str(exc)[:300]}",
                             "seconds": time.perf_counter() - t0}
                continue
        entry = {"value": _answer(name, res), "fragile": bool(res.fragile),
                 "seconds": time.perf_counter() - t0,
                 "warnings": sorted({type(w.message).__name__ for w in caught})}
        if name == "kalman":
            nA = max(np.linalg.norm(A), np.finfo(float).tiny)
            entry["residual"] = float(res.residual)
            entry["condition"] = float(res.condition)
            entry["backward"] = float(np.linalg.norm(res.T @ res.model.A @ res.T_inv - A) / nA)
            entry["backward_B"] = float(np.linalg.norm(res.T @ res.model.B - km.B)
                                        / max(np.linalg.norm(km.B), np.finfo(float).tiny))
            entry["backward_C"] = float(np.linalg.norm(res.model.C @ res.T_inv - km.C)
                                        / max(np.linalg.norm(km.C), np.finfo(float).tiny))
        out[name] = entry
        del res
    return out


def run_tb01pd(km: ks.KnownModel, equil: str) -> dict:
    """slycot ``tb01pd`` (job ``"M"``) on one model: the minimal order it finds."""
    n, m, p = km.n, km.n_inputs, km.n_outputs
    w = max(m, p)
    A = np.array(km.A, order="F")
    B = np.zeros((n, w), order="F")
    B[:, :m] = km.B
    C = np.zeros((w, n), order="F")
    C[:p, :] = km.C
    t0 = time.perf_counter()
    try:
        res = slycot.tb01pd(n, m, p, A, B, C, job="M", equil=equil, tol=reference_tolerance(n))
    except Exception as exc:  # noqa: BLE001 - any exception is a breakdown
        return {"error": f"{type(exc).__name__}: {str(exc)[:300]}",
                "seconds": time.perf_counter() - t0}
    return {"value": int(res[3]), "seconds": time.perf_counter() - t0}


def judge_calls(km: ks.KnownModel, answers: dict) -> dict:
    """Per call: True (acceptable), False (wrong) or None (the call raised)."""
    return {c: None if "error" in answers[c] else
            bool(km.accepts(QUANTITY[c], answers[c]["value"], answers[c]["fragile"]))
            for c in CALLS}


def verdict(km: ks.KnownModel, answers: dict) -> tuple[str, list[str]]:
    """The category of one model's plantcore answers and the list of wrong (or, for a
    breakdown, raising) calls."""
    ok = judge_calls(km, answers)
    if any(v is None for v in ok.values()):
        return "breakdown", [c for c in CALLS if ok[c] is None]
    wrong = [c for c in CALLS if not ok[c]]
    if wrong:
        flagged = all(answers[c]["fragile"] for c in wrong)
        return ("wrong_fragile" if flagged else "wrong_unflagged"), wrong
    if any(answers[c]["fragile"] for c in CALLS):
        return "right_fragile", []
    return "right", []


def reference_verdict(km: ks.KnownModel, answer: dict) -> str:
    """``"right"``, ``"wrong"`` or ``"breakdown"`` for a tb01pd minimal order."""
    if "error" in answer:
        return "breakdown"
    return "right" if km.accepts("minimal_order", answer["value"], None) else "wrong"


def evaluate(row: str, family: str, seed: tuple, options: dict) -> dict:
    """Draw one model, check its truth exactly when it can, and run everything on it."""
    t0 = time.perf_counter()
    km = ks.draw(family, seed, **options)
    generated = time.perf_counter() - t0
    record = {
        "row": row, "family": family, "seed": list(seed), "options": options,
        "n": km.n, "m": km.n_inputs, "p": km.n_outputs,
        "discrete": km.dt is not None, "variant": km.variant,
        "description": km.description, "hiding_condition": km.hiding_condition,
        "constructed_sizes": list(km.sizes), "margin": km.margin, "coupling": km.coupling,
        "alternative_sizes": None if km.alternative_sizes is None else list(km.alternative_sizes),
        "alternative_rule": km.alternative_rule, "ambiguous": km.ambiguous,
        "exact": km.exact, "generate_seconds": generated,
    }
    if km.exact:
        exact = ks.exact_sizes(km)
        record["exact_sizes"] = list(exact)
        record["exact_agrees"] = tuple(exact) == tuple(km.sizes)
        if not record["exact_agrees"]:
            # A degenerate draw: the exact answer is the truth, with no alternative.
            km = dataclasses.replace(km, sizes=exact, minimal_order=exact[0],
                                     alternative_sizes=None, alternative_rule="never",
                                     ambiguous=False)
    record["truth"] = list(km.sizes)
    answers = run_plantcore(km)
    record["plantcore"] = answers
    record["category"], record["wrong_calls"] = verdict(km, answers)
    record["calls_ok"] = judge_calls(km, answers)
    if slycot is not None:
        record["tb01pd"] = {}
        for equil in TB01PD_MODES:
            ans = run_tb01pd(km, equil)
            ans["verdict"] = reference_verdict(km, ans)
            record["tb01pd"][equil] = ans
    record["seconds"] = time.perf_counter() - t0
    return record


# ----------------------------------------------------------------------------------------
# Summary
# ----------------------------------------------------------------------------------------

def summarize(records: list[dict]) -> dict:
    """Per-row tallies (rows in the order they first appear)."""
    rows = {}
    for r in records:
        s = rows.setdefault(r["row"], {
            "models": 0, "ambiguous": 0, "either": 0, "exact_checked": 0, "exact_disagreed": 0,
            **{c: 0 for c in CATEGORIES},
            "wrong_by_call": {c: [0, 0] for c in CALLS},   # [unflagged, flagged]
            "tb01pd": {e: {"right": 0, "wrong": 0, "breakdown": 0} for e in TB01PD_MODES},
            "minimal_only": {"right": 0, "wrong": 0, "breakdown": 0},
            "worst_backward": 0.0, "worst_backward_residual": math.nan,
            "worst_ratio": 0.0, "over_10x": 0, "over_10x_floor": 0, "kalman_ran": 0,
            "seconds": 0.0, "max_n": 0,
        })
        s["models"] += 1
        s["max_n"] = max(s["max_n"], r["n"])
        s["ambiguous"] += r["alternative_rule"] == "if_fragile"
        s["either"] += r["alternative_rule"] == "always"
        if r["exact"]:
            s["exact_checked"] += 1
            s["exact_disagreed"] += not r["exact_agrees"]
        s[r["category"]] += 1
        for c, ok in r["calls_ok"].items():
            if ok is False:
                s["wrong_by_call"][c][0 if not r["plantcore"][c]["fragile"] else 1] += 1
        for e, ans in r.get("tb01pd", {}).items():
            s["tb01pd"][e][ans["verdict"]] += 1
        ok = r["calls_ok"]["minimal"]
        s["minimal_only"]["breakdown" if ok is None else "right" if ok else "wrong"] += 1
        k = r["plantcore"]["kalman"]
        if "error" not in k:
            s["kalman_ran"] += 1
            bw, res = k["backward"], k["residual"]
            if bw >= s["worst_backward"]:
                s["worst_backward"], s["worst_backward_residual"] = bw, res
            ratio = bw / res if res > 0 else (math.inf if bw > 0 else 1.0)
            s["worst_ratio"] = max(s["worst_ratio"], ratio)
            s["over_10x"] += bw > 10.0 * res
            s["over_10x_floor"] += bw > 10.0 * max(res, r["n"] * EPS)
        s["seconds"] += r["seconds"]
    return rows


def _fmt(x: float) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-"
    if math.isinf(x):
        return "inf"
    return f"{x:.1e}"


def _total(rows: dict) -> dict:
    tot = collections.Counter()
    for s in rows.values():
        for key in ("models", "ambiguous", "either", "exact_checked", "exact_disagreed",
                    "over_10x", "over_10x_floor", "kalman_ran", *CATEGORIES):
            tot[key] += s[key]
    return tot


def markdown(rows: dict, with_reference: bool) -> str:
    """The README tables."""
    lines = []
    lines.append("| family | models | ambiguous | either | " + " | ".join(CATEGORY_TITLES)
                 + " |")
    lines.append("|---|---:|---:|---:|" + "---:|" * len(CATEGORIES))
    for name, s in rows.items():
        lines.append(f"| {name} | {s['models']} | {s['ambiguous']} | {s['either']} | "
                     + " | ".join(str(s[c]) for c in CATEGORIES) + " |")
    tot = _total(rows)
    lines.append(f"| **all** | {tot['models']} | {tot['ambiguous']} | {tot['either']} | "
                 + " | ".join(str(tot[c]) for c in CATEGORIES) + " |")
    lines.append("")
    lines.append("Wrong answers by call (models where that call's answer was wrong: "
                 "unflagged / flagged fragile; a model may count under several calls, and a "
                 "model whose other call broke down counts too):")
    lines.append("")
    lines.append("| family | " + " | ".join(CALL_TITLES[c] for c in CALLS) + " |")
    lines.append("|---|" + "---:|" * len(CALLS))
    for name, s in rows.items():
        lines.append(f"| {name} | " + " | ".join(
            f"{s['wrong_by_call'][c][0]} / {s['wrong_by_call'][c][1]}" for c in CALLS) + " |")
    if with_reference:
        lines.append("")
        lines.append("slycot `tb01pd` on the same models (minimal order only; no fragility "
                     "flag), tol = max(5e-11, 20 n eps) (relative, plantcore's default), with "
                     "plantcore's `minimal_realization` order alone beside it (right: "
                     "acceptable under the policy, flag considered as above):")
        lines.append("")
        lines.append("| family | models | right (equil=S) | wrong (equil=S) | breakdown (S) "
                     "| right (equil=N) | wrong (equil=N) | breakdown (N) "
                     "| minimal_realization right | wrong | breakdown |")
        lines.append("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
        for name, s in rows.items():
            t, mo = s["tb01pd"], s["minimal_only"]
            lines.append(f"| {name} | {s['models']} | {t['S']['right']} | {t['S']['wrong']} | "
                         f"{t['S']['breakdown']} | {t['N']['right']} | {t['N']['wrong']} | "
                         f"{t['N']['breakdown']} | {mo['right']} | {mo['wrong']} | "
                         f"{mo['breakdown']} |")
    lines.append("")
    lines.append("`kalman_decomposition` accuracy: measured backward error "
                 "`||T A_z T^-1 - A||_F / ||A||_F` against the reported `.residual`:")
    lines.append("")
    lines.append("| family | decompositions | worst measured | its reported residual | "
                 "worst measured / reported | measured > 10x reported | "
                 "measured > 10x max(reported, n eps) |")
    lines.append("|---|---:|---:|---:|---:|---:|---:|")
    for name, s in rows.items():
        lines.append(f"| {name} | {s['kalman_ran']} | {_fmt(s['worst_backward'])} | "
                     f"{_fmt(s['worst_backward_residual'])} | {_fmt(s['worst_ratio'])} | "
                     f"{s['over_10x']} | {s['over_10x_floor']} |")
    return "\n".join(lines)


RULE_TITLES = {"never": "one answer", "if_fragile": "ambiguous", "always": "either"}


def rule_table(records: list[dict]) -> str:
    """Categories split by how many answers the truth allows (rows with a second answer)."""
    groups = collections.OrderedDict()
    for r in records:
        groups.setdefault(r["family"], collections.OrderedDict()).setdefault(
            r["alternative_rule"], collections.Counter())[r["category"]] += 1
    lines = ["| family | truth | models | " + " | ".join(CATEGORY_TITLES) + " |",
             "|---|---|---:|" + "---:|" * len(CATEGORIES)]
    for family, by_rule in groups.items():
        if set(by_rule) == {"never"}:
            continue
        for rule in ("never", "if_fragile", "always"):
            if rule in by_rule:
                c = by_rule[rule]
                lines.append(f"| {family} | {RULE_TITLES[rule]} | {sum(c.values())} | "
                             + " | ".join(str(c[k]) for k in CATEGORIES) + " |")
    return "\n".join(lines) if len(lines) > 2 else ""


def _call_text(ans: dict) -> str:
    if "error" in ans:
        return ans["error"].split(":")[0]
    v = ans["value"]
    v = "(" + ", ".join(str(x) for x in v) + ")" if isinstance(v, list) else str(v)
    return v + (" fragile" if ans["fragile"] else "")


def accuracy_listing(records: list[dict], limit: int = 8) -> str:
    """The models whose measured backward error exceeds 10x max(reported residual, n eps)."""
    out = []
    bad = [r for r in records if "error" not in r["plantcore"]["kalman"]
           and r["plantcore"]["kalman"]["backward"]
           > 10.0 * max(r["plantcore"]["kalman"]["residual"], r["n"] * EPS)]
    bad.sort(key=lambda r: -r["plantcore"]["kalman"]["backward"])
    for r in bad[:limit]:
        k = r["plantcore"]["kalman"]
        opts = "".join(f", {key}={v!r}" for key, v in r["options"].items())
        seed = "(" + ", ".join(str(x) for x in r["seed"]) + ")"
        out.append(f"  ks.draw({r['family']!r}, {seed}{opts}) n={r['n']}: measured "
                   f"{k['backward']:.1e}, reported residual {k['residual']:.1e}, condition of T "
                   f"{k['condition']:.1e}, B error {k['backward_B']:.1e}, C error "
                   f"{k['backward_C']:.1e}; answer {_call_text(k)} ({r['category']})")
    if len(bad) > limit:
        out.append(f"  ... and {len(bad) - limit} more")
    return "\n".join(out)


def wrong_listing(records: list[dict], per_row: int = 8) -> str:
    """A few wrong or broken models per row, with how to rebuild them."""
    out = []
    by_row = collections.defaultdict(list)
    for r in records:
        if r["category"] in ("wrong_unflagged", "wrong_fragile", "breakdown"):
            by_row[r["row"]].append(r)
    for row, recs in by_row.items():
        recs.sort(key=lambda r: ("wrong_unflagged", "breakdown", "wrong_fragile")
                  .index(r["category"]))
        out.append(f"{row}: {len(recs)} wrong or broken")
        for r in recs[:per_row]:
            opts = "".join(f", {k}={v!r}" for k, v in r["options"].items())
            seed = "(" + ", ".join(str(x) for x in r["seed"]) + ")"
            ans = "; ".join(f"{c} {_call_text(r['plantcore'][c])}" for c in CALLS)
            extra = ""
            if r["alternative_rule"] != "never":
                extra = (f" [rule {r['alternative_rule']}, alternative "
                         f"{r['alternative_sizes'] or 'removal'}]")
            out.append(f"  {r['category']}: ks.draw({r['family']!r}, {seed}{opts}) "
                       f"n={r['n']} m={r['m']} p={r['p']} truth {tuple(r['truth'])}{extra}; "
                       f"margin {_fmt(r['margin'])}; {ans}")
    return "\n".join(out)


# ----------------------------------------------------------------------------------------
# Main
# ----------------------------------------------------------------------------------------

class Progress:
    """Progress lines on standard error: every 25 models, every 15 s, and each big model."""

    def __init__(self, total: int):
        self.total = total
        self.start = time.perf_counter()
        self.last = self.start
        self.bad = 0

    def update(self, done: int, record: dict):
        self.bad += record["category"] == "wrong_unflagged"
        now = time.perf_counter()
        if done % 25 == 0 or done == self.total or now - self.last > 15 or record["n"] >= 500:
            self.last = now
            el = now - self.start
            print(f"[{done:>5}/{self.total}] {record['row']:<18} n={record['n']:<5} "
                  f"{record['category']:<16} {record['seconds']:7.2f} s   elapsed "
                  f"{el / 60:5.1f} min, wrong-unflagged so far {self.bad}",
                  file=sys.stderr, flush=True)


def parse_args(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--families", nargs="+", choices=ks.FAMILIES, default=list(ks.FAMILIES),
                    help="families to include (default: all)")
    ap.add_argument("--count-scale", type=float, default=1.0,
                    help="multiply every model count (e.g. 0.05 for a quick run)")
    ap.add_argument("--seed", type=int, default=DEFAULT_SEED,
                    help=f"base seed (default {DEFAULT_SEED})")
    ap.add_argument("--fresh", action="store_true",
                    help="draw a fresh random seed (printed) instead of --seed")
    ap.add_argument("--max-n", type=int, default=None,
                    help="largest number of states to draw")
    ap.add_argument("--json", metavar="OUT", default=None,
                    help="write every model's record and the summary to this file")
    ap.add_argument("--list-wrong", type=int, default=8, metavar="K",
                    help="list up to K wrong or broken models per family (default 8)")
    return ap.parse_args(argv)


def main(argv=None):
    args = parse_args(argv)
    if args.count_scale <= 0:
        raise SystemExit("--count-scale must be positive")
    seed = secrets.randbits(32) if args.fresh else args.seed
    if args.fresh:
        print(f"fresh seed: {seed}", file=sys.stderr, flush=True)
    plan = build_plan(args.families, args.count_scale, seed, args.max_n)
    print(f"trust study: {len(plan)} models, seed {seed}", file=sys.stderr, flush=True)
    progress = Progress(len(plan))
    records = []
    start = time.perf_counter()
    for i, job in enumerate(plan, 1):
        rec = evaluate(*job)
        records.append(rec)
        progress.update(i, rec)
    elapsed = time.perf_counter() - start
    rows = summarize(records)
    tot = _total(rows)

    print(f"# plantcore trust study, seed {seed}{' (fresh)' if args.fresh else ''}")
    print()
    print(f"{tot['models']} known-structure models, {datetime.date.today().isoformat()}, "
          f"{elapsed / 60:.1f} minutes; plantcore {pc.__version__}"
          + (f", slycot {slycot.__version__}" if slycot is not None else ", slycot missing")
          + f", numpy {np.__version__}, Python {platform.python_version()}; plantcore "
          f"imported from `{os.path.dirname(pc.__file__)}`.")
    print("Command: `python benchmarks/trust_study.py " + " ".join(sys.argv[1:] if argv is None
                                                                    else argv) + "`")
    print()
    print("Every answer with plantcore's default tolerance.  A model is *right* when "
          "kalman_decomposition's four part sizes, minimal_realization's order and both "
          "staircase ranks are all acceptable.  *ambiguous*: the policy allows a second "
          "answer if flagged fragile (coupling 1e-12..1e-8 relative); *either*: a second "
          "answer is acceptable even unflagged (coupling <= 1e-12).")
    print()
    print(markdown(rows, slycot is not None))
    print()
    by_rule = rule_table(records)
    if by_rule:
        print("By what the truth allows (*one answer*: the constructed one; *ambiguous*: a "
              "second answer if flagged; *either*: a second answer even unflagged):")
        print()
        print(by_rule)
        print()
    if tot["exact_checked"]:
        print(f"Exact rational check (sympy) of {tot['exact_checked']} models built exactly: "
              f"{tot['exact_checked'] - tot['exact_disagreed']} confirm the constructed sizes"
              + (f"; {tot['exact_disagreed']} degenerate draw(s) judged against the exact "
                 "sizes" if tot["exact_disagreed"] else "") + ".")
        print()
    listing = wrong_listing(records, args.list_wrong) if args.list_wrong > 0 else ""
    if listing:
        print("Wrong or broken models (rebuild with `known_structure.draw`):")
        print()
        print("```")
        print(listing)
        print("```")
    acc = accuracy_listing(records, max(args.list_wrong, 1))
    if acc:
        print()
        print("Backward error above 10x max(reported residual, n eps):")
        print()
        print("```")
        print(acc)
        print("```")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"seed": seed, "fresh": args.fresh, "elapsed_seconds": elapsed,
                       "argv": sys.argv[1:] if argv is None else list(argv),
                       "summary": rows, "models": records}, fh, indent=1, default=str)
    return rows


if __name__ == "__main__":
    main()
