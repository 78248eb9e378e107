"""Output folders written whole: the policy of ``plantcore demo`` and ``plantcore sweep``.

A command that writes a folder of results follows the rule of the commands that write one
file: an existing output is kept unless the caller allows replacing it (``--force``).  For a
folder the rule is stricter, because a folder may hold things the command did not write:

* a folder that does not exist, or is empty, is always accepted;
* without ``force`` a non-empty folder is refused;
* with ``force`` a non-empty folder is **replaced whole**, but only when every entry in it is
  a regular file whose name is one the command writes (``own_names``); anything else (another
  file, a subfolder, a symbolic link) is refused, naming the first such entry, and so is a
  folder that holds one of the run's input files.

:func:`check_output_folder_policy` makes these checks; a command calls it before computing
anything, so a bad setting costs nothing.  :func:`write_output_folder` makes them again just
before the swap and writes the folder so that it is never seen half-written and the previous
output is never lost:

1. ``fill(staging)`` writes the new files into a hidden folder next to the target,
   ``.<name>.partial-<random>``;
2. with ``force``, the old folder is renamed to a hidden backup ``.<name>.previous-<random>``
   (and checked once more there, so that nothing that appeared meanwhile is deleted);
3. the staging folder is renamed to the target; if that fails the backup is renamed back;
4. the backup is removed.

The staging and backup folders are removed on any failure, on Ctrl-C and on ``SIGTERM``
(:func:`plantcore.files.safe_write.cleanup_on_terminate`), and the old folder is put back
whenever the new one is not in place.  Renames within one parent folder stay on one file
system, so each step is atomic; only a process killed outright (``SIGKILL``, power loss)
between steps 2 and 3 can leave the old output under its hidden backup name.
"""

from __future__ import annotations

import os
import secrets
import shutil
import stat
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any

from plantcore.files.layout import _display_path
from plantcore.files.safe_write import cleanup_on_terminate

__all__ = ["check_output_folder_policy", "write_output_folder"]

_FORCE = "--force"


def _operated_path(shown: str, given: str) -> Path:
    """The folder the renames act on: absolute, links resolved (``-o .`` has a name and a
    parent; a link to a folder replaces the folder it points to and the link stays)."""
    if os.path.islink(given) and not os.path.exists(given):
        raise ValueError(f"{shown}: is a symbolic link to nothing; give a folder name.")
    return Path(os.path.realpath(given))


def _entry_problem(folder: Path, own_names: frozenset) -> str | None:
    """The first entry (by name) that ``force`` may not replace, described; else None."""
    with os.scandir(folder) as entries:
        found = sorted(entries, key=lambda entry: entry.name)
    for entry in found:
        mode = entry.stat(follow_symlinks=False).st_mode
        if stat.S_ISLNK(mode):
            return f"the symbolic link {entry.name!r}"
        if stat.S_ISDIR(mode):
            return f"the folder {entry.name!r}"
        if not stat.S_ISREG(mode):
            return f"{entry.name!r}, which is not a regular file"
        if entry.name not in own_names:
            return f"the file {entry.name!r}"
    return None


def _input_inside(folder: Path, inputs: Iterable) -> str | None:
    """The first input file that lies inside ``folder`` (links resolved), else None."""
    for item in inputs:
        if item is None:
            continue
        real = os.path.realpath(os.fsdecode(os.fspath(item)))
        try:
            inside = os.path.commonpath([real, os.fspath(folder)]) == os.fspath(folder)
        except ValueError:  # different drives
            inside = False
        if inside:
            return _display_path(item)
    return None


def check_output_folder_policy(folder, own_names: Iterable[str], *, force: bool = False,
                               inputs: Iterable = (), owner: str = "this command",
                               make_parents: bool = False) -> Path:
    """Refuse an output folder that the folder policy does not allow; nothing is changed.

    Parameters
    ----------
    folder : str or os.PathLike
        The output folder.
    own_names : iterable of str
        Every file name the command can write into the folder.
    force : bool, default False
        False: the folder must not exist or be empty.  True: it may also hold files of the
        command's own (names in ``own_names``, regular files only); it will be replaced whole.
    inputs : iterable of paths, optional
        Input files of the run; a folder holding one of them is never replaced.
    owner : str, optional
        How the messages name the command ("the demo", "a sweep").
    make_parents : bool, default False
        Whether missing parent folders will be created; when False they must exist.

    Returns
    -------
    pathlib.Path
        The folder as given.

    Raises
    ------
    ValueError
        One line naming the folder and what is wrong: it is a file, its parent folder does not
        exist, it is not empty (without ``force``), or (with ``force``) it holds an input file
        or an entry other than a file of the command's own, named in the message.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = os.path.join(tempfile.mkdtemp(), "out")
    >>> os.mkdir(folder)
    >>> with open(os.path.join(folder, "table.csv"), "w") as f:
    ...     _ = f.write("a\\n1\\n")
    >>> check_output_folder_policy(folder, {"table.csv"}, force=True).name
    'out'
    """
    given = os.fsdecode(os.fspath(folder))
    shown = _display_path(given)
    target = _operated_path(shown, given)
    if not target.exists():
        if not make_parents and not target.parent.is_dir():
            raise ValueError(f"{shown}: the folder {_display_path(os.path.dirname(given) or '.')}"
                             " does not exist; create it first.")
        return Path(given)
    if not target.is_dir():
        raise ValueError(f"{shown}: exists and is not a folder; give a folder name for "
                         f"{owner}'s output.")
    if not any(target.iterdir()):
        return Path(given)
    if not force:
        raise ValueError(f"{shown}: the folder exists and is not empty; {owner} keeps an "
                         f"existing folder (give {_FORCE} to replace one that holds only "
                         f"{owner}'s earlier output, or choose a new or empty folder).")
    held = _input_inside(target, inputs)
    if held is not None:
        raise ValueError(f"{shown}: the folder holds the input {held}; {_FORCE} never replaces "
                         "a folder holding an input file, so choose another folder.")
    problem = _entry_problem(target, frozenset(own_names))
    if problem is not None:
        raise ValueError(_refusal(shown, problem, owner))
    return Path(given)


def _refusal(shown: str, problem: str, owner: str) -> str:
    return (f"{shown}: the folder holds {problem}, which {owner} does not write; {_FORCE} only "
            f"replaces a folder holding {owner}'s own output, so nothing was changed.")


def _hidden_sibling(target: Path, kind: str) -> Path:
    return target.parent / f".{target.name}.{kind}-{secrets.token_hex(4)}"


def write_output_folder(folder, fill: Callable[[Path], Any], own_names: Iterable[str], *,
                        force: bool = False, inputs: Iterable = (), owner: str = "this command",
                        make_parents: bool = False) -> Any:
    """Write a folder whole: ``fill`` writes into a hidden staging folder, which is then moved.

    Parameters
    ----------
    folder : str or os.PathLike
        The output folder, checked by :func:`check_output_folder_policy` (with the same
        ``own_names``, ``force``, ``inputs``, ``owner`` and ``make_parents``) first and again
        just before it is replaced.
    fill : callable
        ``fill(staging)`` writes every file into ``staging`` (a :class:`pathlib.Path` to an
        empty folder next to the target) and returns anything; only names in ``own_names``
        may be written.
    own_names, force, inputs, owner, make_parents
        As for :func:`check_output_folder_policy`.

    Returns
    -------
    object
        What ``fill`` returned.

    Raises
    ------
    ValueError
        A refusal of :func:`check_output_folder_policy`, made before ``fill`` runs or (when the
        folder changed meanwhile) after it; nothing is changed.  Whatever ``fill`` or a rename
        raises propagates after the staging and backup folders are removed and the previous
        folder, if any, is back in place.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = os.path.join(tempfile.mkdtemp(), "out")
    >>> def fill(staging):
    ...     (staging / "a.txt").write_text("new")
    >>> write_output_folder(folder, fill, {"a.txt"})
    >>> write_output_folder(folder, fill, {"a.txt"}, force=True)
    >>> sorted(os.listdir(folder)), sorted(os.listdir(os.path.dirname(folder)))
    (['a.txt'], ['out'])
    """
    own_names = frozenset(own_names)
    inputs = tuple(inputs)

    def check():
        return check_output_folder_policy(folder, own_names, force=force, inputs=inputs,
                                          owner=owner, make_parents=make_parents)

    check()
    shown = _display_path(folder)
    target = _operated_path(shown, os.fsdecode(os.fspath(folder)))
    if make_parents:
        target.parent.mkdir(parents=True, exist_ok=True)
    with cleanup_on_terminate():
        staging = _hidden_sibling(target, "partial")
        backup = None
        staging.mkdir()
        try:
            value = fill(staging)
            check()                # the folder may have changed while fill ran
            if target.is_dir() and any(target.iterdir()):
                backup = _hidden_sibling(target, "previous")
                os.rename(target, backup)
                problem = _entry_problem(backup, own_names)  # appeared since check()?
                if problem is not None:
                    os.rename(backup, target)
                    raise ValueError(_refusal(shown, problem, owner))
            _move_into_place(shown, staging, target)
        except BaseException:
            if backup is not None and backup.exists():
                if staging.exists():   # the new folder is not in place: put the old one back
                    _put_back(shown, backup, target)
                else:                  # interrupted after the swap: only the backup is left
                    shutil.rmtree(backup, ignore_errors=True)
            shutil.rmtree(staging, ignore_errors=True)
            raise
        if backup is not None:
            shutil.rmtree(backup, ignore_errors=True)
    return value


def _put_back(shown: str, backup: Path, target: Path) -> None:
    try:
        os.rename(backup, target)
    except OSError as exc:  # something took the name meanwhile: say where the old output is
        raise ValueError(f"{shown}: the folder could not be put back ({exc.strerror or exc}); "
                         f"the previous output is in {backup}.") from None


def _move_into_place(shown: str, staging: Path, target: Path) -> None:
    """Rename ``staging`` to ``target``, which is absent or an empty folder.

    On POSIX a rename replaces an empty folder atomically and fails on a non-empty one, so a
    file written into the target meanwhile is never lost; elsewhere (where a rename never
    replaces a folder) the empty folder is removed first.
    """
    try:
        os.rename(staging, target)
        return
    except OSError:
        if not target.is_dir():
            raise
        if any(target.iterdir()):
            raise ValueError(f"{shown}: something was written into the folder meanwhile; "
                             "nothing was replaced.") from None
        if os.name == "posix":
            raise
    target.rmdir()
    os.rename(staging, target)
