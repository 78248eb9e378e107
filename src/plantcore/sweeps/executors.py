"""Where the points of a sweep are analysed: in this process, on a local process pool, or
on a Dask cluster, in batches, with progress reported as batches finish.
"""

from __future__ import annotations

import math
import os
import pickle

from plantcore.sweeps.point_analysis import _message, _run_batch

__all__ = ["EXECUTORS"]


EXECUTORS = ("serial", "local", "dask")

# Batches: a batch is the unit of work sent to a process or a Dask worker.  Several batches
# per worker keep the load balanced when points differ in cost; at least _MIN_BATCH points
# per batch keep the cost of scheduling a batch (about a millisecond on Dask) small against
# its work (a point costs milliseconds or more); every worker gets at least one batch; the
# cap keeps progress reports regular and the memory of one batch small.
_BATCHES_PER_WORKER = 8

_MIN_BATCH = 10

_MAX_BATCH = 500


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
