"""Safe writing of every output file: atomic replacement, inputs never overwritten.

The data go to a temporary file in the target folder which is then moved into place with
:func:`os.replace`, so a reader never sees a half-written file and a failure leaves the
previous file (or nothing) behind.  The rules, checked before anything is written (and by
:func:`check_output_path` before a long computation starts):

* an output that resolves to the same file as one of the given inputs is refused;
* with ``overwrite=False`` an existing file is refused (and a file created by someone else
  while we write is not replaced either: the result is linked into place, which fails when
  the name is taken); the command line decides when to pass it;
* an existing **read-only** file is refused, never silently replaced;
* a **character device or named pipe** (``/dev/null``, a FIFO read by another program) is
  written into directly, never renamed over; a pipe that nobody reads is refused instead of
  blocking, and a block device or socket is refused;
* the temporary file is removed on every failure, on Ctrl-C (``KeyboardInterrupt``) and on
  ``SIGTERM`` (see :func:`cleanup_on_terminate`); a temporary left by a process that was
  killed outright (``SIGKILL``, power loss) carries that process's id in its name and is
  removed by the next write of the same file once that process is gone, so it can never be
  mistaken for a result (its name is hidden and ends in ``.tmp``, not the result's suffix).
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
import signal
import stat
import threading
from collections.abc import Callable
from pathlib import Path
from typing import Any

from plantcore.core.errors import ModelFileError
from plantcore.files.layout import _display_path

__all__ = ["atomic_write", "atomic_write_text", "check_output_path", "cleanup_on_terminate"]

_TEMPORARY_SUFFIX = ".tmp"


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


def _checked_output(path, inputs, overwrite: bool = True):
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
    try:
        info = os.stat(target)
    except OSError:
        info = None
    if info is not None:
        _check_existing(display, target, info, overwrite)
    return display, target, folder, shown_folder


def _is_stream(info: os.stat_result | None) -> bool:
    """A target written into directly: a character device (``/dev/null``) or a named pipe."""
    return info is not None and (stat.S_ISCHR(info.st_mode) or stat.S_ISFIFO(info.st_mode))


def _check_existing(display, target: str, info: os.stat_result, overwrite: bool) -> None:
    if _is_stream(info):
        return
    if not stat.S_ISREG(info.st_mode):
        kind = "a block device" if stat.S_ISBLK(info.st_mode) else (
            "a socket" if stat.S_ISSOCK(info.st_mode) else "not a regular file")
        raise ModelFileError(display, "output", f"is {kind}; plantcore writes regular files, "
                                                "character devices (such as /dev/null) and named "
                                                "pipes only.")
    if not overwrite:
        raise ModelFileError(display, "output", "already exists; refusing to replace it (choose "
                                                "another name, or allow overwriting).")
    if not (info.st_mode & 0o222) or not os.access(target, os.W_OK):
        raise ModelFileError(display, "output", "is read-only; plantcore does not replace a "
                                                "read-only file (make it writable or choose "
                                                "another name).")


def check_output_path(path, *, inputs=(), overwrite: bool = True) -> Path:
    """Check, without writing anything, that :func:`atomic_write` would accept ``path``.

    A command can call this before a long computation so that a bad output name (an input
    file, a folder, a missing folder, a read-only file, an existing file with
    ``overwrite=False``, a block device) is reported at once.  The folder's writability is
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
    return Path(_checked_output(path, inputs, overwrite)[1])


def atomic_write(path, writer: Callable[[Any], Any], *, inputs=(), overwrite: bool = True) -> Path:
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
    overwrite : bool, default True
        When False, an existing file at ``path`` is refused before anything is written, and
        the result is linked into place so that a file created meanwhile is not replaced
        either.  A character device or a named pipe is written into whatever the value.

    Returns
    -------
    pathlib.Path
        The file written (links resolved).

    Raises
    ------
    ModelFileError
        The output is one of ``inputs``, is a folder, its folder does not exist or is not a
        folder, or the folder is not writable; it is an existing read-only file, an existing
        file with ``overwrite=False``, a block device or socket, or a named pipe that nobody
        reads.  On any failure the temporary file is removed and the previous contents of
        ``path`` (if any) are untouched.

    Notes
    -----
    The temporary file is created next to the target (``os.replace`` is atomic only within
    one file system), named ``.<name>.<process id>-<random>.tmp``, with ``O_EXCL`` so that it
    never clobbers another file, and with the permissions a new file would get (the umask
    applies) or, when the target exists, the target's permissions.  Its contents are flushed
    to disk (``fsync``) before the move.  This is the usual write-then-rename practice (common
    practice).  While it exists, ``SIGTERM`` is turned into ``SystemExit(143)`` in the main
    thread (:func:`cleanup_on_terminate`) so that it is removed as on Ctrl-C.  Temporaries of
    the same target left by processes that no longer run (on this machine) are removed first.

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
    display, target, folder, shown_folder = _checked_output(path, inputs, overwrite)
    try:
        existing = os.stat(target)
    except OSError:
        existing = None
    if _is_stream(existing):
        return _write_into_stream(display, target, writer)
    mode = _new_file_mode(target)
    _remove_stale_temporaries(folder, os.path.basename(target))
    with cleanup_on_terminate():
        tmp, fd = _create_temporary(display, target, folder, shown_folder)
        try:
            with os.fdopen(fd, "wb") as f:
                writer(f)
                f.flush()
                os.fsync(f.fileno())
            if mode is not None:
                os.chmod(tmp, mode)
            _move_into_place(display, tmp, target, overwrite)
        except BaseException as exc:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            if isinstance(exc, OSError):
                raise ModelFileError(display, "output", f"could not be written "
                                                        f"({exc.strerror or exc}); nothing was "
                                                        "changed.") from None
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


def _create_temporary(display, target: str, folder: str, shown_folder: str):
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    for _ in range(100):
        candidate = os.path.join(folder, f".{os.path.basename(target)}.{os.getpid()}-"
                                         f"{secrets.token_hex(6)}{_TEMPORARY_SUFFIX}")
        try:
            return candidate, os.open(candidate, flags, 0o666)  # 0o666 & ~umask, like any new file
        except FileExistsError:
            continue
        except OSError as exc:
            reason = "permission denied" if isinstance(exc, PermissionError) else exc.strerror
            raise ModelFileError(display, "output", f"cannot write in the folder {shown_folder} "
                                                    f"({reason or exc}).") from None
    # pragma: no cover - 100 random name collisions in a row
    raise ModelFileError(display, "output", "could not create a temporary file next to it.")


def _move_into_place(display, tmp: str, target: str, overwrite: bool) -> None:
    if overwrite:
        os.replace(tmp, target)
        return
    try:  # a hard link never replaces a name that exists: no window for a race
        os.link(tmp, target)
    except FileExistsError:
        raise ModelFileError(display, "output", "already exists (it appeared while the result "
                                                "was written); refusing to replace it.") from None
    except OSError:  # a file system without hard links: check, then move
        if os.path.lexists(target):
            raise ModelFileError(display, "output", "already exists; refusing to replace "
                                                    "it.") from None
        os.replace(tmp, target)
        return
    os.unlink(tmp)


def _write_into_stream(display, target: str, writer) -> Path:
    """Write into a character device or named pipe as it is: no temporary, no rename."""
    flags = os.O_WRONLY | getattr(os, "O_BINARY", 0) | getattr(os, "O_NONBLOCK", 0) \
        | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(target, flags)
    except OSError as exc:
        if exc.errno == errno.ENXIO:
            raise ModelFileError(display, "output", "is a named pipe that nobody reads; start "
                                                    "the reader first.") from None
        raise ModelFileError(display, "output", f"cannot be written ({exc.strerror or exc})."
                             ) from None
    try:
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
        with os.fdopen(fd, "wb") as f:
            fd = None
            writer(f)
            f.flush()
    except OSError as exc:
        raise ModelFileError(display, "output", f"could not be written ({exc.strerror or exc})."
                             ) from None
    finally:
        if fd is not None:
            os.close(fd)
    return Path(target)


def _remove_stale_temporaries(folder: str, name: str) -> None:
    """Remove ``.<name>.<pid>-<random>.tmp`` files whose writing process no longer runs.

    Only on POSIX, where ``os.kill(pid, 0)`` asks whether a process exists without touching
    it; a temporary of a running process (a concurrent writer) is left alone.
    """
    if os.name != "posix":
        return
    prefix = f".{name}."
    try:
        entries = [entry.name for entry in os.scandir(folder)
                   if entry.name.startswith(prefix) and entry.name.endswith(_TEMPORARY_SUFFIX)]
    except OSError:
        return
    for entry in entries:
        middle = entry[len(prefix):-len(_TEMPORARY_SUFFIX)]
        pid_text, _, token = middle.partition("-")
        if not (pid_text.isdigit() and len(token) == 12):
            continue
        pid = int(pid_text)
        if pid == os.getpid() or _process_exists(pid):
            continue
        with contextlib.suppress(OSError):
            os.unlink(os.path.join(folder, entry))


def _process_exists(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True  # exists but belongs to someone else, or cannot be asked: keep the file
    return True


@contextlib.contextmanager
def cleanup_on_terminate():
    """While the block runs, turn ``SIGTERM`` into ``SystemExit(128 + SIGTERM)``.

    ``SIGTERM`` (what ``kill`` and most process managers send) would otherwise end the process
    at once, leaving temporary files and partial folders behind; as an exception it unwinds
    through every ``try``/``finally``, which removes them as Ctrl-C does, and the process still
    exits with the conventional status 143.  Nothing changes outside the main thread (where
    Python cannot set signal handlers) or when another handler than the default is installed
    (the program has its own policy).  The previous handler is restored afterwards.

    Examples
    --------
    >>> import signal
    >>> with cleanup_on_terminate():
    ...     pass
    >>> signal.getsignal(signal.SIGTERM) is signal.SIG_DFL
    True
    """
    sigterm = getattr(signal, "SIGTERM", None)
    if (sigterm is None or threading.current_thread() is not threading.main_thread()
            or signal.getsignal(sigterm) is not signal.SIG_DFL):
        yield
        return

    def _terminate(signum, frame):
        raise SystemExit(128 + signum)

    signal.signal(sigterm, _terminate)
    try:
        yield
    finally:
        signal.signal(sigterm, signal.SIG_DFL)


def atomic_write_text(path, text: str, *, inputs=(), encoding: str = "utf-8",
                      overwrite: bool = True) -> Path:
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
    return atomic_write(path, lambda f: f.write(data), inputs=inputs, overwrite=overwrite)
