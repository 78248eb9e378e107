"""Candidate files: the actuators and sensors a user could add, in TOML.

Layout (both kinds may share one file; each entry gives either a full ``column`` / ``row``
with one number per state, or ``entries``, a table of state name -> gain for the states it
touches, zeros elsewhere)::

    [[actuator]]
    name = "zone 2 heater"
    column = [0.0, 0.0, 0.05, 0.0]

    [[actuator]]
    name = "zone 3 heater"
    entries = { zone3_air_temp_degC = 0.05 }

    [[sensor]]
    name = "zone 3 thermocouple"
    row = [0.0, 0.0, 0.0, 1.0]

:func:`load_candidates` returns the entries of one kind as a dict name -> list of floats,
checked against the model (number of states, state names).  Every problem is one
:class:`~plantcore.core.errors.ModelFileError` naming the file and the field, e.g.
``candidates.toml: actuator[2].column: has 3 entries but the model has 4 states; give one
number per state.``  The file is read through :mod:`plantcore.files.safe_read` (regular files
only, size cap) and never written.
"""

from __future__ import annotations

import math
import os

from plantcore.core.errors import ModelFileError
from plantcore.core.file_readers import register_reader
from plantcore.files.layout import MAX_MODEL_FILE_BYTES
from plantcore.files.safe_read import open_input, read_capped
from plantcore.files.toml_format import _parse_toml

__all__ = ["CANDIDATE_KINDS", "load_candidates"]

#: Table name in the file -> the key of its vector.
CANDIDATE_KINDS = {"actuator": "column", "sensor": "row"}


def _number(value, path, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ModelFileError(path, field, f"must be a number, got {type(value).__name__} "
                                          f"{value!r}.")
    x = float(value)
    if not math.isfinite(x):
        raise ModelFileError(path, field, f"must be a finite number, got {value!r}.")
    return x


def _vector(entry: dict, index: int, kind: str, path, n: int, states) -> list:
    where = f"{kind}[{index}]"
    key = CANDIDATE_KINDS[kind]
    has_vector, has_entries = key in entry, "entries" in entry
    if has_vector == has_entries:
        raise ModelFileError(path, where, f"give either {key} (one number per state) or "
                                          "entries (a table of state name = gain), not "
                                          f"{'both' if has_vector else 'neither'}.")
    if has_vector:
        values = entry[key]
        if not isinstance(values, list):
            raise ModelFileError(path, f"{where}.{key}", "must be a list of numbers, one per "
                                                         "state.")
        if n is not None and len(values) != n:
            raise ModelFileError(path, f"{where}.{key}",
                                 f"has {len(values)} entries but the model has {n} states; "
                                 "give one number per state.")
        vector = [_number(v, path, f"{where}.{key}[{i}]") for i, v in enumerate(values)]
    else:
        table = entry["entries"]
        if not isinstance(table, dict) or not table:
            raise ModelFileError(path, f"{where}.entries", "must be a non-empty table of state "
                                                          "name = gain.")
        if states is None:
            raise ModelFileError(path, f"{where}.entries", "needs the model's state names.")
        position = {s: i for i, s in enumerate(states)}
        vector = [0.0] * len(states)
        for state, value in table.items():
            if state not in position:
                raise ModelFileError(path, f"{where}.entries.{state}",
                                     "is not a state of the model (state names are compared "
                                     "as written).")
            vector[position[state]] = _number(value, path, f"{where}.entries.{state}")
    if not any(vector):
        raise ModelFileError(path, where, "is all zeros: it would move (or see) nothing; give "
                                          "at least one nonzero gain.")
    return vector


def load_candidates(path, kind: str = "actuator", *, n_states=None, states=None) -> dict:
    """The candidates of one kind from a TOML candidate file (see the module notes).

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    kind : {"actuator", "sensor"}
        Which tables to read (``[[actuator]]`` or ``[[sensor]]``).
    n_states : int, optional
        The model's number of states: every ``column`` / ``row`` must have that many entries.
    states : sequence of str, optional
        The model's state names, for ``entries`` tables.

    Returns
    -------
    dict
        Name -> list of floats, in the order of the file.

    Raises
    ------
    ModelFileError
        One line naming the file and the field: missing or unreadable file, TOML syntax,
        unknown keys, a missing or repeated name, a wrong length, a value that is not a
        finite number, an all-zero vector, an unknown state name, no entry of ``kind``.
    """
    if kind not in CANDIDATE_KINDS:
        raise ValueError(f"kind must be 'actuator' or 'sensor', got {kind!r}.")
    if states is not None:
        states = tuple(states)
        n_states = len(states) if n_states is None else n_states
    display = os.fsdecode(os.fspath(path))
    with open_input(path, display, "a candidate file", limit=MAX_MODEL_FILE_BYTES) as handle:
        data = read_capped(handle, display, "a candidate file", limit=MAX_MODEL_FILE_BYTES)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ModelFileError(display, "file", "is not UTF-8 text; a candidate file is TOML.") \
            from None
    doc = _parse_toml(text, display)
    unknown = sorted(set(doc) - set(CANDIDATE_KINDS))
    if unknown:
        raise ModelFileError(display, unknown[0], "is not a candidate-file key; use "
                                                  "[[actuator]] and [[sensor]] tables.")
    entries = doc.get(kind)
    if entries is None:
        raise ModelFileError(display, kind, f"the file has no [[{kind}]] tables.")
    if not isinstance(entries, list) or not entries \
            or not all(isinstance(e, dict) for e in entries):
        raise ModelFileError(display, kind, f"must be an array of tables, written [[{kind}]].")
    allowed = {"name", CANDIDATE_KINDS[kind], "entries"}
    found: dict = {}
    for index, entry in enumerate(entries, start=1):
        extra = sorted(set(entry) - allowed)
        if extra:
            raise ModelFileError(display, f"{kind}[{index}].{extra[0]}",
                                 f"is not a key of a {kind}; use "
                                 f"{', '.join(sorted(allowed))}.")
        name = entry.get("name")
        if not isinstance(name, str) or not name.strip():
            raise ModelFileError(display, f"{kind}[{index}].name", "must be a non-empty text.")
        if name in found:
            raise ModelFileError(display, f"{kind}[{index}].name",
                                 f"{name!r} is used twice; give each {kind} its own name.")
        found[name] = _vector(entry, index, kind, display, n_states, states)
    return found


register_reader("candidates", load_candidates)
