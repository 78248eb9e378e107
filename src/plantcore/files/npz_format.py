"""``.npz`` model files: reading member by member without unpickling, and writing.

Each member is read with :func:`plantcore.files.safe_read.read_npy`: a member whose header
declares an object dtype or more data than the cap is refused before any of its data is
read, so nothing in a model file is ever unpickled or evaluated as code.  Encrypted members
and unknown compression methods are refused from the archive's directory.
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
)
from plantcore.files.safe_read import open_npz, read_npz_member


def _npz_kind_problem(dtype: np.dtype) -> str | None:
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
    """One member, its header checked (objects, size) before its data are read."""
    array = read_npz_member(zf, info, display, key, limit=layout.MAX_MODEL_FILE_BYTES,
                            limit_name="plantcore.files.MAX_MODEL_FILE_BYTES")
    is_text = key in _NAME_KEYS or key == "name"
    if is_text and array.dtype.kind != "U" and not (key in _NAME_KEYS and array.size == 0):
        raise ModelFileError(display, key, f"must hold text (unicode strings), got dtype "
                                           f"{array.dtype}.")
    if not is_text and array.dtype.kind not in "iuf":
        raise ModelFileError(display, key, _npz_kind_problem(array.dtype)
                             or f"has dtype {array.dtype}, not real numbers.")
    return array


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


def _fields_from_npz(handle, display) -> dict:
    """Read the members of an open .npz archive safely and return the normalized fields."""
    fields: dict[str, Any] = {}
    zf, members = open_npz(handle, display, limit=layout.MAX_MODEL_FILE_BYTES,
                           limit_name="plantcore.files.MAX_MODEL_FILE_BYTES")
    with zf:
        _check_keys(members.keys(), display)
        for key in MODEL_FILE_KEYS:
            if key not in members:
                continue
            array = _npz_read_member(zf, members[key], display, key)
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
