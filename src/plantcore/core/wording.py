"""Plain words shared by results and reports: the safety caution, named directions, and
the one rule by which values at rounding level are shown as zero.

Numerical results carry these strings (an analysis' dictionary holds the caution, its part
directions are described in state names), so they live in the core layer, below both the
numerics and the reports.

Rounding level
--------------
A computed quantity that should be zero rarely is: an integrator's eigenvalue comes out as
``2.7e-17``, the PBH margin of an uncontrollable mode as ``4e-17``.  Text and HTML show every
value whose size is at most :data:`ROUNDING_LEVEL` times the scale it is measured against
(``||A||_F`` for eigenvalues; 1 for quantities already relative to the model's scale, such
as margins and distances) as ``0``.  :data:`ROUNDING_LEVEL` is the default rank tolerance
divided by the fragility factor, ``5e-13``: the rounding noise of a model that went through a
similarity transformation of condition number up to about ``1e3`` (see
:mod:`plantcore.core.rank`), and the lower edge of the window in which a rank decision is
called fragile, so a value shown as 0 never hides a tolerance-sensitive decision.  JSON
output and the result objects keep the raw values.
"""

from __future__ import annotations

import math

import numpy as np

from plantcore.core.rank import DEFAULT_RELATIVE_TOLERANCE, FRAGILITY_FACTOR

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

    Terms are ordered by their weight as printed, equal weights in the order of ``names``.

    Examples
    --------
    >>> describe_direction([0.0, 1.0, -1.0], ["zone1", "zone2", "zone3"])
    '0.71 zone2 - 0.71 zone3'
    >>> describe_direction([0.7071067811865476, 0.7071067811865475], ["p1", "p2"])
    '0.71 p1 + 0.71 p2'
    """
    v = np.asarray(vector, dtype=float)
    norm = np.linalg.norm(v)
    if norm == 0 or not math.isfinite(norm):
        return "0"
    v = v / norm
    # Order by the weight as printed (two decimals), ties in the model's state order, so that
    # "0.71 p1 + 0.71 p2" does not come out as "0.71 p2 + 0.71 p1" from rounding differences.
    order = np.lexsort((np.arange(v.size), -np.round(np.abs(v), 2)))
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


def special_number(x, *, missing: str, infinite: str, negative_infinite: str,
                   zero: str | None = "0") -> str | None:
    """The word for a number that needs no digits: ``missing`` for None or NaN, the words
    for the infinities, ``zero`` for 0 (unless None); None for any other number, which the
    caller then formats itself.  One place for the cases every number format shares."""
    if x is None:
        return missing
    x = float(x)
    if math.isnan(x):
        return missing
    if math.isinf(x):
        return infinite if x > 0 else negative_infinite
    if x == 0 and zero is not None:
        return zero
    return None


def short_number(x) -> str:
    """A number in three significant digits for sentences and reports (``n/a`` for None
    or NaN, ``infinite``, ``0``)."""
    word = special_number(x, missing="n/a", infinite="infinite", negative_infinite="-infinite")
    return word if word is not None else f"{float(x):.3g}"


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


#: Values at most this many times their scale are shown as 0 in text and HTML (see the
#: module notes): the default rank tolerance divided by the fragility factor.
ROUNDING_LEVEL = DEFAULT_RELATIVE_TOLERANCE / FRAGILITY_FACTOR


def shown_value(x, scale: float = 1.0) -> float:
    """``x`` as text and HTML show it: 0 when ``|x| <= ROUNDING_LEVEL * scale``.

    ``scale`` is the size ``x`` is measured against (1 for values already relative to the
    model's scale).  None, NaN and infinities pass unchanged.

    Examples
    --------
    >>> shown_value(4.34e-17), shown_value(0.0229)
    (0.0, 0.0229)
    >>> shown_value(-1.11e-16, scale=1.0), shown_value(3e-14, scale=144.0)
    (0.0, 0.0)
    """
    if x is None:
        return x
    x = float(x)
    if not math.isfinite(x):
        return x
    return 0.0 if abs(x) <= ROUNDING_LEVEL * abs(float(scale)) else x


def shown_eigenvalue(value, scale: float, *, discrete: bool = False) -> complex:
    """An eigenvalue as text and HTML show it: parts at rounding level relative to
    ``scale`` (normally ``||A||_F``) set to 0; in discrete time a value within rounding
    level of ``z = 1`` or ``z = -1`` shown as exactly that.

    Examples
    --------
    >>> shown_eigenvalue(-8.4e-16 + 0j, 144.0)
    0j
    >>> shown_eigenvalue(complex(-0.24, 12.0), 144.0)
    (-0.24+12j)
    >>> shown_eigenvalue(1.0 + 2e-17j, 1.0, discrete=True)
    (1+0j)
    """
    z = complex(value)
    scale = max(abs(float(scale)), 1.0) if discrete else abs(float(scale))
    if discrete:
        for point in (1.0, -1.0):
            if abs(z - point) <= ROUNDING_LEVEL * scale:
                return complex(point, 0.0)
    return complex(shown_value(z.real, scale), shown_value(z.imag, scale))
