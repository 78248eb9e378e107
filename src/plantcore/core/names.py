"""The one check every name in plantcore goes through: printable text, compared as written.

State, input and output names of a :class:`~plantcore.core.model.StateSpaceModel`, the names
in model files, sweep specifications (parameters, constants, states, inputs, outputs) and
audit archives (state names) all pass :func:`name_problem` and :func:`collision_problem`.

Two rules:

* **No invisible or steering characters.**  Control characters (category ``Cc``), format
  characters (``Cf``: zero-width spaces and joiners, bidirectional embeddings, overrides and
  isolates, the soft hyphen, the byte-order mark), unpaired surrogates (``Cs``) and line or
  paragraph separators (``Zl``, ``Zp``) are refused.  They make two different names print
  alike, reorder the text around them in a report, or break a one-line message.
* **Names are compared as written, and names that Unicode treats as the same are refused.**
  Two names of one list that differ as written but agree after compatibility normalization
  (NFKC: a fullwidth ``ｐｉ`` and ``pi``, the micro sign ``µ`` and the Greek ``μ``), or a
  name whose NFKC form is a reserved word of its context (for sweeps: ``pi``, the functions
  of expressions), would be confused by a reader and, in expressions, by Python itself,
  which normalizes identifiers.  The message shows both names with the code points of the
  characters that differ.

Every problem comes back as a sentence (or ``None``) so that each caller raises its own
error type with its own file and field: a ``ValueError`` for the model object, a
:class:`~plantcore.core.errors.ModelFileError` for files.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable

__all__ = ["REFUSED_CATEGORIES", "collision_problem", "list_problem", "lookalike_note",
           "name_problem", "spelled_out"]

#: Unicode general categories refused anywhere in a name, with what they are called in messages.
REFUSED_CATEGORIES = {
    "Cc": "a control character",
    "Cf": "an invisible format character (zero-width, bidirectional or similar)",
    "Cs": "an unpaired surrogate",
    "Zl": "a line separator",
    "Zp": "a paragraph separator",
}


def _character_name(ch: str) -> str:
    return f"U+{ord(ch):04X} {unicodedata.name(ch, '(unnamed)')}"


def spelled_out(text: str) -> str:
    """The text in quotes followed by the code points of its characters outside ASCII.

    >>> spelled_out("\\u00b5_gain")
    "'µ_gain' (U+00B5 MICRO SIGN)"
    >>> spelled_out("mass")
    "'mass'"
    """
    special = []
    for ch in text:
        if ord(ch) > 0x7E and ch not in special:
            special.append(ch)
    shown = repr(text)
    if not special:
        return shown
    return f"{shown} ({', '.join(_character_name(ch) for ch in special[:4])}" + (
        ", ..." if len(special) > 4 else "") + ")"


def name_problem(text: str, *, allow_empty: bool = False) -> str | None:
    """What is wrong with one name, as a sentence fragment, or None when it is acceptable.

    Parameters
    ----------
    text : str
        The name.
    allow_empty : bool
        Accept the empty string (a model's optional label may be empty).

    Examples
    --------
    >>> name_problem("zone 1") is None
    True
    >>> name_problem("zone\\u202e1")
    'contains an invisible format character (zero-width, bidirectional or similar) (U+202E RIGHT-TO-LEFT OVERRIDE)'
    """
    if not isinstance(text, str):
        return f"is a {type(text).__name__}, not text"
    if not text and not allow_empty:
        return "is an empty string; give every name some text"
    for ch in text:
        kind = unicodedata.category(ch)
        if kind in REFUSED_CATEGORIES:
            return f"contains {REFUSED_CATEGORIES[kind]} ({_character_name(ch)})"
    return None


def _normal(text: str) -> str:
    return unicodedata.normalize("NFKC", text)


def collision_problem(names: Iterable[str], reserved: Iterable[str] = (), *,
                      reserved_label: str = "a reserved name") -> str | None:
    """A sentence naming two names that differ as written but are the same after NFKC.

    Parameters
    ----------
    names : iterable of str
        One list of names (exact duplicates are the caller's own check).
    reserved : iterable of str
        Names of the context a name must not turn into (e.g. the constant ``pi``).
    reserved_label : str
        What the reserved names are, for the message.

    Returns
    -------
    str or None

    Examples
    --------
    >>> print(collision_problem(["\\u00b5", "\\u03bc"]))
    'µ' (U+00B5 MICRO SIGN) and 'μ' (U+03BC GREEK SMALL LETTER MU) are different names that Unicode treats as the same (NFKC normalization); rename one of them
    >>> print(collision_problem(["\\uff50\\uff49"], ["pi"], reserved_label="a built-in constant"))
    'ｐｉ' (U+FF50 FULLWIDTH LATIN SMALL LETTER P, U+FF49 FULLWIDTH LATIN SMALL LETTER I) is read as 'pi', a built-in constant (NFKC normalization); choose another name
    """
    reserved = {_normal(word): word for word in reserved}
    seen: dict[str, str] = {}
    for name in names:
        key = _normal(name)
        if key in reserved and name != reserved[key]:
            return (f"{spelled_out(name)} is read as {reserved[key]!r}, {reserved_label} "
                    "(NFKC normalization); choose another name")
        other = seen.get(key)
        if other is not None and other != name:
            return (f"{spelled_out(other)} and {spelled_out(name)} are different names that "
                    "Unicode treats as the same (NFKC normalization); rename one of them")
        seen.setdefault(key, name)
    return None


def list_problem(names: Iterable[str]) -> str | None:
    """The first problem of a list of names (characters, then NFKC collisions), or None.

    Exact duplicates are left to the caller, whose message names its own field.

    >>> print(list_problem(["speed", "gain\u200b"]))
    the name 'gain\u200b' contains an invisible format character (zero-width, bidirectional or similar) (U+200B ZERO WIDTH SPACE); names must be printable text on one line
    """
    names = list(names)
    for item in names:
        problem = name_problem(item)
        if problem:
            return f"the name {item!r} {problem}; names must be printable text on one line"
    return collision_problem(names)


def lookalike_note(name: str, candidates: Iterable[str]) -> str:
    """For an unknown name: a hint naming a candidate that differs from it only under NFKC.

    Returns an empty string when no candidate looks alike.

    >>> lookalike_note("\\u00b5", ["\\u03bc", "mass"])
    " (not the declared 'μ' (U+03BC GREEK SMALL LETTER MU): names are compared as written)"
    """
    key = _normal(name)
    for candidate in candidates:
        if candidate != name and _normal(candidate) == key:
            return (f" (not the declared {spelled_out(candidate)}: names are compared as "
                    "written)")
    return ""
