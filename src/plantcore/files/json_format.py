"""JSON model files: parsing and writing (the same keys as the TOML layout).

The parser refuses what the standard :mod:`json` module would accept silently: the
non-standard literals ``NaN``, ``Infinity`` and ``-Infinity``, and a key given twice in one
object.
"""

from __future__ import annotations

import json
from typing import Any

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel
from plantcore.files.layout import (
    _MATRIX_KEYS,
    _NAME_KEYS,
    _DuplicateKey,
    _float_text,
    _key_text,
    _matrix_lines,
    _NonFiniteLiteral,
    _value_error_text,
)


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


def _json_document(model: StateSpaceModel) -> str:
    """The model as a JSON document (the same keys as the TOML layout)."""
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
