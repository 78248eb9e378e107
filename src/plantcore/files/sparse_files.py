"""Sparse model files: a TOML manifest of Matrix Market files, and sparse ``.npz`` archives.

Two layouts hold a model whose ``A`` is sparse (``model.is_sparse``); :func:`load_model` and
:func:`save_model` of :mod:`plantcore.files.model_files` recognize them and hand them here.

Manifest (``.toml``)
--------------------
The keys of a dense model file, where a matrix may be the name of a file instead of a list
of rows::

    name = "heated plate, 100 x 100"
    states = [...]                 # optional, as in a dense file
    A = "plate_A.mtx"              # Matrix Market (an open standard, scipy.io.mmread)
    B = "plate_B.mtx"              # or "plate_B.npz" (scipy.sparse.save_npz layout)
    C = [[0.0, 1.0, ...]]          # B, C and D may also be written inline as lists of rows
    sample_time = 0.5              # optional

A manifest is a ``.toml`` file whose ``A`` is a string.  File names are relative to the
manifest's folder.  ``A`` must name a file; the other matrices may be files or inline.  A
Matrix Market file must be ``real`` or ``integer`` (``complex`` and ``pattern`` are refused:
a model needs real values), ``coordinate`` (sparse) or ``array`` (dense) format.  A
referenced ``.npz`` must be in the layout of ``scipy.sparse.save_npz`` (members ``data``,
``indices``, ``indptr``, ``shape``, ``format`` for CSR/CSC; ``row``, ``col``, ``data``,
``shape``, ``format`` for COO) and is read member by member without unpickling.

Sparse ``.npz`` (one file)
--------------------------
The dense ``.npz`` layout with ``A`` replaced by the members of ``scipy.sparse.save_npz``
prefixed with ``A_``: ``A_data``, ``A_indices``, ``A_indptr``, ``A_shape`` and ``A_format``
(``csr`` or ``csc``; text or bytes), or ``A_row``, ``A_col``, ``A_data``, ``A_shape``,
``A_format`` (``coo``).  ``B``, ``C``, ``D``, ``sample_time``, ``name``, ``states``, ``inputs``,
``outputs`` are as in a dense ``.npz``.  An archive with a member whose name starts with
``A_`` is read as sparse.

Limits
------
A referenced matrix file or a sparse ``.npz`` may hold up to :data:`MAX_SPARSE_FILE_BYTES`
(1 GiB; a 5-point plate of a million states needs about 70 MB); the manifest itself keeps the
64 MiB cap of model files.  Every problem is a :class:`plantcore.ModelFileError` whose one
line names the file (the manifest or the archive), the field and the problem, e.g.
``plate.toml: A: plate_A.mtx: not found.``

Writing
-------
``save_model(sparse_model, "plate.npz")`` writes one sparse archive;
``save_model(sparse_model, "plate.toml")`` writes ``plate_A.mtx`` (and ``plate_B.mtx``,
``plate_C.mtx``, ``plate_D.mtx``) next to the manifest, each atomically, the manifest last, so a
reader never finds a manifest whose matrices are missing.  Matrix Market values are written
with 17 significant digits, which read back bit for bit.  JSON holds dense models only.
"""

from __future__ import annotations

import io
import os
from pathlib import Path
from typing import Any

import numpy as np
import scipy.io
import scipy.sparse

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel
from plantcore.files.layout import (
    _MATRIX_KEYS,
    _NAME_KEYS,
    MODEL_FILE_KEYS,
    _display_path,
    _document_sample_time,
    _fields_from_document,
    _model_from_fields,
)
from plantcore.files.npz_format import _npz_array_matrix, _npz_array_names, _npz_kind_problem
from plantcore.files.safe_read import open_input, open_npz, read_npz_member
from plantcore.files.safe_write import atomic_write, atomic_write_text, check_output_path
from plantcore.files.toml_format import _toml_string

__all__ = ["MAX_SPARSE_FILE_BYTES", "is_sparse_manifest", "load_sparse_manifest", "save_sparse_model",
           "sparse_model_from_npz"]

#: Largest Matrix Market file, referenced ``.npz`` or sparse model archive accepted (bytes).
MAX_SPARSE_FILE_BYTES = 1024 ** 3

_LIMIT_NAME = "plantcore.files.sparse_files.MAX_SPARSE_FILE_BYTES"
_SPARSE_MEMBERS = ("data", "indices", "indptr", "shape", "format")
_COO_MEMBERS = ("row", "col", "data", "shape", "format")


def is_sparse_manifest(doc: Any) -> bool:
    """True when a parsed ``.toml`` document is a sparse manifest (its ``A`` is a file name)."""
    return isinstance(doc, dict) and isinstance(doc.get("A"), str)


# --- reading ---------------------------------------------------------------------------------

def _format_text(array: np.ndarray, display, field: str) -> str:
    if array.shape != () or array.dtype.kind not in "US":
        raise ModelFileError(display, field, "must be the text csr, csc or coo (a 0-d array).")
    value = array.item()
    return value.decode("ascii", "replace") if isinstance(value, bytes) else str(value)


def _index_array(array: np.ndarray, display, field: str) -> np.ndarray:
    if array.ndim != 1 or array.dtype.kind not in "iu":
        raise ModelFileError(display, field, f"must be a 1-D array of whole numbers, got shape "
                                             f"{array.shape} of {array.dtype}.")
    return array.astype(np.int64)


def _sparse_from_members(arrays: dict, display, prefix: str, label: str):
    """Build a sparse matrix from save_npz-layout members, checking every index."""
    def get(key):
        if prefix + key not in arrays:
            raise ModelFileError(display, label, f"the member {prefix + key} is missing; a sparse "
                                                 "matrix needs "
                                                 + ", ".join(prefix + k for k in _SPARSE_MEMBERS)
                                                 + ".")
        return arrays[prefix + key]

    kind = _format_text(get("format"), display, prefix + "format")
    shape = _index_array(get("shape"), display, prefix + "shape")
    if shape.size != 2 or np.any(shape < 0):
        raise ModelFileError(display, prefix + "shape", f"must be two non-negative numbers, got "
                                                        f"{shape.tolist()}.")
    data = get("data")
    if data.ndim != 1 or data.dtype.kind not in "iuf":
        raise ModelFileError(display, prefix + "data", _npz_kind_problem(data.dtype)
                             or f"must be a 1-D array of real numbers, got shape {data.shape} of "
                                f"{data.dtype}.")
    data = data.astype(float)
    bad = np.flatnonzero(~np.isfinite(data))
    if bad.size:
        raise ModelFileError(display, prefix + "data", f"entry {bad[0] + 1} is {data[bad[0]]!r}; "
                                                       "every entry must be a finite real number.")
    rows, cols = int(shape[0]), int(shape[1])
    if kind == "coo":
        row = _index_array(get("row"), display, prefix + "row")
        col = _index_array(get("col"), display, prefix + "col")
        if not row.size == col.size == data.size:
            raise ModelFileError(display, label, "row, col and data have different lengths.")
        if row.size and (row.min() < 0 or row.max() >= rows or col.min() < 0 or col.max() >= cols):
            raise ModelFileError(display, label, f"an index lies outside the shape {rows} x {cols}.")
        return scipy.sparse.coo_array((data, (row, col)), shape=(rows, cols)).tocsr()
    if kind not in ("csr", "csc"):
        raise ModelFileError(display, prefix + "format", f"is {kind!r}; plantcore reads csr, csc and "
                                                         "coo.")
    indices = _index_array(get("indices"), display, prefix + "indices")
    indptr = _index_array(get("indptr"), display, prefix + "indptr")
    major, minor = (rows, cols) if kind == "csr" else (cols, rows)
    if indptr.size != major + 1 or indptr[0] != 0 or np.any(np.diff(indptr) < 0) \
            or indptr[-1] != data.size or indices.size != data.size:
        raise ModelFileError(display, prefix + "indptr", f"is not a valid {kind} index pointer for "
                                                         f"shape {rows} x {cols} with {data.size} "
                                                         "entries.")
    if indices.size and (indices.min() < 0 or indices.max() >= minor):
        raise ModelFileError(display, prefix + "indices", f"an index lies outside the shape {rows} "
                                                          f"x {cols}.")
    cls = scipy.sparse.csr_array if kind == "csr" else scipy.sparse.csc_array
    return cls((data, indices, indptr), shape=(rows, cols)).tocsr()


def _read_archive(handle, display, wanted=None) -> dict:
    zf, members = open_npz(handle, display, limit=MAX_SPARSE_FILE_BYTES, limit_name=_LIMIT_NAME)
    with zf:
        return {key: read_npz_member(zf, info, display, key, limit=MAX_SPARSE_FILE_BYTES,
                                     limit_name=_LIMIT_NAME)
                for key, info in members.items() if wanted is None or key in wanted}


def _read_matrix_file(name: str, folder: str, display, field: str):
    """One matrix named in a manifest: a Matrix Market file or a save_npz archive."""
    shown = name if name.isprintable() else repr(name)
    suffix = os.path.splitext(name)[1].lower()
    if suffix not in (".mtx", ".npz"):
        raise ModelFileError(display, field, f"{shown}: unknown file type; a matrix file ends in "
                                             ".mtx (Matrix Market) or .npz (scipy.sparse.save_npz).")
    path = os.path.join(folder, name)
    try:
        handle = open_input(path, shown, "a matrix file", limit=MAX_SPARSE_FILE_BYTES,
                            limit_name=_LIMIT_NAME)
    except ModelFileError as exc:
        raise ModelFileError(display, field, f"{shown}: {exc.problem}") from None
    with handle:
        try:
            if suffix == ".npz":
                arrays = _read_archive(handle, shown)
                kind = _format_text(arrays["format"], shown, "format") if "format" in arrays \
                    else "csr"
                # save_npz also writes _is_array (True for a sparse array, not a matrix)
                _check_members(arrays, shown, (_COO_MEMBERS if kind == "coo" else _SPARSE_MEMBERS)
                               + ("_is_array",))
                return _sparse_from_members(arrays, shown, "", "file")
            return _read_matrix_market(handle, shown)
        except ModelFileError as exc:
            raise ModelFileError(display, field, f"{shown}: {exc.field}: {exc.problem}") from None


def _check_members(arrays: dict, display, allowed) -> None:
    unknown = sorted(set(arrays) - set(allowed))
    if unknown:
        raise ModelFileError(display, ", ".join(unknown[:3]), "unknown member of a "
                                                              "scipy.sparse.save_npz archive.")


def _read_matrix_market(handle, display):
    header = handle.readline(1024).decode("ascii", "replace").lower().split()
    if len(header) < 5 or header[0] != "%%matrixmarket" or header[1] != "matrix":
        raise ModelFileError(display, "file", "is not a Matrix Market file (the first line must "
                                              "start with %%MatrixMarket matrix).")
    layout_name, field_kind = header[2], header[3]
    if layout_name not in ("coordinate", "array"):
        raise ModelFileError(display, "file", f"has the layout {layout_name!r}; give coordinate or "
                                              "array.")
    if field_kind not in ("real", "integer", "double"):
        raise ModelFileError(display, "file", f"holds {field_kind} values; a model needs real "
                                              "numbers (real or integer).")
    handle.seek(0)
    try:
        value = scipy.io.mmread(handle)
    except MemoryError:
        raise ModelFileError(display, "file", "needs more memory than is available.") from None
    except Exception as exc:  # noqa: BLE001  (the reader raises many types on damaged text)
        raise ModelFileError(display, "file", f"is damaged ({type(exc).__name__}: "
                                              f"{' '.join(str(exc).split())}).") from None
    matrix = scipy.sparse.csr_array(value) if scipy.sparse.issparse(value) else np.asarray(value)
    data = matrix.data if scipy.sparse.issparse(matrix) else matrix.ravel()
    bad = np.flatnonzero(~np.isfinite(np.asarray(data, dtype=float)))
    if bad.size:
        raise ModelFileError(display, "file", "holds a non-finite value; every entry must be a "
                                              "finite real number.")
    return matrix.astype(float)


def load_sparse_manifest(doc: dict, manifest_path, display) -> StateSpaceModel:
    """The sparse model a parsed manifest describes (see the module notes)."""
    folder = os.path.dirname(os.path.abspath(os.fsdecode(os.fspath(manifest_path))))
    # The dense reader checks everything but the file names, which stand in as empty lists.
    files = {key: doc[key] for key in _MATRIX_KEYS if isinstance(doc.get(key), str)}
    fields = _fields_from_document({**doc, **{key: [] for key in files}}, display)
    for key, name in files.items():
        value = _read_matrix_file(name, folder, display, key)
        if key == "A":
            value = scipy.sparse.csr_array(value)  # an "array" layout file too: A stays sparse
        elif scipy.sparse.issparse(value):
            value = value.toarray()  # B, C, D are stored dense (few columns or rows)
        fields[key] = value
    # The shared checks of the dense layout read only A's shape and hand A to the model.
    return _model_from_fields(fields, display)


def sparse_model_from_npz(handle, display) -> StateSpaceModel | None:
    """The sparse model in an open ``.npz`` archive, or None when the archive is dense.

    The handle is left at its start when None is returned.
    """
    zf, members = open_npz(handle, display, limit=MAX_SPARSE_FILE_BYTES, limit_name=_LIMIT_NAME)
    zf.close()
    if not any(key.startswith("A_") for key in members):
        handle.seek(0)
        return None
    sparse_keys = {"A_" + k for k in _SPARSE_MEMBERS + _COO_MEMBERS}
    allowed = (set(MODEL_FILE_KEYS) - {"A"}) | sparse_keys
    unknown = sorted(set(members) - allowed)
    if unknown:
        raise ModelFileError(display, ", ".join(unknown[:3]),
                             "unknown member of a sparse model archive; the allowed members are "
                             + ", ".join(sorted(allowed)) + ".")
    handle.seek(0)
    arrays = _read_archive(handle, display)
    fields: dict[str, Any] = {"A": _sparse_from_members(arrays, display, "A_", "A")}
    for key in ("B", "C", "D"):
        if key in arrays:
            fields[key] = _npz_array_matrix(arrays[key], display, key)
    for key in _NAME_KEYS:
        if key in arrays:
            fields[key] = _npz_array_names(arrays[key], display, key)
    if "name" in arrays:
        if arrays["name"].shape != () or arrays["name"].dtype.kind != "U":
            raise ModelFileError(display, "name", "must be a single string (a 0-d text array).")
        fields["name"] = str(arrays["name"].item())
    if "sample_time" in arrays:
        value = arrays["sample_time"]
        if value.size != 1 or value.dtype.kind not in "iuf":
            raise ModelFileError(display, "sample_time", "must be a single number.")
        fields["sample_time"] = _document_sample_time(float(value.reshape(())), display)
    for key in ("B", "C"):
        if key not in fields:
            raise ModelFileError(display, key, "missing; a model file needs A, B and C (D is "
                                               "optional).")
    return _model_from_fields(fields, display)


# --- writing ---------------------------------------------------------------------------------

def _sparse_members(model: StateSpaceModel) -> dict:
    A = model.A.tocsr()
    members = {"A_data": np.asarray(A.data, dtype=float),
               "A_indices": np.asarray(A.indices), "A_indptr": np.asarray(A.indptr),
               "A_shape": np.array(A.shape, dtype=np.int64), "A_format": np.array("csr"),
               "B": np.asarray(model.B, dtype=float), "C": np.asarray(model.C, dtype=float),
               "D": np.asarray(model.D, dtype=float)}
    if model.dt is not None:
        members["sample_time"] = np.array(model.dt, dtype=float)
    if model.name is not None:
        members["name"] = np.array(model.name, dtype=str)
    for key in _NAME_KEYS:
        names = list(getattr(model, key))
        members[key] = np.array(names, dtype=str) if names else np.zeros(0, dtype="<U1")
    return members


def _matrix_market_bytes(matrix) -> bytes:
    buffer = io.BytesIO()
    scipy.io.mmwrite(buffer, scipy.sparse.coo_array(matrix), precision=17)
    return buffer.getvalue()


def save_sparse_model(model: StateSpaceModel, path, *, inputs=(), overwrite: bool = True) -> Path:
    """Write a sparse model as one ``.npz`` archive or a ``.toml`` manifest with ``.mtx`` files.

    Raises
    ------
    ModelFileError
        For ``.json`` (dense models only) or any output that is refused by
        :func:`plantcore.files.atomic_write` (an input, a read-only file, ...).
    """
    display = _display_path(path)
    real = os.fsdecode(os.fspath(path))
    suffix = os.path.splitext(real)[1].lower()
    if suffix == ".npz":
        members = _sparse_members(model)
        return atomic_write(path, lambda f: np.savez(f, **members), inputs=inputs,
                            overwrite=overwrite)
    if suffix != ".toml":
        raise ModelFileError(display, "file", "a sparse model is written as .npz (one archive) or "
                                              ".toml (a manifest with Matrix Market files); "
                                              ".json holds dense models only.")
    stem = os.path.splitext(os.path.basename(real))[0]
    folder = os.path.dirname(real)
    targets = {key: os.path.join(folder, f"{stem}_{key}.mtx") for key in _MATRIX_KEYS}
    for target in [real, *targets.values()]:  # refuse before writing anything
        check_output_path(target, inputs=inputs, overwrite=overwrite)
    header = {"name": model.name, "sample_time": model.dt}
    lines = [f"{key} = {_toml_string(value) if isinstance(value, str) else repr(value)}"
             for key, value in header.items() if value is not None]
    lines += [f"{key} = [" + ", ".join(map(_toml_string, getattr(model, key))) + "]"
              for key in _NAME_KEYS]
    for key in _MATRIX_KEYS:
        data = _matrix_market_bytes(getattr(model, key))
        atomic_write(targets[key], lambda f, data=data: f.write(data), inputs=inputs,
                     overwrite=overwrite)
        lines.append(f"{key} = {_toml_string(os.path.basename(targets[key]))}")
    return atomic_write_text(path, "\n".join(lines) + "\n", inputs=inputs, overwrite=overwrite)
