"""``.npz`` model files: reading member by member without unpickling, and writing.

Each member is read with :func:`numpy.lib.format.read_array` and ``allow_pickle=False``; a
member whose header declares an object dtype is refused before any of its data is read, so
nothing in a model file is ever unpickled or evaluated as code.
"""

from __future__ import annotations

import math
import zipfile
from typing import Any, Callable

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel
import plantcore.files.layout as layout
from plantcore.files.layout import (
    _MATRIX_KEYS,
    _NAME_KEYS,
    MODEL_FILE_KEYS,
    _check_keys,
    _key_text,
)


def _npz_member_header(zf: zipfile.ZipFile, info: zipfile.ZipInfo, path, key: str):
    """Read only the .npy header of one member: (shape, dtype).  No data, no unpickling."""
    fmt = np.lib.format
    with zf.open(info) as fp:
        try:
            version = fmt.read_magic(fp)
        except ValueError:
            raise ModelFileError(path, key, "is not a .npy array inside the archive.") from None
        if version == (1, 0):
            shape, _, dtype = fmt.read_array_header_1_0(fp)
        elif version == (2, 0):
            shape, _, dtype = fmt.read_array_header_2_0(fp)
        else:
            raise ModelFileError(path, key, f"uses .npy format version {version[0]}.{version[1]}, "
                                            "which plantcore does not read; save plain numeric "
                                            "arrays with numpy.savez.")
    return tuple(shape), dtype


def _npz_kind_problem(dtype: np.dtype) -> str | None:
    if dtype.hasobject:
        return ("holds Python objects (a pickled object array); plantcore never unpickles model "
                "files, save plain numeric arrays instead.")
    kind = dtype.kind
    if kind == "b":
        return "holds booleans; give real numbers (use 0 and 1)."
    if kind == "c":
        return "holds complex numbers; plantcore works with real models only."
    if kind in "US":
        return "holds text, not numbers."
    if kind == "V":
        return "is a structured (record) array; give a plain numeric array."
    if kind in "mM":
        return "holds dates or time spans, not numbers."
    return None


def _npz_read_member(zf: zipfile.ZipFile, info: zipfile.ZipInfo, display, key: str) -> np.ndarray:
    """Check one member's header (dtype, size) and only then read its data."""
    shape, dtype = _npz_member_header(zf, info, display, key)
    is_text = key in _NAME_KEYS or key == "name"
    empty = int(np.prod(shape, dtype=object)) == 0
    if dtype.hasobject:
        raise ModelFileError(display, key, _npz_kind_problem(dtype))
    if is_text and dtype.kind != "U" and not (key in _NAME_KEYS and empty):
        raise ModelFileError(display, key, f"must hold text (unicode strings), got dtype "
                                           f"{dtype}.")
    if not is_text and dtype.kind not in "iuf":
        raise ModelFileError(display, key, _npz_kind_problem(dtype)
                             or f"has dtype {dtype}, not real numbers.")
    if int(np.prod(shape, dtype=object)) * dtype.itemsize > layout.MAX_MODEL_FILE_BYTES:
        raise ModelFileError(display, key, f"declares shape {shape}, larger than the "
                                           "file size limit.")
    with zf.open(info) as fp:
        return np.lib.format.read_array(fp, allow_pickle=False)


def _npz_array_matrix(array: np.ndarray, path, key: str) -> np.ndarray:
    if array.ndim != 2:
        if array.ndim == 1:
            hint = (f"a 1-D array of {array.size} numbers; save it as 2-D (shape (1, {array.size}) for "
                    f"a row, ({array.size}, 1) for a column).")
        else:
            hint = f"an array with {array.ndim} dimensions {array.shape}; save it as a 2-D matrix."
        raise ModelFileError(path, key, "is " + hint)
    with np.errstate(over="ignore", invalid="ignore"):
        out = np.array(array, dtype=float)
    bad = np.argwhere(~np.isfinite(out))
    if bad.size:
        i, j = bad[0]
        raise ModelFileError(path, key, f"row {i + 1}, column {j + 1} is {float(out[i, j])!r}; every "
                                        "entry must be a finite real number.")
    return out


def _npz_array_names(array: np.ndarray, path, key: str) -> list[str]:
    if array.ndim != 1:
        raise ModelFileError(path, key, f"must be a 1-D array of names, got shape {array.shape}.")
    if array.size == 0:
        return []
    if array.dtype.kind != "U":
        raise ModelFileError(path, key, f"must be an array of text (unicode strings), got dtype "
                                        f"{array.dtype}.")
    return [str(x) for x in array.tolist()]


def _fields_from_npz(path, display) -> dict:
    """Read the members of an .npz archive safely and return the normalized fields."""
    if not zipfile.is_zipfile(path):
        raise ModelFileError(display, "file", "is not an .npz archive (a zip of .npy arrays); save "
                                            "the model with numpy.savez or plantcore.save_model.")
    fields: dict[str, Any] = {}
    with zipfile.ZipFile(path) as zf:
        infos = zf.infolist()
        total = sum(info.file_size for info in infos)
        if total > layout.MAX_MODEL_FILE_BYTES:
            raise ModelFileError(display, "file",
                                 f"the archive unpacks to {total} bytes, more than the limit of "
                                 f"{layout.MAX_MODEL_FILE_BYTES} bytes (plantcore.files.MAX_MODEL_FILE_BYTES).")
        members: dict[str, zipfile.ZipInfo] = {}
        for info in infos:
            key = info.filename[:-4] if info.filename.endswith(".npy") else info.filename
            if key in members:
                raise ModelFileError(display, _key_text(key), "appears twice in the archive.")
            members[key] = info
        _check_keys(members.keys(), display)
        for key in MODEL_FILE_KEYS:
            if key not in members:
                continue
            try:
                array = _npz_read_member(zf, members[key], display, key)
            except (ModelFileError, MemoryError):
                raise
            except Exception as exc:  # damaged member: CRC, zlib, EOF, unsupported compression...
                raise ModelFileError(display, key, f"is damaged ({type(exc).__name__}: "
                                                   f"{' '.join(str(exc).split())}).") from None
            if key in _MATRIX_KEYS:
                fields[key] = _npz_array_matrix(array, display, key)
            elif key in _NAME_KEYS:
                fields[key] = _npz_array_names(array, display, key)
            elif key == "name":
                if array.shape != () or array.dtype.kind != "U":
                    raise ModelFileError(display, "name", "must be a single string (a 0-d text array).")
                fields["name"] = str(array.item())
            else:  # sample_time
                if array.size != 1:
                    raise ModelFileError(display, "sample_time", f"must be a single number, got an "
                                                                 f"array of shape {array.shape}.")
                value = array.reshape(()).item()
                number = float(value)
                if not math.isfinite(number):
                    raise ModelFileError(display, "sample_time", f"is {number!r}; give a positive "
                                                                 "finite number.")
                if number <= 0.0:
                    raise ModelFileError(display, "sample_time", f"is {number!r} but must be "
                                                                 "positive; leave it out for "
                                                                 "continuous time.")
                fields["sample_time"] = number
    return fields


def _npz_writer(model: StateSpaceModel) -> Callable:
    arrays = {key: np.asarray(getattr(model, key), dtype=float) for key in _MATRIX_KEYS}
    if model.dt is not None:
        arrays["sample_time"] = np.array(model.dt, dtype=float)
    if model.name is not None:
        arrays["name"] = np.array(model.name, dtype=str)
    for key in _NAME_KEYS:
        arrays[key] = np.array(list(getattr(model, key)), dtype=str)
        if arrays[key].size == 0:
            arrays[key] = np.zeros(0, dtype="<U1")

    def write(f):
        np.savez(f, **arrays)

    return write
