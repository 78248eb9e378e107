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
* At most :data:`MAX_MODEL_FILE_BYTES` (64 MiB) per file, and for ``.npz`` at most that many
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
* Names are non-empty strings without control or line-break characters, unique within
  ``states``, ``inputs`` and ``outputs``, one per state / input / output.

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

import datetime as _dt
import json
import math
import os
import re
import secrets
import stat
import sys
import unicodedata
import zipfile
from pathlib import Path
from typing import Any, Callable, Iterable

import numpy as np

from .errors import ModelFileError
from .model import StateSpaceModel, as_model

if sys.version_info >= (3, 11):  # pragma: no cover - depends on the interpreter
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = [
    "MAX_MODEL_FILE_BYTES",
    "MODEL_FILE_KEYS",
    "MODEL_FILE_SUFFIXES",
    "load_model",
    "save_model",
    "atomic_write",
    "atomic_write_text",
    "check_output_path",
]

#: Largest model file accepted, in bytes (64 MiB); for ``.npz`` also the largest total
#: uncompressed size of its members.
MAX_MODEL_FILE_BYTES = 64 * 1024 * 1024

#: The keys of a model file, in the order they are written.
MODEL_FILE_KEYS = ("name", "sample_time", "states", "inputs", "outputs", "A", "B", "C", "D")

#: File suffixes understood by :func:`load_model` and :func:`save_model`.
MODEL_FILE_SUFFIXES = (".toml", ".json", ".npz")

_REQUIRED_KEYS = ("A", "B", "C")
_MATRIX_KEYS = ("A", "B", "C", "D")
_NAME_KEYS = ("states", "inputs", "outputs")
_ALLOWED_TEXT = ", ".join(MODEL_FILE_KEYS)
# Unicode categories refused in names: control characters, unpaired surrogates (not UTF-8),
# and line / paragraph separators (they would break one-line messages and reports).
_BAD_NAME_CATEGORIES = {"Cc": "a control character", "Cs": "an unpaired surrogate",
                        "Zl": "a line separator", "Zp": "a paragraph separator"}


# =============================================================================================
# Small helpers
# =============================================================================================

class _NonFiniteLiteral:
    """Stands for a JSON ``NaN`` / ``Infinity`` / ``-Infinity`` literal until it is refused."""

    __slots__ = ("text",)

    def __init__(self, text: str):
        self.text = text


class _DuplicateKey(Exception):
    def __init__(self, key: str):
        super().__init__(key)
        self.key = key


def _n(count: int, noun: str) -> str:
    """``"1 row"``, ``"3 rows"``."""
    return f"{count} {noun}" if count == 1 else f"{count} {noun}s"


def _short(text: str, limit: int = 40) -> str:
    """repr() of a string, cut to ``limit`` characters, on one line."""
    if len(text) > limit:
        text = text[:limit] + "..."
    return repr(text)


def _key_text(key) -> str:
    """A key from a file, as shown in a message: as is when it is plain text, else repr()."""
    text = str(key)
    if text and text.isprintable() and text == text.strip() and len(text) <= 40:
        return text
    return _short(text)


def _display_path(path) -> str:
    """The path as given, on one line (repr() when it holds unprintable characters)."""
    text = os.fsdecode(os.fspath(path))
    return text if text.isprintable() else repr(text)


def _looks_like_number(text: str) -> bool:
    try:
        float(text.replace("_", ""))
    except ValueError:
        return False
    return True


def _looks_complex(text: str) -> bool:
    t = text.strip().replace(" ", "")
    if not t or not re.search(r"[ij]", t):
        return False
    try:
        complex(t.replace("i", "j"))
    except ValueError:
        return False
    return True


def _describe(value: Any) -> str:
    """A short phrase naming what a parsed value is, for error messages."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return f"the boolean {'true' if value else 'false'}"
    if isinstance(value, _NonFiniteLiteral):
        return f"the non-finite literal {value.text}"
    if isinstance(value, str):
        if _looks_like_number(value):
            return f"the string {_short(value)} (numbers must not be quoted)"
        if _looks_complex(value):
            return (f"the string {_short(value)}, which looks like a complex number "
                    "(plantcore works with real models only)")
        return f"the string {_short(value)}"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    if isinstance(value, complex):
        return f"the complex number {value!r} (plantcore works with real models only)"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table (key/value mapping)"
    if isinstance(value, (_dt.date, _dt.time, _dt.datetime)):
        return "a date/time value"
    return f"a value of type {type(value).__name__}"


def _check_name_text(text: str, path, field: str, where: str, *, allow_empty: bool) -> None:
    """Refuse names that would be unreadable, not UTF-8, or break a one-line message."""
    if not text and not allow_empty:
        raise ModelFileError(path, field, f"{where} is an empty string; give every name some text.")
    for ch in text:
        kind = unicodedata.category(ch)
        if kind in _BAD_NAME_CATEGORIES:
            raise ModelFileError(
                path, field,
                f"{where} contains {_BAD_NAME_CATEGORIES[kind]} (U+{ord(ch):04X}); names must be "
                "printable text on one line.")


# =============================================================================================
# Reading: from a parsed document (TOML / JSON) to checked values
# =============================================================================================

def _real_entry(value: Any, path, field: str, where: str) -> float:
    """One matrix entry or scalar from a TOML/JSON document, as a finite float."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        if isinstance(value, _NonFiniteLiteral):
            problem = f"{where} is {value.text}; it must be a finite real number."
        elif isinstance(value, list):
            problem = (f"{where} is a list where a number belongs (too many levels of "
                       "brackets?); write a matrix as a list of rows of numbers.")
        else:
            problem = f"{where} is {_describe(value)}, not a real number."
        raise ModelFileError(path, field, problem)
    try:
        number = float(value)
    except OverflowError:
        raise ModelFileError(path, field, f"{where} is too large for a floating-point number "
                                          "(beyond about 1.8e308).") from None
    if not math.isfinite(number):
        hint = "" if math.isnan(number) else " (numbers beyond about 1.8e308 are infinite too)"
        raise ModelFileError(path, field, f"{where} is {number!r}; it must be a finite real "
                                          f"number{hint}.")
    return number


def _document_matrix(value: Any, path, field: str) -> np.ndarray:
    """A matrix written as a list of rows in a TOML/JSON document."""
    if not isinstance(value, list):
        raise ModelFileError(path, field, f"must be a matrix written as a list of rows, "
                                          f"got {_describe(value)}.")
    if not value:
        return np.zeros((0, 0))
    if all(not isinstance(row, list) for row in value):
        if all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in value):
            example = "[[1.0, 2.0]] for a row or [[1.0], [2.0]] for a column"
            raise ModelFileError(path, field, f"is a flat list of {len(value)} numbers; write it as "
                                              f"a list of rows, for example {example}.")
    width = None
    for i, row in enumerate(value, start=1):
        if not isinstance(row, list):
            raise ModelFileError(path, field, f"row {i} is {_describe(row)}, not a list of numbers; "
                                              "write the matrix as a list of rows.")
        if width is None:
            width = len(row)
        elif len(row) != width:
            count = f"{len(row)} {'entry' if len(row) == 1 else 'entries'}"
            raise ModelFileError(path, field, f"row {i} has {count} but row 1 has {width}; every "
                                              "row needs the same length.")
    out = np.empty((len(value), width or 0))
    for i, row in enumerate(value):
        for j, entry in enumerate(row):
            out[i, j] = _real_entry(entry, path, field, f"row {i + 1}, column {j + 1}")
    return out


def _document_sample_time(value: Any, path) -> float:
    if value is None:
        raise ModelFileError(path, "sample_time", "is null; omit the key for continuous time, "
                                                  "or give a positive number of seconds.")
    number = _real_entry(value, path, "sample_time", "the value")
    if number <= 0.0:
        raise ModelFileError(path, "sample_time", f"is {number!r} but must be positive; omit the "
                                                  "key for continuous time.")
    return number


def _document_names(value: Any, path, field: str) -> list[str]:
    if not isinstance(value, list):
        raise ModelFileError(path, field, f"must be a list of names, got {_describe(value)}.")
    for i, item in enumerate(value, start=1):
        if not isinstance(item, str):
            raise ModelFileError(path, field, f"entry {i} is {_describe(item)}, not a string.")
    return list(value)


def _document_name(value: Any, path) -> str:
    if not isinstance(value, str):
        raise ModelFileError(path, "name", f"must be a string, got {_describe(value)}.")
    return value


def _check_keys(keys: Iterable[str], path) -> None:
    keys = list(keys)
    unknown = [k for k in keys if k not in MODEL_FILE_KEYS]
    if unknown:
        hints = []
        for k in unknown[:5]:
            match = [a for a in MODEL_FILE_KEYS if a.lower() == str(k).lower()]
            if match:
                hints.append(f"{match[0]!r} instead of {k!r}")
        hint = f" (did you mean {', '.join(hints)}?)" if hints else ""
        names = ", ".join(_key_text(k) for k in unknown[:5])
        if len(unknown) > 5:
            names += f" and {len(unknown) - 5} more"
        raise ModelFileError(path, names, f"unknown key{'s' if len(unknown) > 1 else ''}{hint}; the "
                                          f"allowed keys are {_ALLOWED_TEXT} (A, B and C are "
                                          "required).")
    missing = [k for k in _REQUIRED_KEYS if k not in keys]
    if missing:
        raise ModelFileError(path, ", ".join(missing), "missing; a model file needs A, B and C "
                                                       "(D is optional).")


def _fields_from_document(doc: Any, path) -> dict:
    """Check a parsed TOML/JSON document and return the normalized fields."""
    if not isinstance(doc, dict):
        raise ModelFileError(path, "top level", f"must be a table of keys ({_ALLOWED_TEXT}), got "
                                                f"{_describe(doc)}.")
    _check_keys(doc.keys(), path)
    fields: dict[str, Any] = {}
    if "name" in doc:
        fields["name"] = _document_name(doc["name"], path)
    if "sample_time" in doc:
        fields["sample_time"] = _document_sample_time(doc["sample_time"], path)
    for key in _MATRIX_KEYS:
        if key in doc:
            fields[key] = _document_matrix(doc[key], path, key)
    for key in _NAME_KEYS:
        if key in doc:
            fields[key] = _document_names(doc[key], path, key)
    return fields


# =============================================================================================
# Reading: the three formats
# =============================================================================================

def _syntax_location(message: str) -> str | None:
    found = re.search(r"line (\d+)", message)
    return f"line {found.group(1)}" if found else None


def _value_error_text(exc: ValueError) -> str:
    text = " ".join(str(exc).split())
    if "integer string conversion" in text:
        return "a number has more digits than Python converts (more than about 4300)"
    return text


def _parse_toml(text: str, path) -> Any:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = " ".join(str(exc).split())
        where = _syntax_location(message) or "end of file"
        raise ModelFileError(path, where, f"TOML syntax error: {message}.") from None
    except RecursionError:
        raise ModelFileError(path, "file", "TOML syntax error: the values are nested too "
                                           "deeply.") from None
    except ValueError as exc:  # e.g. an integer too long to convert
        raise ModelFileError(path, "file", f"TOML syntax error: {_value_error_text(exc)}.") from None


def _json_pairs(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise _DuplicateKey(key)
        out[key] = value
    return out


def _parse_json(text: str, path) -> Any:
    try:
        return json.loads(text, parse_constant=_NonFiniteLiteral, object_pairs_hook=_json_pairs)
    except json.JSONDecodeError as exc:
        raise ModelFileError(path, f"line {exc.lineno}",
                             f"JSON syntax error: {exc.msg} (column {exc.colno}).") from None
    except _DuplicateKey as exc:
        raise ModelFileError(path, _key_text(exc.key), "appears twice in the same object; give each key "
                                                 "once.") from None
    except RecursionError:
        raise ModelFileError(path, "file", "JSON syntax error: the values are nested too "
                                           "deeply.") from None
    except ValueError as exc:  # e.g. an integer literal with more digits than Python converts
        raise ModelFileError(path, "file", f"JSON syntax error: {_value_error_text(exc)}.") from None


def _decode_text(data: bytes, path) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        offset = exc.start + (3 if data.startswith(b"\xef\xbb\xbf") else 0)
        line = data[:offset].count(b"\n") + 1
        raise ModelFileError(path, f"line {line}",
                             f"not valid UTF-8 text (byte 0x{data[offset]:02x} at offset {offset}); "
                             "save the file with UTF-8 encoding.") from None


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
    if int(np.prod(shape, dtype=object)) * dtype.itemsize > MAX_MODEL_FILE_BYTES:
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
        if total > MAX_MODEL_FILE_BYTES:
            raise ModelFileError(display, "file",
                                 f"the archive unpacks to {total} bytes, more than the limit of "
                                 f"{MAX_MODEL_FILE_BYTES} bytes (plantcore.io.MAX_MODEL_FILE_BYTES).")
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


# =============================================================================================
# Reading: from normalized fields to a model
# =============================================================================================

def _model_from_fields(fields: dict, path) -> StateSpaceModel:
    A, B, C = fields["A"], fields["B"], fields["C"]
    D = fields.get("D")
    if A.shape[0] != A.shape[1]:
        raise ModelFileError(path, "A", f"is {A.shape[0]} x {A.shape[1]} but must be square (one row "
                                        "and one column per state).")
    n = A.shape[0]
    if B.shape[0] != n:
        raise ModelFileError(path, "B", f"has {_n(B.shape[0], 'row')} but A is {n} x {n}; B needs one "
                                        "row per state.")
    if C.shape[1] != n and not (n == 0 and C.shape[0] == 0):
        raise ModelFileError(path, "C", f"has {_n(C.shape[1], 'column')} but A is {n} x {n}; C needs one "
                                        "column per state.")
    m = B.shape[1] if (n > 0 or B.shape[1] > 0) else None
    p = C.shape[0] if (n > 0 or C.shape[0] > 0) else None
    if D is None:
        if m is None or p is None:
            raise ModelFileError(path, "D", "missing; a model without states (A is empty) needs D to "
                                            "give its inputs and outputs (one row per output, one "
                                            "column per input).")
        D = np.zeros((p, m))
    else:
        p_exp = D.shape[0] if p is None else p
        m_exp = D.shape[1] if m is None else m
        if D.shape != (p_exp, m_exp):
            raise ModelFileError(path, "D", f"is {D.shape[0]} x {D.shape[1]} but the model has "
                                            f"{_n(p_exp, 'output')} (rows of C) and "
                                            f"{_n(m_exp, 'input')} (columns of B); "
                                            f"D must be {p_exp} x {m_exp}.")
        p, m = D.shape
    if m == 0:
        raise ModelFileError(path, "B" if n else "D", "the model has no inputs; a model file needs "
                                                      "at least one input (one column of B and D).")
    if p == 0:
        raise ModelFileError(path, "C" if n else "D", "the model has no outputs; a model file needs "
                                                      "at least one output (one row of C and D).")
    if n == 0:
        B, C = np.zeros((0, m)), np.zeros((p, 0))
    counts = {"states": n, "inputs": m, "outputs": p}
    owner = {"states": "A has", "inputs": "B has", "outputs": "C has"}
    unit = {"states": "state", "inputs": "input", "outputs": "output"}
    names = {}
    for key in _NAME_KEYS:
        if key not in fields:
            names[key] = None
            continue
        items = fields[key]
        if len(items) != counts[key]:
            raise ModelFileError(path, key, f"has {_n(len(items), 'name')} but {owner[key]} "
                                            f"{_n(counts[key], unit[key])}; give one name each.")
        seen = set()
        for i, item in enumerate(items, start=1):
            _check_name_text(item, path, key, f"entry {i}", allow_empty=False)
            if item in seen:
                raise ModelFileError(path, key, f"holds the name {_short(item)} twice; names must be "
                                                "unique.")
            seen.add(item)
        names[key] = items
    if "name" in fields:
        _check_name_text(fields["name"], path, "name", "the name", allow_empty=True)
    try:
        return StateSpaceModel(A, B, C, D, fields.get("sample_time"), states=names["states"],
                               inputs=names["inputs"], outputs=names["outputs"],
                               name=fields.get("name"))
    except ValueError as exc:  # should not happen after the checks above; keep the file name
        text = " ".join(str(exc).split())
        first = text.split(" ", 1)[0].rstrip(":")
        field = first if first in MODEL_FILE_KEYS else "model"
        raise ModelFileError(path, field, text) from None


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
    try:
        info = os.stat(real_path)
    except FileNotFoundError:
        raise ModelFileError(display, "file", "not found.") from None
    except NotADirectoryError:
        raise ModelFileError(display, "file", "not found (a part of the path is not a "
                                              "folder).") from None
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({exc.strerror or exc}).") from None
    if stat.S_ISDIR(info.st_mode):
        raise ModelFileError(display, "file", "is a folder, not a model file.")
    if not stat.S_ISREG(info.st_mode):
        raise ModelFileError(display, "file", "is not a regular file (a device, pipe or socket); give a "
                                            "model file.")
    suffix = _suffix(real_path)
    if suffix not in MODEL_FILE_SUFFIXES:
        shown = f"{suffix!r}" if suffix else "no suffix"
        raise ModelFileError(display, "file", f"unknown file type ({shown}); model files end in "
                                              ".toml, .json or .npz.")
    if info.st_size > MAX_MODEL_FILE_BYTES:
        raise ModelFileError(display, "file", f"has {info.st_size} bytes, more than the limit "
                                            f"of {MAX_MODEL_FILE_BYTES} bytes for model files "
                                            "(plantcore.io.MAX_MODEL_FILE_BYTES).")
    try:
        if suffix == ".npz":
            fields = _fields_from_npz(real_path, display)
        else:
            with open(real_path, "rb") as f:
                data = f.read(MAX_MODEL_FILE_BYTES + 1)
            if len(data) > MAX_MODEL_FILE_BYTES:
                raise ModelFileError(display, "file", f"has more than {MAX_MODEL_FILE_BYTES} "
                                                    "bytes, the limit for model files.")
            text = _decode_text(data, display)
            doc = _parse_toml(text, display) if suffix == ".toml" else _parse_json(text, display)
            fields = _fields_from_document(doc, display)
    except ModelFileError:
        raise
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({exc.strerror or exc}).") from None
    except MemoryError:
        raise ModelFileError(display, "file", "needs more memory than is available.") from None
    except Exception as exc:
        # A reader at a trust boundary: zipfile, zlib and numpy raise a zoo of exception types
        # on damaged archives (BadZipFile, zlib.error, EOFError, NotImplementedError for an
        # unknown compression, RuntimeError for encryption, ...).  All of them mean "this file
        # is damaged", which the user must hear as one clear line, never a traceback.
        raise ModelFileError(display, "file", f"is damaged or not a {suffix} model file "
                                            f"({type(exc).__name__}: {' '.join(str(exc).split())})."
                             ) from None
    return _model_from_fields(fields, display)


# =============================================================================================
# Writing
# =============================================================================================

def _toml_string(text: str) -> str:
    out = ['"']
    for ch in text:
        code = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _float_text(x) -> str:
    return repr(float(x))  # shortest text that reads back to the same double


def _matrix_lines(key: str, M: np.ndarray, *, toml: bool) -> list[str]:
    sep = " = " if toml else ": "
    label = key if toml else json.dumps(key)
    if M.size == 0:
        return [f"{label}{sep}[]"]
    rows = ["[" + ", ".join(_float_text(x) for x in row) + "]" for row in M]
    if toml:
        return [f"{label}{sep}["] + [f"    {r}," for r in rows] + ["]"]
    return [f"{label}{sep}["] + [f"  {r}" + ("," if i < len(rows) - 1 else "")
                                 for i, r in enumerate(rows)] + ["]"]


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


def _text_document(model: StateSpaceModel, *, toml: bool) -> str:
    if toml:
        lines = ["# plantcore state-space model (see plantcore.io for the layout)"]
        if model.name is not None:
            lines.append(f"name = {_toml_string(model.name)}")
        if model.dt is not None:
            lines.append(f"sample_time = {_float_text(model.dt)}")
        for key in _NAME_KEYS:
            lines.append(f"{key} = [" + ", ".join(_toml_string(s) for s in getattr(model, key)) + "]")
        for key in _MATRIX_KEYS:
            lines.extend(_matrix_lines(key, getattr(model, key), toml=True))
        return "\n".join(lines) + "\n"
    items = []
    if model.name is not None:
        items.append([f'  "name": {json.dumps(model.name, ensure_ascii=False)}'])
    if model.dt is not None:
        items.append([f'  "sample_time": {_float_text(model.dt)}'])
    for key in _NAME_KEYS:
        items.append([f'  "{key}": ' + json.dumps(list(getattr(model, key)), ensure_ascii=False)])
    for key in _MATRIX_KEYS:
        block = _matrix_lines(key, getattr(model, key), toml=False)
        items.append(["  " + block[0]] + ["  " + line for line in block[1:]])
    body = []
    for k, block in enumerate(items):
        if k < len(items) - 1:
            block = block[:-1] + [block[-1] + ","]
        body.extend(block)
    return "{\n" + "\n".join(body) + "\n}\n"


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


def save_model(model, path, *, inputs=()) -> Path:
    """Write a model file (``.toml``, ``.json`` or ``.npz``) safely.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    path : str or os.PathLike
        Output file; its suffix selects the format.
    inputs : iterable of paths, optional
        Files the output must not overwrite (the files the model was read from).

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
    model = as_model(model)
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name (str or os.PathLike), got {type(path).__name__}.")
    display = _display_path(path)
    suffix = _suffix(os.fsdecode(os.fspath(path)))
    if suffix not in MODEL_FILE_SUFFIXES:
        shown = f"{suffix!r}" if suffix else "no suffix"
        raise ModelFileError(display, "file", f"unknown file type ({shown}); model files end in "
                                              ".toml, .json or .npz.")
    _check_savable(model, display)
    if suffix == ".npz":
        return atomic_write(path, _npz_writer(model), inputs=inputs)
    text = _text_document(model, toml=(suffix == ".toml"))
    return atomic_write_text(path, text, inputs=inputs)


def _same_file(a: str, b: str) -> bool:
    try:
        if os.path.samefile(a, b):
            return True
    except OSError:
        pass
    return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def _new_file_mode(target: str) -> int | None:
    """Mode for the written file: the existing file's, else the default (umask applied)."""
    try:
        return stat.S_IMODE(os.stat(target).st_mode)
    except OSError:
        return None


def _checked_output(path, inputs):
    """The refusals shared by :func:`check_output_path` and :func:`atomic_write`."""
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name (str or os.PathLike), got {type(path).__name__}.")
    display = _display_path(path)
    given = os.fsdecode(os.fspath(path))
    if isinstance(inputs, (str, bytes, os.PathLike)):
        inputs = (inputs,)
    if given.endswith(("/", os.sep)):
        raise ModelFileError(display, "output", "is a folder name; give a file name.")
    target = os.path.realpath(given)
    for item in inputs:
        if item is None:
            continue
        item = os.fsdecode(os.fspath(item))
        if _same_file(target, item):
            raise ModelFileError(display, "output", f"is the same file as the input "
                                                    f"{_display_path(item)}; refusing "
                                                    "to overwrite an input, choose another name.")
    if os.path.isdir(target):
        raise ModelFileError(display, "output", "is a folder; give a file name.")
    folder = os.path.dirname(target)
    shown_folder = _display_path(os.path.dirname(given) or folder)
    if not os.path.exists(folder):
        raise ModelFileError(display, "output", f"the folder {shown_folder} does not exist; create "
                                                "it first.")
    if not os.path.isdir(folder):
        raise ModelFileError(display, "output", f"{shown_folder} is not a folder.")
    return display, target, folder, shown_folder


def check_output_path(path, *, inputs=()) -> Path:
    """Check, without writing anything, that :func:`atomic_write` would accept ``path``.

    A command can call this before a long computation so that a bad output name (an input
    file, a folder, a missing folder) is reported at once.  The folder's writability is
    only known when the temporary file is created, so :func:`atomic_write` can still refuse.

    Returns
    -------
    pathlib.Path
        The file that would be written (links resolved).

    Raises
    ------
    ModelFileError
        As :func:`atomic_write`, for every refusal made before writing.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> check_output_path(os.path.join(folder, "out.toml")).name
    'out.toml'
    """
    return Path(_checked_output(path, inputs)[1])


def atomic_write(path, writer: Callable[[Any], Any], *, inputs=()) -> Path:
    """Write a file all at once: to a temporary file in the target folder, then move it.

    Parameters
    ----------
    path : str or os.PathLike
        The output file.  A symbolic link is followed: the file it points to is replaced and
        the link stays.
    writer : callable
        ``writer(f)`` writes the contents to ``f``, a **binary** file object opened for
        writing (use :func:`atomic_write_text` for text).  Anything it raises propagates after
        the temporary file has been removed.
    inputs : iterable of paths, optional
        Files that must not be overwritten; an output resolving to the same file as one of
        them (same path after resolving links, or the same file through a hard link) is
        refused before anything is written.

    Returns
    -------
    pathlib.Path
        The file written (links resolved).

    Raises
    ------
    ModelFileError
        The output is one of ``inputs``, is a folder, its folder does not exist or is not a
        folder, or the folder is not writable.  On any failure the temporary file is removed
        and the previous contents of ``path`` (if any) are untouched.

    Notes
    -----
    The temporary file is created next to the target (``os.replace`` is atomic only within
    one file system), named ``.<name>.<random>.tmp``, with ``O_EXCL`` so that it never
    clobbers another file, and with the permissions a new file would get (the umask applies)
    or, when the target exists, the target's permissions.  Its contents are flushed to disk
    (``fsync``) before the move.  This is the usual write-then-rename practice (common
    practice).

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> out = atomic_write(os.path.join(folder, "note.txt"), lambda f: f.write(b"hello"))
    >>> out.read_bytes()
    b'hello'
    >>> sorted(os.listdir(folder))
    ['note.txt']
    """
    display, target, folder, shown_folder = _checked_output(path, inputs)
    mode = _new_file_mode(target)
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    tmp = fd = None
    for _ in range(100):
        candidate = os.path.join(folder, f".{os.path.basename(target)}.{secrets.token_hex(6)}.tmp")
        try:
            fd = os.open(candidate, flags, 0o666)  # 0o666 & ~umask, like any new file
        except FileExistsError:
            continue
        except OSError as exc:
            reason = "permission denied" if isinstance(exc, PermissionError) else exc.strerror
            raise ModelFileError(display, "output", f"cannot write in the folder {shown_folder} "
                                                    f"({reason or exc}).") from None
        tmp = candidate
        break
    if tmp is None:  # pragma: no cover - 100 random name collisions in a row
        raise ModelFileError(display, "output", "could not create a temporary file next to it.")
    try:
        with os.fdopen(fd, "wb") as f:
            writer(f)
            f.flush()
            os.fsync(f.fileno())
        if mode is not None:
            os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise ModelFileError(display, "output", f"could not be written ({exc.strerror or exc}); "
                                                    "nothing was changed.") from None
        raise
    try:  # make the rename itself durable; not available on every platform
        dir_fd = os.open(folder, os.O_RDONLY)
    except OSError:
        pass
    else:
        try:
            os.fsync(dir_fd)
        except OSError:
            pass
        finally:
            os.close(dir_fd)
    return Path(target)


def atomic_write_text(path, text: str, *, inputs=(), encoding: str = "utf-8") -> Path:
    """Write a text file through :func:`atomic_write` (UTF-8 by default, ``\\n`` line ends).

    Examples
    --------
    >>> import os, tempfile
    >>> out = atomic_write_text(os.path.join(tempfile.mkdtemp(), "r.md"), "# result\\n")
    >>> out.read_text(encoding="utf-8")
    '# result\\n'
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, got {type(text).__name__}.")
    data = text.encode(encoding)
    return atomic_write(path, lambda f: f.write(data), inputs=inputs)
