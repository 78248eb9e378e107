"""Model files (``.toml``, ``.json``, ``.npz``) and safe writing of every output file.

File layout
-----------
TOML, and the same keys in a JSON object::

    name = "heat exchanger, 3 zones"   # optional
    sample_time = 0.01                 # optional; omit it for continuous time
    states  = ["zone1", "zone2"]       # optional names, one per state
    inputs  = ["valve"]                # optional, one per input
    outputs = ["outlet"]               # optional, one per output
    A = [[-1.0, 0.5], [0.0, -2.0]]     # a list of rows
    B = [[1.0], [0.0]]
    C = [[0.0, 1.0]]
    D = [[0.0]]                        # optional; zeros when omitted

``.npz``: arrays ``A``, ``B``, ``C``, optional ``D``, optional scalar ``sample_time``; plantcore
also writes (and reads, optionally) the text arrays ``name`` (0-d), ``states``, ``inputs`` and
``outputs`` (1-d) so that names survive a round trip.  An ``.npz`` file is read member by
member with :func:`numpy.lib.format.read_array` and ``allow_pickle=False``; a member whose
header declares an object dtype is refused before any of its data is read, so nothing in a
model file is ever unpickled or evaluated as code.

Rules that every reader applies
-------------------------------
* At most :data:`~plantcore.files.layout.MAX_MODEL_FILE_BYTES` (64 MiB) per file, and for ``.npz`` at most that many
  uncompressed bytes in total; a model that large is far beyond what the dense algorithms
  can analyse anyway, and the cap keeps a corrupt or hostile file from exhausting memory.
* Text files are UTF-8 (a leading byte-order mark is accepted).
* Only the keys above; unknown keys are refused (a misspelt ``sample_tme`` would otherwise
  silently turn a discrete model into a continuous one).  ``A``, ``B`` and ``C`` are required.
* Every matrix entry is a finite real number: strings (even ``"1.5"``), booleans, null,
  complex values, NaN and infinities are refused (the JSON literals ``NaN``, ``Infinity`` and
  ``-Infinity`` too).  ``[]`` is an empty matrix; a flat list of numbers is refused because it
  is ambiguous (a row or a column?).
* A file describes at least one input and one output.  A model without states (a static
  gain) writes ``A = []``, ``B = []``, ``C = []`` and must give ``D``.
* ``sample_time`` is a positive finite number (omit it for continuous time; ``0`` and
  ``null`` are refused rather than guessed).
* Only regular files are read: a folder, a named pipe, a device or a socket is refused before
  anything is read (see :mod:`plantcore.files.safe_read`).
* Names are non-empty strings without control, format (zero-width, bidirectional) or
  line-break characters, unique within ``states``, ``inputs`` and ``outputs`` as written and
  after Unicode NFKC normalization (so ``µ`` and ``μ`` cannot both appear), one per state /
  input / output (see :mod:`plantcore.core.names`).

Every problem raises :class:`plantcore.ModelFileError` (a ``ValueError``) whose one-line
message names the file, the field and the problem, for example
``plant.toml: B: row 3 has 2 entries but row 1 has 3``.

Writing
-------
:func:`save_model` writes floats with ``repr()``, the shortest text that reads back to the
same double, so a TOML or JSON round trip is exact.  All writing goes through
:func:`atomic_write`: the data go to a temporary file in the target folder which is then
moved into place with :func:`os.replace`, so a reader never sees a half-written file and a
failure leaves the previous file (or nothing) behind.  An output that resolves to the same
file as one of the given inputs is refused.
"""

from __future__ import annotations

import os
from pathlib import Path

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel, as_model
import plantcore.files.layout as layout
from plantcore.files.json_format import _json_document, _parse_json
from plantcore.files.layout import (
    _NAME_KEYS,
    MODEL_FILE_SUFFIXES,
    _check_name_text,
    _decode_text,
    _display_path,
    _fields_from_document,
    _model_from_fields,
)
from plantcore.files.npz_format import _fields_from_npz, _npz_writer
from plantcore.files.safe_read import open_input, read_capped
from plantcore.files.safe_write import atomic_write, atomic_write_text
from plantcore.files.sparse_files import (
    MAX_SPARSE_FILE_BYTES,
    is_sparse_manifest,
    load_sparse_manifest,
    save_sparse_model,
    sparse_model_from_npz,
)
from plantcore.files.toml_format import _parse_toml, _toml_document

__all__ = ["load_model", "save_model"]


def _suffix(path_text: str) -> str:
    return os.path.splitext(path_text)[1].lower()


def load_model(path) -> StateSpaceModel:
    """Read a model file (``.toml``, ``.json`` or ``.npz``).

    Parameters
    ----------
    path : str or os.PathLike
        The file.  The suffix (case-insensitive) selects the format.

    Returns
    -------
    StateSpaceModel

    Raises
    ------
    ModelFileError
        For every problem with the file (a ``ValueError``), with the one-line message
        ``"<file>: <field>: <problem>"``; see the module documentation for the rules.
    TypeError
        When ``path`` is not a path.

    Notes
    -----
    TOML is parsed with :mod:`tomllib` (``tomli`` before Python 3.11), JSON with :mod:`json`
    (with the non-standard ``NaN``/``Infinity`` literals and duplicate keys refused), ``.npz``
    with :mod:`zipfile` and :func:`numpy.lib.format.read_array` with ``allow_pickle=False``.
    Nothing in a file is evaluated as code.

    Examples
    --------
    >>> import os, tempfile
    >>> import plantcore as pc
    >>> folder = tempfile.mkdtemp()
    >>> path = os.path.join(folder, "tank.toml")
    >>> with open(path, "w", encoding="utf-8") as f:
    ...     _ = f.write('A = [[-0.5]]\\nB = [[1.0]]\\nC = [[2.0]]\\nsample_time = 0.1\\n')
    >>> model = pc.load_model(path)
    >>> (model.n, model.dt, model.D.tolist())
    (1, 0.1, [[0.0]])
    >>> with open(path, "w", encoding="utf-8") as f:
    ...     _ = f.write('A = [[-0.5]]\\nB = [[1.0], [2.0, 3.0]]\\nC = [[2.0]]\\n')
    >>> try:
    ...     pc.load_model(path)
    ... except pc.ModelFileError as exc:
    ...     print(exc.field, "|", exc.problem)
    B | row 2 has 2 entries but row 1 has 1; every row needs the same length.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name (str or os.PathLike), got {type(path).__name__}.")
    display = _display_path(path)
    real_path = os.fsdecode(os.fspath(path))
    suffix = _suffix(real_path)
    limit = layout.MAX_MODEL_FILE_BYTES
    if suffix == ".npz":  # a sparse archive may be larger (plantcore.files.sparse_files)
        limit = max(limit, MAX_SPARSE_FILE_BYTES)
    handle = open_input(real_path, display, "a model file", limit=limit,
                        limit_name="plantcore.files.MAX_MODEL_FILE_BYTES")
    with handle:
        if suffix not in MODEL_FILE_SUFFIXES:
            shown = f"{suffix!r}" if suffix else "no suffix"
            raise ModelFileError(display, "file", f"unknown file type ({shown}); model files end "
                                                  "in .toml, .json or .npz.")
        try:
            if suffix == ".npz":
                sparse = sparse_model_from_npz(handle, display)
                if sparse is not None:
                    return sparse
                _check_dense_size(handle, display)
                fields = _fields_from_npz(handle, display)
            else:
                data = read_capped(handle, display, "model files", limit=limit)
                text = _decode_text(data, display)
                doc = _parse_toml(text, display) if suffix == ".toml" else _parse_json(text, display)
                if suffix == ".toml" and is_sparse_manifest(doc):
                    return load_sparse_manifest(doc, real_path, display)
                fields = _fields_from_document(doc, display)
        except ModelFileError:
            raise
        except OSError as exc:
            raise ModelFileError(display, "file", f"cannot be read ({exc.strerror or exc}).") from None
        except MemoryError:
            raise ModelFileError(display, "file", "needs more memory than is available.") from None
        except Exception as exc:
            # A reader at a trust boundary: zipfile, zlib and numpy raise a zoo of exception
            # types on damaged archives.  All of them mean "this file is damaged", which the
            # user must hear as one clear line, never a traceback.
            raise ModelFileError(display, "file", f"is damaged or not a {suffix} model file "
                                                  f"({type(exc).__name__}: "
                                                  f"{' '.join(str(exc).split())}).") from None
    return _model_from_fields(fields, display)


def _check_dense_size(handle, display) -> None:
    """A dense ``.npz`` keeps the model-file cap (the sparse one was opened with a larger)."""
    size = os.fstat(handle.fileno()).st_size
    limit = layout.MAX_MODEL_FILE_BYTES
    if size > limit:
        raise ModelFileError(display, "file", f"has {size} bytes, more than the limit of {limit} "
                                              "bytes for a model file "
                                              "(plantcore.files.MAX_MODEL_FILE_BYTES).")


def _check_savable(model: StateSpaceModel, path) -> None:
    if model.n_inputs == 0:
        raise ModelFileError(path, "B", "the model has no inputs; a model file needs at least one "
                                        "input.")
    if model.n_outputs == 0:
        raise ModelFileError(path, "C", "the model has no outputs; a model file needs at least one "
                                        "output.")
    for key in _NAME_KEYS:
        for i, item in enumerate(getattr(model, key), start=1):
            _check_name_text(item, path, key, f"entry {i}", allow_empty=False)
    if model.name is not None:
        _check_name_text(model.name, path, "name", "the name", allow_empty=True)


def save_model(model, path, *, inputs=(), overwrite: bool = True) -> Path:
    """Write a model file (``.toml``, ``.json`` or ``.npz``) safely.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    path : str or os.PathLike
        Output file; its suffix selects the format.
    inputs : iterable of paths, optional
        Files the output must not overwrite (the files the model was read from).
    overwrite : bool, default True
        When False an existing file at ``path`` is refused (see :func:`atomic_write`).

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    ModelFileError
        Unknown suffix; a model without inputs or outputs, or with names that cannot be
        written on one line; an output that is one of ``inputs``; a missing or unwritable
        folder.  Nothing is left behind on failure.

    Notes
    -----
    Floats are written with ``repr()``, the shortest decimal text that reads back to the same
    double, so ``load_model(save_model(m, p))`` reproduces the arrays bit for bit (``-0.0``
    included).  State, input and output names are always written; ``name`` and
    ``sample_time`` only when set.  The write goes through :func:`atomic_write`.

    Examples
    --------
    >>> import os, tempfile
    >>> import numpy as np
    >>> import plantcore as pc
    >>> model = pc.StateSpaceModel([[-0.1, 1.0], [0.0, -0.3]], [[0.0], [1.0]], [[1.0, 0.0]],
    ...                            dt=0.05, states=["level", "inflow"], name="tank")
    >>> folder = tempfile.mkdtemp()
    >>> for suffix in (".toml", ".json", ".npz"):
    ...     back = pc.load_model(pc.save_model(model, os.path.join(folder, "tank" + suffix)))
    ...     assert np.array_equal(back.A, model.A) and back.states == model.states
    ...     assert back.dt == model.dt and back.name == "tank"
    """
    model = as_model(model, allow_sparse=True)
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name (str or os.PathLike), got {type(path).__name__}.")
    display = _display_path(path)
    suffix = _suffix(os.fsdecode(os.fspath(path)))
    if model.is_sparse:  # .npz archive or .toml manifest (plantcore.files.sparse_files)
        _check_savable(model, display)
        return save_sparse_model(model, path, inputs=inputs, overwrite=overwrite)
    if suffix not in MODEL_FILE_SUFFIXES:
        shown = f"{suffix!r}" if suffix else "no suffix"
        raise ModelFileError(display, "file", f"unknown file type ({shown}); model files end in "
                                              ".toml, .json or .npz.")
    _check_savable(model, display)
    if suffix == ".npz":
        return atomic_write(path, _npz_writer(model), inputs=inputs, overwrite=overwrite)
    text = _toml_document(model) if suffix == ".toml" else _json_document(model)
    return atomic_write_text(path, text, inputs=inputs, overwrite=overwrite)
