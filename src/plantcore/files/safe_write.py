"""Safe writing of every output file: atomic replacement, inputs never overwritten.

The data go to a temporary file in the target folder which is then moved into place with
:func:`os.replace`, so a reader never sees a half-written file and a failure leaves the
previous file (or nothing) behind.  An output that resolves to the same file as one of the
given inputs is refused.
"""

from __future__ import annotations

import os
import secrets
import stat
from pathlib import Path
from typing import Any, Callable

from plantcore.core.errors import ModelFileError
from plantcore.files.layout import _display_path

__all__ = ["check_output_path", "atomic_write", "atomic_write_text"]


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
