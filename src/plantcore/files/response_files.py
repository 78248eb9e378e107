"""Impulse-response data files: the input of ``plantcore realize``.

Two layouts of our own, read safely (regular files only, size caps, headers before data,
nothing unpickled) and checked field by field; every problem is one
:class:`~plantcore.core.errors.ModelFileError` naming the file, the field and the problem.

``.npz`` (``numpy.savez``), arrays:

==================== ============ =========================================================
key                  shape        meaning
==================== ============ =========================================================
``impulse_response`` (K, p, m)    required; ``[k, i, j]`` is output ``i``'s response at
                     or (K,)      sample ``k`` to a unit pulse on input ``j`` at sample 0
                                  (sample 0 holds ``D``); a flat array is one input and one
                                  output
``sample_time``      scalar       optional, > 0; without it the data are read as the
                                  expansion coefficients of a continuous-time model
``noise_level``      scalar       optional, >= 0: standard deviation of the noise on each
                                  entry (0 declares the data exact)
``inputs``           (m,) text    optional input names
``outputs``          (p,) text    optional output names
==================== ============ =========================================================

``.csv`` (UTF-8, comma separated, lines starting with ``#`` ignored): a header row, then one
row per sample.  The first header cell is ``sample`` (the rows then hold 0, 1, 2, ... in
order) or ``time`` (the rows hold the sampling instants 0, T, 2T, ... and give the sample
time ``T``); each other header cell names one channel as ``OUTPUT <- INPUT`` (the response of
that output to a pulse on that input), every output-input pair exactly once, in any order.
Outputs and inputs are numbered in the order they first appear.  For example::

    sample, speed <- voltage, speed <- load, current <- voltage, current <- load
    0, 0.0, 0.0, 0.5, 0.0
    1, 0.12, -0.03, 0.31, 0.01
    ...
"""

from __future__ import annotations

import io
import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.files.array_checks import real_finite_array, unique_names
from plantcore.files.safe_read import open_input, open_npz, read_capped, read_npz_member
from plantcore.files.safe_write import atomic_write, atomic_write_text

__all__ = ["MAX_RESPONSE_FILE_BYTES", "RESPONSE_FILE_KEYS", "ImpulseResponseData",
           "load_impulse_response", "save_impulse_response"]

#: Largest response file accepted (bytes of the file, and of the unpacked ``.npz`` members).
MAX_RESPONSE_FILE_BYTES = 256 * 1024 * 1024

#: Keys a response ``.npz`` file may hold (``impulse_response`` is required).
RESPONSE_FILE_KEYS = ("impulse_response", "sample_time", "noise_level", "inputs", "outputs")

_CHANNEL_SEPARATOR = "<-"
_LIMIT_NAME = "plantcore.files.response_files.MAX_RESPONSE_FILE_BYTES"


@dataclass(frozen=True)
class ImpulseResponseData:
    """Impulse-response samples read from a file.

    Attributes
    ----------
    values : (K, p, m) ndarray
        ``values[k, i, j]``: output ``i`` at sample ``k`` after a unit pulse on input ``j``.
    sample_time : float or None
        From the file (``sample_time`` key, or the step of a ``time`` column); ``None`` when
        the file gives none.
    noise_level : float or None
        From the file, when given.
    inputs, outputs : tuple of str or None
        Names from the file, when given.
    path : str
        The file, as given.
    """

    values: np.ndarray = field(repr=False)
    sample_time: float | None
    noise_level: float | None
    inputs: tuple | None
    outputs: tuple | None
    path: str


def _suffix(display: str) -> str:
    return os.path.splitext(display)[1].lower()


def load_impulse_response(path) -> ImpulseResponseData:
    """Read impulse-response data from an ``.npz`` or ``.csv`` file (layouts in the module doc).

    Raises
    ------
    plantcore.ModelFileError
        A ``ValueError`` whose one-line message names the file, the field and the problem.

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "pulse.npz")
    >>> np.savez(path, impulse_response=0.5 ** np.arange(6), sample_time=0.1)
    >>> data = load_impulse_response(path)
    >>> data.values.shape, data.sample_time
    ((6, 1, 1), 0.1)
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name, got {type(path).__name__}.")
    display = os.fsdecode(os.fspath(path))
    kind = _suffix(display)
    if kind not in (".npz", ".csv"):
        raise ModelFileError(display, "file", f"has the suffix {kind or '(none)'!r}; impulse-"
                                              "response data are read from .npz or .csv files.")
    with open_input(display, display, "an impulse-response file", limit=MAX_RESPONSE_FILE_BYTES,
                    limit_name=_LIMIT_NAME) as handle:
        if kind == ".npz":
            return _from_npz(handle, display)
        data = read_capped(handle, display, "an impulse-response file",
                           limit=MAX_RESPONSE_FILE_BYTES)
    return _from_csv(data, display)


def _names(array: np.ndarray, display: str, key: str, count: int) -> tuple:
    if array.ndim != 1 or (array.size and array.dtype.kind != "U"):
        raise ModelFileError(display, key, "must be a 1-D array of text, one name per channel.")
    names = [str(x) for x in array.tolist()]
    if len(names) != count:
        what = "outputs" if key == "outputs" else "inputs"
        raise ModelFileError(display, key, f"holds {len(names)} names but the impulse response "
                                           f"has {count} {what}; give one name per {what[:-1]}.")
    unique_names(names, display, key)
    return tuple(names)


def _scalar(array: np.ndarray, display: str, key: str, *, positive: bool) -> float:
    value = real_finite_array(array, display, key)
    if value.size != 1 or value.ndim > 1:
        raise ModelFileError(display, key, f"must be one number, got an array of shape "
                                           f"{value.shape}.")
    x = float(value.reshape(-1)[0])
    if positive and not x > 0:
        raise ModelFileError(display, key, f"must be a positive number of seconds, got {x!r}.")
    if not positive and x < 0:
        raise ModelFileError(display, key, f"must be 0 or more (a standard deviation), got {x!r}.")
    return x


def _from_npz(handle, display: str) -> ImpulseResponseData:
    arrays = {}
    archive, members = open_npz(handle, display, limit=MAX_RESPONSE_FILE_BYTES,
                                limit_name=_LIMIT_NAME)
    with archive:
        for key in members:
            if key not in RESPONSE_FILE_KEYS:
                shown = key if key.isprintable() and len(key) <= 40 else repr(key[:40])
                raise ModelFileError(display, shown, "unknown key; a response file holds "
                                                     f"{', '.join(RESPONSE_FILE_KEYS)}.")
        for key, info in members.items():
            arrays[key] = read_npz_member(archive, info, display, key,
                                          limit=MAX_RESPONSE_FILE_BYTES, limit_name=_LIMIT_NAME)
    if "impulse_response" not in arrays:
        raise ModelFileError(display, "impulse_response", "missing; store the samples as an array "
                                                          "of shape (samples, outputs, inputs).")
    values = real_finite_array(arrays["impulse_response"], display, "impulse_response")
    if values.ndim == 1:
        values = values[:, None, None]
    if values.ndim != 3 or 0 in values.shape:
        raise ModelFileError(display, "impulse_response", f"has shape {values.shape}; give an array "
                                                          "of shape (samples, outputs, inputs) "
                                                          "with none of them 0, or (samples,).")
    sample_time = noise = None
    if "sample_time" in arrays:
        sample_time = _scalar(arrays["sample_time"], display, "sample_time", positive=True)
    if "noise_level" in arrays:
        noise = _scalar(arrays["noise_level"], display, "noise_level", positive=False)
    outputs = _names(arrays["outputs"], display, "outputs", values.shape[1]) \
        if "outputs" in arrays else None
    inputs = _names(arrays["inputs"], display, "inputs", values.shape[2]) \
        if "inputs" in arrays else None
    return ImpulseResponseData(values, sample_time, noise, inputs, outputs, display)


def _csv_number(text: str, display: str, where: str, column: str) -> float:
    try:
        x = float(text)
    except ValueError:
        shown = text if len(text) <= 30 else text[:30] + "..."
        raise ModelFileError(display, where, f"column {column!r} holds {shown!r}, not a "
                                             "number.") from None
    if not math.isfinite(x):
        raise ModelFileError(display, where, f"column {column!r} holds {text!r}; every value must "
                                             "be finite.")
    return x


def _from_csv(data: bytes, display: str) -> ImpulseResponseData:
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise ModelFileError(display, f"line {line}", "not valid UTF-8 text; save the file with "
                                                      "UTF-8 encoding.") from None
    rows = []
    for number, line in enumerate(io.StringIO(text), start=1):
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            rows.append((number, [cell.strip() for cell in stripped.split(",")]))
    if not rows:
        raise ModelFileError(display, "header", "missing; the file holds no rows.")
    _header_line, header = rows[0]
    first = header[0].lower()
    if first not in ("sample", "time"):
        raise ModelFileError(display, "header", f"the first column is {header[0]!r}; it must be "
                                                "'sample' (0, 1, 2, ...) or 'time' (0, T, 2T, ...).")
    channels, outputs, inputs = [], [], []
    for cell in header[1:]:
        parts = cell.split(_CHANNEL_SEPARATOR)
        if len(parts) != 2 or not parts[0].strip() or not parts[1].strip():
            raise ModelFileError(display, "header", f"the column {cell!r} does not name a channel "
                                                    "as 'OUTPUT <- INPUT'.")
        out, inp = parts[0].strip(), parts[1].strip()
        if (out, inp) in channels:
            raise ModelFileError(display, "header", f"the channel {cell!r} appears twice.")
        channels.append((out, inp))
        if out not in outputs:
            outputs.append(out)
        if inp not in inputs:
            inputs.append(inp)
    if not channels:
        raise ModelFileError(display, "header", "names no channel; add columns 'OUTPUT <- INPUT'.")
    unique_names(outputs, display, "header (outputs)")
    unique_names(inputs, display, "header (inputs)")
    missing = [f"{o} <- {i}" for o in outputs for i in inputs if (o, i) not in channels]
    if missing:
        raise ModelFileError(display, "header", f"the channel {missing[0]!r} is missing; every "
                                                "output-input pair needs a column.")
    p, m = len(outputs), len(inputs)
    body = rows[1:]
    values = np.zeros((len(body), p, m))
    stamps = np.zeros(len(body))
    for k, (number, cells) in enumerate(body):
        where = f"line {number}"
        if len(cells) != len(header):
            raise ModelFileError(display, where, f"has {len(cells)} values but the header has "
                                                 f"{len(header)} columns.")
        stamps[k] = _csv_number(cells[0], display, where, header[0])
        for (out, inp), cell in zip(channels, cells[1:]):
            values[k, outputs.index(out), inputs.index(inp)] = _csv_number(
                cell, display, where, f"{out} <- {inp}")
    sample_time = _check_stamps(stamps, first, display, [n for n, _ in body])
    return ImpulseResponseData(values, sample_time, None, tuple(inputs), tuple(outputs), display)


def _check_stamps(stamps: np.ndarray, kind: str, display: str, lines: list) -> float | None:
    if stamps.size == 0:
        return None
    if kind == "sample":
        for k, (x, line) in enumerate(zip(stamps, lines)):
            if x != k:
                raise ModelFileError(display, f"line {line}", f"the sample number is {x:g}, "
                                                              f"expected {k}; samples run 0, 1, "
                                                              "2, ... without gaps.")
        return None
    if stamps[0] != 0.0:
        raise ModelFileError(display, f"line {lines[0]}", f"the first time is {stamps[0]:g}; the "
                                                          "pulse is at time 0.")
    if stamps.size < 2:
        return None
    step = float(stamps[1])
    if not step > 0:
        raise ModelFileError(display, f"line {lines[1]}", "times must increase.")
    expected = step * np.arange(stamps.size)
    off = np.flatnonzero(np.abs(stamps - expected) > 1e-6 * step)
    if off.size:
        k = int(off[0])
        raise ModelFileError(display, f"line {lines[k]}", f"the time is {stamps[k]:g}, expected "
                                                          f"{expected[k]:g}; samples must be "
                                                          "evenly spaced.")
    return step


def save_impulse_response(path, values, *, sample_time=None, noise_level=None, inputs=None,
                          outputs=None, overwrite: bool = True):
    """Write impulse-response data as ``.npz`` or ``.csv`` (layouts in the module doc).

    ``values`` is ``(K, p, m)`` (or ``(K,)``).  The ``.csv`` layout holds no noise level; a
    sample time is written as a ``time`` column.  Written all at once (nothing
    half-written); returns the path written.

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "pulse.csv")
    >>> _ = save_impulse_response(path, 0.5 ** np.arange(4), sample_time=0.5)
    >>> load_impulse_response(path).sample_time
    0.5
    """
    display = os.fsdecode(os.fspath(path))
    h = np.asarray(values, dtype=float)
    if h.ndim == 1:
        h = h[:, None, None]
    if h.ndim != 3 or not np.all(np.isfinite(h)):
        raise ValueError("values must be a finite array of shape (samples, outputs, inputs).")
    K, p, m = h.shape
    outputs = list(outputs) if outputs is not None else [f"y{i + 1}" for i in range(p)]
    inputs = list(inputs) if inputs is not None else [f"u{j + 1}" for j in range(m)]
    kind = _suffix(display)
    if kind == ".npz":
        arrays = {"impulse_response": h, "outputs": np.array(outputs, dtype=str),
                  "inputs": np.array(inputs, dtype=str)}
        if sample_time is not None:
            arrays["sample_time"] = np.array(float(sample_time))
        if noise_level is not None:
            arrays["noise_level"] = np.array(float(noise_level))
        return atomic_write(display, lambda f: np.savez(f, **arrays), overwrite=overwrite)
    if kind != ".csv":
        raise ValueError(f"{display}: give a .npz or .csv file name for impulse-response data.")
    if noise_level is not None:
        raise ValueError("the .csv layout holds no noise level; use .npz, or pass the noise "
                         "level to the realization.")
    first = "sample" if sample_time is None else "time"
    lines = [", ".join([first] + [f"{o} {_CHANNEL_SEPARATOR} {i}" for o in outputs
                                  for i in inputs])]
    for k in range(K):
        stamp = str(k) if sample_time is None else repr(k * float(sample_time))
        lines.append(", ".join([stamp] + [repr(float(x)) for x in h[k].reshape(-1)]))
    return atomic_write_text(display, "\n".join(lines) + "\n", overwrite=overwrite)
