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
import math
import os
import pickle
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from itertools import product
from numbers import Integral, Real
from typing import Any, Callable, Sequence

import numpy as np

from plantcore.structure.kalman import PART_NAMES
from plantcore.core.rank import resolve_tolerance

__all__ = ["sweep", "grid", "random_points", "SweepResult", "RESULT_COLUMNS", "DISTRIBUTIONS"]

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

#: Distribution kinds accepted by :func:`random_points`, with the meaning of their arguments.
DISTRIBUTIONS = {
    "uniform": ("low", "high"),
    "normal": ("mean", "standard_deviation"),
    "log_uniform": ("low", "high"),
    "choice": ("values",),
}

EXECUTORS = ("serial", "local", "dask")

# Batches: a batch is the unit of work sent to a process or a Dask worker.  Several batches
# per worker keep the load balanced when points differ in cost; at least _MIN_BATCH points
# per batch keep the cost of scheduling a batch (about a millisecond on Dask) small against
# its work (a point costs milliseconds or more); every worker gets at least one batch; the
# cap keeps progress reports regular and the memory of one batch small.
_BATCHES_PER_WORKER = 8
_MIN_BATCH = 10
_MAX_BATCH = 500


# --- points -----------------------------------------------------------------------------------

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
        return rng.uniform(a, b, size=count).tolist()
    if kind == "normal":
        if b < 0:
            raise ValueError(f"normal distribution of {name!r} needs standard_deviation >= 0, "
                             f"got {b!r}.")
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


# --- one point ----------------------------------------------------------------------------------

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


# --- executors ----------------------------------------------------------------------------------

def _batches(count: int, workers: int) -> list[tuple[int, int]]:
    """``(start, stop)`` index ranges covering ``range(count)`` in nearly equal batches."""
    if count == 0:
        return []
    workers = max(workers, 1)
    n_batches = max(math.ceil(count / _MAX_BATCH),
                    min(_BATCHES_PER_WORKER * workers, math.ceil(count / _MIN_BATCH)))
    n_batches = min(count, max(n_batches, workers))
    base, extra = divmod(count, n_batches)
    spans, start = [], 0
    for k in range(n_batches):
        stop = start + base + (1 if k < extra else 0)
        spans.append((start, stop))
        start = stop
    return spans


def _run_serial(build, points, options, report) -> list[dict]:
    rows = []
    for start, stop in _batches(len(points), 1):
        rows.extend(_run_batch(build, points[start:stop], options))
        report(len(rows))
    return rows


def _check_picklable(build) -> None:
    try:
        pickle.dumps(build)
    except Exception as exc:
        raise TypeError(
            "executor='local' sends build to other processes, so it must be picklable (a "
            "function defined at module level, or an instance of a module-level class); "
            f"pickling it failed ({_message(exc)}). Use executor='serial', or 'dask' (which "
            "also ships closures and lambdas).") from None


def _run_local(build, points, options, report, workers=None) -> list[dict]:
    from concurrent.futures import ProcessPoolExecutor, as_completed

    workers = workers or os.cpu_count() or 1
    spans = _batches(len(points), workers)
    if not spans:
        return []
    _check_picklable(build)
    results: list = [None] * len(spans)
    done = 0
    with ProcessPoolExecutor(max_workers=min(workers, len(spans))) as pool:
        futures = {pool.submit(_run_batch, build, points[a:b], options): k
                   for k, (a, b) in enumerate(spans)}
        for future in as_completed(futures):
            k = futures[future]
            results[k] = future.result()
            done += len(results[k])
            report(done)
    return [row for batch in results for row in batch]


def _import_distributed():
    try:
        import distributed
    except ImportError:  # pragma: no cover - depends on the installation
        raise ImportError(
            "executor='dask' needs dask.distributed, which is not installed; install the "
            "optional extra with: python -m pip install 'plantcore[cluster]'") from None
    return distributed


def _dask_client(scheduler):
    """``(client, owned)``: a client for the scheduler and whether this call must close it."""
    distributed = _import_distributed()
    if isinstance(scheduler, distributed.Client):
        return scheduler, False
    if scheduler is None:
        try:
            return distributed.default_client(), False
        except ValueError:
            raise ValueError(
                "executor='dask' needs scheduler= a scheduler address such as "
                "'tcp://127.0.0.1:8786' or a dask.distributed.Client (no default client "
                "exists).") from None
    if not isinstance(scheduler, str) or not scheduler.strip():
        raise ValueError("scheduler must be an address string such as 'tcp://127.0.0.1:8786' "
                         f"or a dask.distributed.Client, got {type(scheduler).__name__}.")
    client = distributed.Client(scheduler.strip(), set_as_default=False)
    return client, True


def _run_dask(build, points, options, report, scheduler) -> list[dict]:
    distributed = _import_distributed()
    if not points:
        return []
    client, owned = _dask_client(scheduler)
    futures: list = []
    try:
        threads = sum(client.nthreads().values()) or 1
        spans = _batches(len(points), threads)
        # Ship build to every worker once rather than with every batch.
        [build_data] = client.scatter([build], broadcast=True, hash=False)
        futures.append(build_data)
        batches = [client.submit(_run_batch, build_data, points[a:b], options, pure=False)
                   for a, b in spans]
        futures.extend(batches)
        index = {future.key: k for k, future in enumerate(batches)}
        results: list = [None] * len(spans)
        done = 0
        for future, rows in distributed.as_completed(batches, loop=client.loop,
                                                     with_results=True):
            results[index[future.key]] = rows
            done += len(rows)
            report(done)
    finally:
        if owned:
            client.close()
        elif futures:
            client.cancel(futures)   # release the batches (and stop them on an interrupt)
    return [row for batch in results for row in batch]


# --- progress -----------------------------------------------------------------------------------

def _progress_callback(progress, total: int):
    """``(callback, closer)`` for the ``progress`` argument of :func:`sweep`."""
    from plantcore.core.progress import Progress

    if progress is None or progress is True:
        bar = Progress("sweep", total=total, enabled=None if progress is None else True)
        return (lambda done, _total: bar.update(done, "points")), bar.close
    if progress is False:
        return None, lambda: None
    if callable(progress):
        return progress, lambda: None
    raise ValueError(f"progress must be True, False, None or a callable(done, total), "
                     f"got {progress!r}.")


# --- the result ---------------------------------------------------------------------------------

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


# --- the sweep ----------------------------------------------------------------------------------

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
