"""Packaged example models (scenarios of our own invention).

The model files live inside the installed package and are found with
:mod:`importlib.resources`, so they work from a wheel as well as from a source checkout.

>>> import plantcore as pc
>>> "thermal_process" in pc.list_examples()
True
>>> pc.load_example("thermal_process").n
11
"""

from __future__ import annotations

import contextlib
import importlib.resources as _resources
import os

__all__ = ["list_examples", "example_path", "load_example", "EXAMPLE_SUFFIXES"]

#: Suffixes of the files that count as example models.
EXAMPLE_SUFFIXES = (".toml", ".json", ".npz")

# Files kept alive for the life of the process when the package is imported from a zip file
# (importlib.resources then extracts them to temporary files).
_EXIT_STACK = contextlib.ExitStack()


def _is_model_file(entry, suffix: str) -> bool:
    """True for a model file (not, say, a sweep specification that shares the suffix).

    Looks at the top-level keys only (the full checks are :func:`plantcore.load_model`'s):
    a model file has ``A`` and nothing outside the model-file layout.
    """
    from plantcore.files import MODEL_FILE_KEYS

    try:
        if suffix == ".npz":
            import zipfile

            with entry.open("rb") as f, zipfile.ZipFile(f) as zf:
                keys = {os.path.splitext(n)[0] for n in zf.namelist()}
        else:
            text = entry.read_text(encoding="utf-8-sig")
            if suffix == ".toml":
                try:
                    import tomllib
                except ImportError:  # pragma: no cover - Python 3.10
                    import tomli as tomllib
                doc = tomllib.loads(text)
            else:
                import json

                doc = json.loads(text)
            if not isinstance(doc, dict):
                return False
            keys = set(doc)
    except Exception:  # unreadable: not an example model
        return False
    return "A" in keys and keys <= set(MODEL_FILE_KEYS)


def _entries():
    root = _resources.files(__name__)
    found = {}
    for entry in root.iterdir():
        name = entry.name
        stem, suffix = os.path.splitext(name)
        suffix = suffix.lower()
        if (suffix in EXAMPLE_SUFFIXES and not name.startswith((".", "_"))
                and stem not in found and _is_model_file(entry, suffix)):
            found[stem] = entry
    return found


def list_examples() -> list:
    """Names (file stems, sorted) of the packaged example models.

    Only model files count; other data packaged alongside (sweep specifications, for
    instance) are left out.

    Returns
    -------
    list of str
    """
    return sorted(_entries())


def example_path(name: str) -> str:
    """The file path of a packaged example model.

    Parameters
    ----------
    name : str
        The example's name (see :func:`list_examples`); a file name with its suffix is
        accepted too.

    Returns
    -------
    str
        A path that :func:`plantcore.load_model` can read.

    Raises
    ------
    ValueError
        When there is no example of that name; the message lists the names available.
    """
    if not isinstance(name, str):
        raise ValueError(f"the example name must be a string, got {type(name).__name__}.")
    entries = _entries()
    stem = os.path.splitext(name)[0] if name.lower().endswith(EXAMPLE_SUFFIXES) else name
    if stem not in entries:
        raise ValueError(f"there is no packaged example called {name!r}; choose one of "
                         f"{', '.join(sorted(entries)) or '(none)'}.")
    path = _EXIT_STACK.enter_context(_resources.as_file(entries[stem]))
    return os.fspath(path)


def load_example(name: str):
    """Load a packaged example model.

    Parameters
    ----------
    name : str
        The example's name (see :func:`list_examples`).

    Returns
    -------
    StateSpaceModel
    """
    from plantcore.files import load_model

    return load_model(example_path(name))
