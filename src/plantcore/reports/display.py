"""How results look in a notebook and at the Python prompt: a short ``repr`` and a rich
HTML display (``_repr_html_``) for every public result object.

The result classes live in the numerical layers, which must not import a display module, so
the display is attached to them from above: :func:`install_rich_display` is called once by
``plantcore/__init__.py`` with the public classes.  A class that defines its own
``_repr_html_`` keeps it; a dataclass gets:

* ``__repr__``: the class name and its plain fields (numbers, words, flags, short tuples),
  arrays as their shape, models as their name and size, nested results by class name, and
  never more than about 300 characters (the default dataclass repr of an ``Analysis`` ran
  to many kilobytes);
* ``_repr_html_``: the same fields as a small table in the reports' style (scoped, so the
  notebook keeps its own look), followed, when the reports can render the result as text,
  by that text in a collapsed section.

JSON (``to_dict``) and the fields themselves are unchanged: this only decides what is shown.
"""

from __future__ import annotations

import dataclasses
import math
import numbers

import numpy as np

from plantcore.core.model import StateSpaceModel
from plantcore.core.rendering import render
from plantcore.core.wording import counted
from plantcore.reports.style import escape, html_fragment

__all__ = ["install_rich_display", "result_html", "short_repr"]

_MAX_REPR = 300
_MAX_TEXT = 48


def _short_value(value) -> str | None:
    """A few characters for one field, or None when the field is not worth a place."""
    if value is None or isinstance(value, (bool, np.bool_)):
        return repr(bool(value)) if value is not None else "None"
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if isinstance(value, numbers.Real):
        x = float(value)
        return f"{x:.4g}" if math.isfinite(x) else repr(x)
    if isinstance(value, numbers.Complex):
        z = complex(value)
        return f"({z.real:.4g}{z.imag:+.4g}j)"
    if isinstance(value, str):
        return repr(value if len(value) <= _MAX_TEXT else value[:_MAX_TEXT - 3] + "...")
    if isinstance(value, np.ndarray):
        return f"array({'x'.join(map(str, value.shape)) or 'scalar'})"
    if isinstance(value, StateSpaceModel):
        name = f"{value.name!r}, " if value.name else ""
        return f"<model {name}{counted(value.n, 'state')}>"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return f"{type(value).__name__}(...)"
    if isinstance(value, tuple) and hasattr(value, "_fields"):     # a named tuple
        return repr(tuple(value)) if len(value) <= 6 else f"<{len(value)} values>"
    if isinstance(value, (tuple, list)):
        if len(value) <= 4 and all(isinstance(v, (numbers.Number, str)) for v in value):
            return "(" + ", ".join(_short_value(v) for v in value) + ("," if len(value) == 1 else "") + ")"
        return f"<{len(value)} items>"
    if isinstance(value, dict):
        return f"<{len(value)} entries>"
    return None


def _fields(result):
    for f in dataclasses.fields(result):
        if f.name.startswith("_"):
            continue
        text = _short_value(getattr(result, f.name))
        if text is not None:
            yield f.name, text


def short_repr(result) -> str:
    """``ClassName(field=value, ...)``, at most about 300 characters (see the module notes)."""
    name = type(result).__name__
    parts, length = [], len(name) + 2
    for key, text in _fields(result):
        item = f"{key}={text}"
        if length + len(item) + 2 > _MAX_REPR:
            parts.append("...")
            break
        parts.append(item)
        length += len(item) + 2
    return f"{name}({', '.join(parts)})"


def result_html(result) -> str:
    """The rich display of a result: its fields as a table, then its text report (if the
    reports can render one) collapsed; an embeddable fragment (see
    :func:`plantcore.reports.style.html_fragment`)."""
    rows = "".join(f"<tr><th>{escape(k)}</th><td><code>{escape(v)}</code></td></tr>"
                   for k, v in _fields(result))
    body = (f"<h3>{escape(type(result).__name__)}</h3>"
            f'<div class="table-wrap"><table><tbody>{rows}</tbody></table></div>')
    try:
        text = render(result, "text")
    except NotImplementedError:
        text = None
    if text:
        body += f"<details><summary>Report</summary><pre>{escape(text)}</pre></details>"
    return html_fragment(body)


def install_rich_display(classes) -> None:
    """Give each dataclass in ``classes`` the short ``repr`` and the ``_repr_html_`` above
    (classes that define their own ``_repr_html_`` keep theirs; other classes are left
    alone)."""
    for cls in classes:
        if not isinstance(cls, type) or not dataclasses.is_dataclass(cls):
            continue
        if issubclass(cls, BaseException):
            continue
        cls.__repr__ = short_repr
        if "_repr_html_" not in cls.__dict__:
            cls._repr_html_ = result_html
