"""Operating points of a sweep: full grids and seeded random draws.

:func:`grid` makes every combination of the given axes; :func:`random_points` draws a
reproducible sample from named distributions (:data:`DISTRIBUTIONS`).  Both return plain
lists of dictionaries, so a user can build points any other way too.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from itertools import product
from numbers import Integral, Real
from typing import Sequence

import numpy as np

from plantcore.sweeps.point_analysis import RESULT_COLUMNS

__all__ = ["DISTRIBUTIONS", "grid", "random_points"]


#: Distribution kinds accepted by :func:`random_points`, with the meaning of their arguments.
DISTRIBUTIONS = {
    "uniform": ("low", "high"),
    "normal": ("mean", "standard_deviation"),
    "log_uniform": ("low", "high"),
    "choice": ("values",),
}


def _plain(value):
    """numpy scalars to Python scalars, so rows pickle, print and compare plainly."""
    if isinstance(value, np.generic):
        return value.item()
    return value


def grid(**axes) -> list[dict]:
    """Every combination of the given parameter values (a full factorial grid).

    Parameters
    ----------
    **axes : 1-D sequence or array
        One keyword per parameter; its values in the order they should be visited.

    Returns
    -------
    list of dict
        One dict per combination, ``len = prod(len(values))``.  The order is that of nested
        loops over the axes in the order the keywords are given, the **last axis varying
        fastest** (the order of :func:`itertools.product`).  No axes give one empty point.

    Raises
    ------
    ValueError
        When an axis is not a non-empty 1-D sequence.

    Examples
    --------
    >>> from plantcore import grid
    >>> grid(mass=[1.0, 2.0], speed=[10, 20, 30])[:4]
    [{'mass': 1.0, 'speed': 10}, {'mass': 1.0, 'speed': 20}, {'mass': 1.0, 'speed': 30}, {'mass': 2.0, 'speed': 10}]
    >>> len(grid(mass=[1.0, 2.0], speed=[10, 20, 30]))
    6
    """
    names = list(axes)
    columns = []
    for name in names:
        values = axes[name]
        if isinstance(values, (str, bytes)) or np.ndim(values) != 1:
            raise ValueError(
                f"grid axis {name!r} must be a 1-D list of values, got {type(values).__name__}"
                f"{'' if np.ndim(values) == 0 else f' with {np.ndim(values)} dimensions'}; "
                "wrap a single value in a list.")
        values = [_plain(v) for v in values]
        if not values:
            raise ValueError(f"grid axis {name!r} is empty; give at least one value.")
        columns.append(values)
    return [dict(zip(names, combo)) for combo in product(*columns)]


def _real_argument(value, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not math.isfinite(float(value)):
        raise ValueError(f"{what} must be a finite real number, got {value!r}.")
    return float(value)


def _draw(rng, name: str, description, count: int) -> list:
    if isinstance(description, (str, bytes)) or not isinstance(description, Sequence) or not description:
        raise ValueError(
            f"distribution of {name!r} must be a tuple such as ('uniform', low, high), "
            f"got {description!r}.")
    kind, *args = description
    if kind not in DISTRIBUTIONS:
        raise ValueError(f"distribution of {name!r} is {kind!r}; choose one of "
                         f"{', '.join(DISTRIBUTIONS)}.")
    expected = DISTRIBUTIONS[kind]
    if len(args) != len(expected):
        raise ValueError(f"distribution {kind!r} of {name!r} takes {len(expected)} argument(s) "
                         f"({', '.join(expected)}), got {len(args)}.")
    if kind == "choice":
        values = args[0]
        if isinstance(values, (str, bytes)) or np.ndim(values) != 1 or len(values) == 0:
            raise ValueError(f"'choice' of {name!r} needs a non-empty list of values.")
        values = [_plain(v) for v in values]
        picks = rng.integers(0, len(values), size=count)
        return [values[i] for i in picks]
    a = _real_argument(args[0], f"{expected[0]} of {name!r}")
    b = _real_argument(args[1], f"{expected[1]} of {name!r}")
    if kind == "uniform":
        if not a < b:
            raise ValueError(f"uniform distribution of {name!r} needs low < high, got {a!r}, {b!r}.")
        if not math.isfinite(b - a):
            raise ValueError(f"uniform distribution of {name!r}: the range high - low "
                             f"({b!r} - {a!r}) is beyond the floating-point range (about "
                             "1.8e308); narrow it.")
        return rng.uniform(a, b, size=count).tolist()
    if kind == "normal":
        if b < 0:
            raise ValueError(f"normal distribution of {name!r} needs standard_deviation >= 0, "
                             f"got {b!r}.")
        # A draw is mean + standard_deviation * z with |z| below about 10: keep it finite.
        if not math.isfinite(abs(a) + 10.0 * b):
            raise ValueError(f"normal distribution of {name!r}: mean {a!r} and "
                             f"standard_deviation {b!r} give draws beyond the floating-point "
                             "range (about 1.8e308); use smaller values.")
        return rng.normal(a, b, size=count).tolist()
    # log_uniform
    if not 0 < a < b:
        raise ValueError(f"log_uniform distribution of {name!r} needs 0 < low < high, "
                         f"got {a!r}, {b!r}.")
    return np.exp(rng.uniform(math.log(a), math.log(b), size=count)).tolist()


def random_points(distributions: Mapping, count: int, seed: int) -> list[dict]:
    """Random operating points drawn from independent distributions (a Monte Carlo sample).

    Parameters
    ----------
    distributions : mapping of str to tuple
        One entry per parameter, a tuple naming the distribution and its arguments:

        * ``("uniform", low, high)``: uniform on ``[low, high)``;
        * ``("normal", mean, standard_deviation)``: Gaussian;
        * ``("log_uniform", low, high)``: ``log`` of the value uniform, ``0 < low < high``
          (for quantities known to within a factor, such as a stiffness);
        * ``("choice", values)``: one of the listed values, each equally likely.

    count : int
        Number of points (``>= 0``).
    seed : int
        Seed of :func:`numpy.random.default_rng`.  The draws are reproducible: the
        parameters are drawn one after the other in the order of ``distributions``, all
        ``count`` values of one parameter at a time, so adding a parameter at the end leaves
        the values of the earlier ones unchanged.

    Returns
    -------
    list of dict
        ``count`` points, each with every parameter of ``distributions``.

    Examples
    --------
    >>> from plantcore import random_points
    >>> pts = random_points({"mass": ("uniform", 1, 5), "speed": ("normal", 10, 2)}, 100, seed=3)
    >>> len(pts), sorted(pts[0])
    (100, ['mass', 'speed'])
    >>> all(1 <= p["mass"] < 5 for p in pts)
    True
    >>> pts == random_points({"mass": ("uniform", 1, 5), "speed": ("normal", 10, 2)}, 100, seed=3)
    True
    """
    if not isinstance(distributions, Mapping):
        raise ValueError("distributions must be a mapping from parameter name to a tuple such "
                         f"as ('uniform', low, high), got {type(distributions).__name__}.")
    if isinstance(count, bool) or not isinstance(count, Integral) or count < 0:
        raise ValueError(f"count must be a whole number >= 0, got {count!r}.")
    if isinstance(seed, bool) or not isinstance(seed, Integral) or seed < 0:
        raise ValueError(f"seed must be a whole number >= 0, got {seed!r}.")
    rng = np.random.default_rng(int(seed))
    columns = {}
    for name, description in distributions.items():
        if not isinstance(name, str):
            raise ValueError(f"parameter names must be strings, got {name!r}.")
        columns[name] = _draw(rng, name, description, int(count))
    return [{name: columns[name][i] for name in columns} for i in range(int(count))]


def _validated_points(points) -> tuple[tuple[dict, ...], tuple[str, ...]]:
    if isinstance(points, Mapping):
        raise ValueError("points must be a list of dicts (one per operating point), got a "
                         "single dict; wrap it in a list, or build the list with grid().")
    try:
        points = list(points)
    except TypeError:
        raise ValueError(f"points must be a list of dicts, got {type(points).__name__}.") from None
    clean = []
    names = None
    for k, point in enumerate(points):
        if not isinstance(point, Mapping):
            raise ValueError(f"point {k} is a {type(point).__name__}; every point must be a "
                             "dict of parameter values.")
        for key in point:
            if not isinstance(key, str):
                raise ValueError(f"point {k} has the parameter name {key!r}; names must be strings.")
        if names is None:
            names = tuple(point)
        elif set(point) != set(names):
            raise ValueError(
                f"point {k} has the parameters {sorted(point)} but point 0 has {sorted(names)}; "
                "every point needs the same parameters.")
        clean.append({name: _plain(point[name]) for name in names})
    names = names or ()
    clash = [name for name in names if name in RESULT_COLUMNS]
    if clash:
        raise ValueError(f"parameter name {clash[0]!r} is also a result column; rename the "
                         "parameter.")
    return tuple(clean), names
