"""TOML model files: parsing (with :mod:`tomllib`, ``tomli`` before Python 3.11) and writing.

The layout and its checks are in :mod:`plantcore.files.layout`; this module only turns
TOML text into a document and a model into TOML text.
"""

from __future__ import annotations

import sys
from typing import Any

from plantcore.core.errors import ModelFileError
from plantcore.core.model import StateSpaceModel

if sys.version_info >= (3, 11):  # pragma: no cover - depends on the interpreter
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib
from plantcore.files.layout import (
    _MATRIX_KEYS,
    _NAME_KEYS,
    _float_text,
    _matrix_lines,
    _syntax_location,
    _value_error_text,
)


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


def _toml_document(model: StateSpaceModel) -> str:
    """The model as a TOML document (the layout of :mod:`plantcore.files.model_files`)."""
    lines = ["# plantcore state-space model (see plantcore.files.model_files for the layout)"]
    if model.name is not None:
        lines.append(f"name = {_toml_string(model.name)}")
    if model.dt is not None:
        lines.append(f"sample_time = {_float_text(model.dt)}")
    for key in _NAME_KEYS:
        lines.append(f"{key} = [" + ", ".join(_toml_string(s) for s in getattr(model, key)) + "]")
    for key in _MATRIX_KEYS:
        lines.extend(_matrix_lines(key, getattr(model, key), toml=True))
    return "\n".join(lines) + "\n"
