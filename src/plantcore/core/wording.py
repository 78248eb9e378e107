"""Plain words shared by results and reports: the safety caution and named directions.

Numerical results carry these strings (an analysis' dictionary holds the caution, its part
directions are described in state names), so they live in the core layer, below both the
numerics and the reports.
"""

from __future__ import annotations

import math

import numpy as np

SAFETY_CAUTION = (
    "Caution: a reduced model must be validated against the real plant before a controller "
    "or estimator designed on it is used; safety-related control work follows the applicable "
    "standards and qualified, independent review."
)


def describe_direction(vector, names, *, max_terms: int = 4, threshold: float = 0.1) -> str:
    """Write a state-space direction as a weighted combination of named states.

    The vector is normalised to unit length and its sign fixed so that the largest weight is
    positive; terms with weight below ``threshold`` times the largest are left out (the
    number left out is shown), as are terms beyond ``max_terms``.

    Examples
    --------
    >>> describe_direction([0.0, 1.0, -1.0], ["zone1", "zone2", "zone3"])
    '0.71 zone2 - 0.71 zone3'
    """
    v = np.asarray(vector, dtype=float)
    norm = np.linalg.norm(v)
    if norm == 0 or not math.isfinite(norm):
        return "0"
    v = v / norm
    order = np.argsort(-np.abs(v), kind="stable")
    if v[order[0]] < 0:
        v = -v
    big = abs(v[order[0]])
    shown = [i for i in order[:max_terms] if abs(v[i]) >= threshold * big]
    parts = []
    for k, i in enumerate(shown):
        w = v[i]
        mag = f"{abs(w):.2f}"
        if k == 0:
            parts.append(f"{'-' if w < 0 else ''}{mag} {names[i]}")
        else:
            parts.append(f"{'-' if w < 0 else '+'} {mag} {names[i]}")
    rest = int(np.count_nonzero(np.abs(v) >= 1e-12)) - len(shown)
    text = " ".join(parts)
    if rest > 0:
        text += f" (+{rest} smaller)"
    return text


def short_number(x) -> str:
    """A number in three significant digits for sentences and reports (``n/a`` for None
    or NaN, ``infinite``, ``0``)."""
    if x is None:
        return "n/a"
    x = float(x)
    if math.isnan(x):
        return "n/a"
    if math.isinf(x):
        return "infinite"
    if x == 0:
        return "0"
    return f"{x:.3g}"


def counted(k: int, noun: str) -> str:
    """``'1 state'``, ``'3 states'``."""
    return f"{k} {noun}" + ("" if k == 1 else "s")


def frequency_phrase(w, discrete, dt) -> str:
    """A frequency in words: rad/s, or rad/sample with its rad/s for a sampled model."""
    if w is None or math.isnan(w):
        return "no particular frequency"
    if math.isinf(w):
        return "infinite frequency"
    if discrete:
        return f"{w:.4g} rad/sample ({w / dt:.4g} rad/s at sample time {dt:g})"
    return f"{w:.4g} rad/s"
