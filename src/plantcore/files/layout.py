"""The model-file layout shared by the three formats: keys, limits, checks and messages.

The rules of :mod:`plantcore.files.model_files` are applied here: which keys a file may hold,
that every matrix entry is a finite real number, that names are printable and unique, and
how the fields become a :class:`~plantcore.core.model.StateSpaceModel`.  Every problem raises
:class:`~plantcore.core.errors.ModelFileError` naming the file, the field and the problem.
The text helpers that both text formats write with (matrix rows, floats as shortest
round-trip text) live here too.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import re
from typing import Any, Iterable

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel
from plantcore.core.names import collision_problem, name_problem

__all__ = ["MAX_MODEL_FILE_BYTES", "MODEL_FILE_KEYS", "MODEL_FILE_SUFFIXES"]


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
    """Refuse names that would be unreadable, not UTF-8, or break a one-line message.

    The rule is :func:`plantcore.core.names.name_problem`, shared with the model object and
    the sweep and audit files.
    """
    problem = name_problem(text, allow_empty=allow_empty)
    if problem:
        raise ModelFileError(path, field, f"{where} {problem}; names must be printable text on "
                                          "one line.")


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


def _syntax_location(message: str) -> str | None:
    found = re.search(r"line (\d+)", message)
    return f"line {found.group(1)}" if found else None


def _value_error_text(exc: ValueError) -> str:
    text = " ".join(str(exc).split())
    if "integer string conversion" in text:
        return "a number has more digits than Python converts (more than about 4300)"
    return text


def _decode_text(data: bytes, path) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        offset = exc.start + (3 if data.startswith(b"\xef\xbb\xbf") else 0)
        line = data[:offset].count(b"\n") + 1
        raise ModelFileError(path, f"line {line}",
                             f"not valid UTF-8 text (byte 0x{data[offset]:02x} at offset {offset}); "
                             "save the file with UTF-8 encoding.") from None


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
        clash = collision_problem(items)
        if clash:
            raise ModelFileError(path, key, clash + ".")
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
