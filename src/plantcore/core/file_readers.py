"""How numerical entry points read user files without importing the files layer.

A few public functions of the structure layer accept, beside Python data, the path of a file
(:func:`plantcore.suggest_actuators` takes a candidate file).  The readers of those files
live in :mod:`plantcore.files`, a layer the structure layer may not import; so the files
layer registers its readers here when it is imported (``import plantcore`` imports it) and
the numerical function asks this registry.  The same plug-in pattern as
:mod:`plantcore.core.rendering` (a registry keyed by what is read; common practice).
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["read_file", "register_reader"]

_READERS: dict[str, Callable] = {}


def register_reader(what: str, reader: Callable) -> None:
    """Make ``reader(path, **options)`` the reader of files holding ``what``."""
    _READERS[what] = reader


def read_file(what: str, path, **options):
    """Read ``path`` with the reader registered for ``what``.

    Raises
    ------
    NotImplementedError
        When no reader is registered (``import plantcore`` registers them).
    """
    reader = _READERS.get(what)
    if reader is None:
        raise NotImplementedError(f"no reader is registered for {what} files; import plantcore "
                                  "(which loads its file readers) first.")
    return reader(path, **options)
