"""Checks shared by the readers of archives: real finite arrays and lists of unique names.

Each refusal is a :class:`~plantcore.core.errors.ModelFileError` naming the file and the
field, so a command prints one line and exits 2.
"""

from __future__ import annotations

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.core.names import list_problem

__all__ = ["real_finite_array", "unique_names"]

_KIND_WORDS = {"b": "booleans", "c": "complex numbers", "U": "text", "S": "bytes",
               "O": "Python objects", "V": "a structured record", "M": "dates",
               "m": "time spans"}


def real_finite_array(array: np.ndarray, display, key: str) -> np.ndarray:
    """``array`` as floats, refused unless it holds real, finite numbers."""
    kind = array.dtype.kind
    if kind not in "iuf":
        what = _KIND_WORDS.get(kind, f"dtype {array.dtype}")
        raise ModelFileError(display, key, f"holds {what}; give an array of real numbers.")
    out = np.asarray(array, dtype=float)
    bad = np.argwhere(~np.isfinite(out))
    if bad.size:
        where = ", ".join(str(int(i)) for i in bad[0])
        raise ModelFileError(display, key, f"has the non-finite entry {out[tuple(bad[0])]!r} at "
                                           f"index [{where}]; every entry must be finite.")
    return out


def unique_names(names: list, display, key: str) -> list:
    """``names``, refused when one is not a usable name or a name appears twice."""
    problem = list_problem(names)
    if problem:
        raise ModelFileError(display, key, problem + ".")
    if len(set(names)) != len(names):
        raise ModelFileError(display, key, "holds a name twice; names must be unique.")
    return names
