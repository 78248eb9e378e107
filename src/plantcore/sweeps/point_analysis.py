"""The analysis of one operating point of a sweep, as one row of the result table.

Every point's model gets the full per-point analysis (Kalman parts, mode margins, distance
estimates, Hankel singular values, an optional balanced truncation); a point that fails
keeps its parameters and the error message, so one bad point never stops a sweep.
:data:`RESULT_COLUMNS` names the columns every row holds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

from plantcore.structure.kalman import PART_NAMES

__all__ = ["RESULT_COLUMNS"]


#: Columns of every row after the point's parameters, in table order.
RESULT_COLUMNS = (
    "states",
    "minimal_order",
    *PART_NAMES,
    "stabilizable",
    "detectable",
    "smallest_controllability_margin",
    "smallest_observability_margin",
    "distance_to_uncontrollability",
    "distance_to_unobservability",
    "smallest_decision_margin",
    "fragile",
    "hankel_singular_values",
    "reduced_order",
    "reduced_peak_error",
    "reduced_error_bound",
    "reduction_error",
    "error",
)


@dataclass(frozen=True)
class _Options:
    """What to compute at every point (sent to the workers with each batch)."""

    tol: float | None
    reduced_order: int | None


def _message(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _empty_row() -> dict:
    return {name: None for name in RESULT_COLUMNS}


def _analyze_model(model, options: _Options) -> dict:
    """The result columns of one model (raises on failure; the caller records it).

    Everything but the optional truncation comes from one :func:`plantcore.analyze` call,
    which shares one Kalman decomposition and one equilibrated copy of the model between
    the part sizes, the mode table, the verdicts and both distance estimates.
    """
    from plantcore.analysis.analyze import analyze

    analysis = analyze(model, tol=options.tol)
    model = analysis.model
    kd = analysis.decomposition
    row = _empty_row()
    row["states"] = int(model.n)
    row["minimal_order"] = int(kd.sizes.controllable_observable)
    for name, size in zip(PART_NAMES, kd.sizes):
        row[name] = int(size)
    row["stabilizable"] = bool(analysis.stabilizable)
    row["detectable"] = bool(analysis.detectable)
    row["smallest_controllability_margin"] = _smallest(
        m.controllability_margin for m in analysis.modes)
    row["smallest_observability_margin"] = _smallest(
        m.observability_margin for m in analysis.modes)
    row["distance_to_uncontrollability"] = float(analysis.distance_to_uncontrollability.value)
    row["distance_to_unobservability"] = float(analysis.distance_to_unobservability.value)
    decisions = tuple(kd.decisions) + tuple(analysis.minimal.decisions)
    row["smallest_decision_margin"] = _smallest(d.margin for d in decisions)
    row["fragile"] = bool(kd.fragile or analysis.minimal.fragile)
    if analysis.hankel_singular_values is not None:
        row["hankel_singular_values"] = tuple(float(v) for v in analysis.hankel_singular_values)
    if options.reduced_order is not None:
        row.update(_reduction_columns(model, options.reduced_order))
    return row


def _smallest(values) -> float:
    """The least of the values; ``inf`` when there are none (a model without states)."""
    return float(min(values, default=math.inf))


def _reduction_columns(model, order: int) -> dict:
    """Balanced truncation to ``order`` and the measured peak gain of the error.

    A truncation that cannot be made at this point (an order outside the admissible range,
    a mode on the stability boundary) is reported in ``reduction_error``; the rest of the
    point's analysis stands.
    """
    from plantcore.reduction.balanced import balanced_truncation, truncation_error

    try:
        reduced = balanced_truncation(model, order=order)
        error = truncation_error(model, reduced.model)
    except (ValueError, ArithmeticError) as exc:
        return {"reduction_error": _message(exc)}
    return {"reduced_order": int(reduced.order), "reduced_peak_error": float(error.value),
            "reduced_error_bound": float(reduced.error_bound)}


def _run_batch(build: Callable, points: Sequence[dict], options: _Options) -> list[dict]:
    """Analyze a batch of points; a failing point is recorded, never raised."""
    rows = []
    for point in points:
        try:
            model = build(dict(point))
            row = _analyze_model(model, options)
        except Exception as exc:  # recorded with its message; the sweep goes on
            row = _empty_row()
            row["error"] = _message(exc)
        rows.append({**point, **row})
    return rows
