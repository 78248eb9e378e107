"""Envelope sweeps: analyze a family of models over many operating points.

Gain-scheduled and robust designs rest on many linearizations, one per operating point of an
envelope (a load range, a speed range, a Monte Carlo draw of uncertain parameters).
:func:`sweep` builds the model of every point with a user function, analyzes each one
(Kalman part sizes, minimal order, stabilizable and detectable verdicts, PBH margins,
distance to uncontrollability, Hankel singular values and, on request, the measured error of
a balanced truncation), and gathers the answers in a :class:`SweepResult` table with one
row per point, in the order of the points.

The work runs in one process (``executor="serial"``), in a pool of processes over all cores
of this machine (``"local"``, the default) or on a Dask cluster (``"dask"``).  Every executor
runs the same per-point function on the same batches of points, so the tables agree.

:func:`grid` and :func:`random_points` make the list of points.
"""

from __future__ import annotations

import csv
import io as _stdio
import time
from dataclasses import dataclass, field
from numbers import Integral
from typing import Any, Callable

from plantcore.core.rank import resolve_tolerance
from plantcore.sweeps.executors import (
    EXECUTORS,
    _progress_callback,
    _run_dask,
    _run_local,
    _run_serial,
)
from plantcore.sweeps.point_analysis import RESULT_COLUMNS, _Options
from plantcore.sweeps.points import _validated_points

__all__ = ["SweepResult", "sweep"]


def _csv_cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (tuple, list)):
        return " ".join(_csv_cell(v) for v in value)
    return str(value)


@dataclass(frozen=True)
class SweepResult:
    """The analysis of every operating point of a sweep.

    Attributes
    ----------
    rows : tuple of dict
        One dict per point, in the order of the points given to :func:`sweep`.  Each holds
        the point's parameters, then the columns of :data:`RESULT_COLUMNS`:

        ``states``
            Order of the model built for the point.
        ``minimal_order``
            Order of a minimal realization (the controllable and observable part).
        ``controllable_observable``, ``controllable_unobservable``, ``uncontrollable_observable``, ``uncontrollable_unobservable``
            The four Kalman part sizes (field names of :class:`plantcore.PartSizes`).
        ``stabilizable``, ``detectable``
            Every uncontrollable (unobservable) mode is stable.
        ``smallest_controllability_margin``, ``smallest_observability_margin``
            Smallest PBH margin over the modes: the smallest singular value of
            ``[A - λI, B]`` (``[A - λI; C]``) relative to the model's scale, minimised over
            the eigenvalues λ.  Near zero: a mode the inputs barely move (outputs barely see).
        ``distance_to_uncontrollability``, ``distance_to_unobservability``
            Estimate of the smallest relative perturbation of the model that makes it
            uncontrollable (unobservable), minimised over all complex λ, not only the
            eigenvalues (None when not available).
        ``smallest_decision_margin``
            Smallest margin of all rank decisions (how far from the tolerance).
        ``fragile``
            True when a rank decision lies within a factor 100 of the tolerance.
        ``hankel_singular_values``
            Tuple of the Hankel singular values of the stable part, largest first;
            None when a mode lies on the stability boundary (the Gramians do not exist).
        ``reduced_order``, ``reduced_peak_error``, ``reduced_error_bound``
            With ``reduced_order`` given to :func:`sweep`: the order of the balanced
            truncation (unstable states, all kept, included), the measured peak gain of the
            error between the model and its truncation
            (:func:`plantcore.reduction.balanced.truncation_error`, the peak gain of the difference),
            and the a-priori bound; None otherwise.
        ``reduction_error``
            None, or why the truncation could not be made at this point (for example an
            order that would keep Hankel singular values at the rounding level); the rest of
            the row stands.
        ``error``
            None, or ``"ExceptionType: message"`` for a point whose build or analysis
            failed (its other result columns are None).

    parameters : tuple of str
        The parameter names, the first columns of the table.
    reduced_order : int or None
        The order asked of the balanced truncation.
    tol : float or None
        The relative rank tolerance asked for (None: the documented default).
    executor : str
        Where the points ran: ``"serial"``, ``"local"`` or ``"dask"``.
    elapsed_seconds : float
        Wall-clock time of the sweep.
    """

    rows: tuple
    parameters: tuple
    reduced_order: int | None = None
    tol: float | None = None
    executor: str = "serial"
    elapsed_seconds: float = field(default=0.0, compare=False)

    @property
    def columns(self) -> tuple[str, ...]:
        """The table's columns: the parameters, then :data:`RESULT_COLUMNS`."""
        return tuple(self.parameters) + RESULT_COLUMNS

    @property
    def failed(self) -> tuple[dict, ...]:
        """The rows of the points that failed (``error`` is not None)."""
        return tuple(row for row in self.rows if row["error"] is not None)

    def column(self, name: str) -> list:
        """The values of one column, in row order."""
        if name not in self.columns:
            raise ValueError(f"unknown column {name!r}; the columns are {', '.join(self.columns)}.")
        return [row[name] for row in self.rows]

    def to_csv_text(self) -> str:
        """The table as CSV text (header line, then one line per point).

        ``None`` is an empty cell, booleans are ``true``/``false``, floats are written with
        all their digits (``repr``), and the Hankel singular values share one cell,
        separated by spaces.
        """
        buffer = _stdio.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(self.columns)
        for row in self.rows:
            writer.writerow([_csv_cell(row[name]) for name in self.columns])
        return buffer.getvalue()

    def to_csv(self, path) -> None:
        """Write the table as CSV (see :meth:`to_csv_text`); the file appears complete or not
        at all."""
        _write_text(path, self.to_csv_text())

    def to_parquet(self, path) -> None:
        """Write the table as Parquet (needs pyarrow); Hankel singular values are a list
        column."""
        try:
            import pyarrow as pa
            import pyarrow.parquet as pq
        except ImportError:
            raise ImportError("writing Parquet needs pyarrow, which is not installed.") from None
        table = pa.Table.from_pylist([{name: row[name] for name in self.columns}
                                      for row in self.rows])
        from plantcore.files import atomic_write

        atomic_write(path, lambda handle: pq.write_table(table, handle))


def _write_text(path, text: str) -> None:
    from plantcore.files import atomic_write_text

    atomic_write_text(path, text)


def sweep(build: Callable[[dict], Any], points, *, executor: str = "local", scheduler=None,
          reduced_order: int | None = None, tol: float | None = None,
          progress=None) -> SweepResult:
    """Analyze the model of every operating point.

    Parameters
    ----------
    build : callable
        Maps one point (a dict of parameter values) to a model: a
        :class:`plantcore.StateSpaceModel`, a python-control state-space object or a tuple
        ``(A, B, C[, D])``.  With ``executor="local"`` it runs in other processes and must be
        picklable: a function defined at module level (not a lambda or a nested function),
        or an instance of a module-level class.  ``"dask"`` ships closures too
        (cloudpickle).  It must not rely on global state changed after the sweep starts.
    points : list of dict
        The operating points, all with the same parameter names (see :func:`grid` and
        :func:`random_points`).  Parameter names must differ from the result columns.
    executor : {"local", "serial", "dask"}
        ``"local"``: a pool of processes, one per core, fed with batches of points;
        ``"serial"``: this process; ``"dask"``: the workers of a Dask cluster.
    scheduler : str or dask.distributed.Client, optional
        For ``"dask"``: the scheduler address (``"tcp://host:8786"``; a client is opened and
        closed by this call) or a connected ``Client`` (left open).  When omitted, the
        default client of the session is used if there is one.
    reduced_order : int, optional
        Also compute a balanced truncation of this order at every point and measure its
        peak error (``reduced_peak_error``, the peak gain of model minus reduced model).
    tol : float, optional
        Relative rank tolerance for every rank decision (default: that of
        :func:`plantcore.kalman_decomposition`).
    progress : bool, callable or None
        ``None`` (default): a status line on stderr only when stderr is a terminal;
        ``True``: always; ``False``: never; a callable: called as ``progress(done, total)``
        after every batch.

    Returns
    -------
    SweepResult

    Notes
    -----
    A point whose ``build`` or analysis raises an exception is recorded with the message in
    its ``error`` column and the sweep goes on.  Points are cut into batches of nearly equal
    size (up to eight per worker for load balance, at least one per worker, at least 10 and
    at most 500 points each) so that scheduling costs stay small against the work; batches go to the workers as they free up, and the rows come back in the order of
    the points whatever the executor.  Each point is analyzed by the same function with the
    same inputs in every executor, so the tables agree; warnings raised inside other
    processes are not brought back.

    The per-point quantities and their methods are those of :mod:`plantcore.structure.kalman`,
    :mod:`plantcore.structure.modes`, :mod:`plantcore.reduction.balanced` and :mod:`plantcore.reduction.norms`; see
    their references.

    Examples
    --------
    >>> import plantcore as pc
    >>> def two_tanks(point):
    ...     k = point["coupling"]
    ...     return ([[-1.0, 0.0], [k, -2.0]], [[1.0], [0.0]], [[0.0, 1.0]])
    >>> result = pc.sweep(two_tanks, pc.grid(coupling=[0.0, 0.5, 1.0]), executor="serial")
    >>> result.column("minimal_order")
    [0, 2, 2]
    >>> result.failed
    ()
    """
    if executor not in EXECUTORS:
        raise ValueError(f"executor must be one of {', '.join(EXECUTORS)}, got {executor!r}.")
    if not callable(build):
        raise TypeError(f"build must be a callable from a point (dict) to a model, got "
                        f"{type(build).__name__}.")
    if scheduler is not None and executor != "dask":
        raise ValueError(f"scheduler is only used with executor='dask', not {executor!r}; "
                         "set executor='dask' or drop the scheduler.")
    if reduced_order is not None:
        if isinstance(reduced_order, bool) or not isinstance(reduced_order, Integral) \
                or reduced_order < 0:
            raise ValueError(f"reduced_order must be a whole number >= 0, got {reduced_order!r}.")
        reduced_order = int(reduced_order)
    if tol is not None:
        tol = resolve_tolerance(tol, 0)
    points, names = _validated_points(points)
    total = len(points)
    callback, close_progress = _progress_callback(progress, total)

    def report(done: int) -> None:
        if callback is not None:
            callback(done, total)

    options = _Options(tol, reduced_order)
    start = time.perf_counter()
    try:
        if executor == "serial":
            rows = _run_serial(build, points, options, report)
        elif executor == "local":
            rows = _run_local(build, points, options, report)
        else:
            rows = _run_dask(build, points, options, report, scheduler)
        if total == 0:
            report(0)
    finally:
        close_progress()
    elapsed = time.perf_counter() - start
    return SweepResult(tuple(rows), names, reduced_order, tol, executor, elapsed)
