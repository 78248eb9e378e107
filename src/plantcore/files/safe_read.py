"""Reading input files at a trust boundary: regular files only, size caps, headers first.

Every file plantcore reads from the user (model files, sweep specifications, audit
archives, ``.npy`` arrays) is opened through :func:`open_input`:

* only a **regular file** is read; a folder, a named pipe (FIFO), a device or a socket is
  refused before any byte is read (a FIFO would otherwise block forever, ``/dev/zero``
  would never end).  The file is checked with ``stat`` before it is opened, opened without
  blocking, and checked again on the open descriptor, so a file swapped in between is caught;
* a file larger than the caller's cap is refused from its size, and text is read with
  :func:`read_capped`, which stops one byte after the cap however long the file turns out to
  be (a file that grows while it is read);
* a file that cannot be opened says why in words ("permission denied"), never a bare errno.

``.npy`` data (single files and the members of ``.npz`` archives) are read with
:func:`read_npy`: the header is parsed first, an object dtype (which would need unpickling),
a negative or oversized shape is refused from the header alone, and only then are exactly the
declared bytes read into a preallocated array.  :func:`open_npz` opens an archive and refuses
encrypted members, unknown compression methods, duplicate members and archives that unpack
to more than the cap, again before any member data is read.

Every refusal is a :class:`~plantcore.core.errors.ModelFileError` naming the file and the
field (``file`` for the file as a whole, the key for an archive member).
"""

from __future__ import annotations

import os
import stat
import zipfile

import numpy as np

from plantcore.core.errors import ModelFileError

__all__ = ["open_input", "open_npz", "read_capped", "read_npy", "read_npz_member"]

_SUPPORTED_COMPRESSION = {zipfile.ZIP_STORED: "stored", zipfile.ZIP_DEFLATED: "deflated",
                          zipfile.ZIP_BZIP2: "bzip2", zipfile.ZIP_LZMA: "lzma"}


def _reason(exc: OSError) -> str:
    if isinstance(exc, PermissionError):
        return "permission denied"
    return exc.strerror or type(exc).__name__


def open_input(path, display: str, what: str, *, limit: int, limit_name: str | None = None):
    """Open a regular file for binary reading, refusing anything else with one clear line.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    display : str
        The file as shown in messages.
    what : str
        What the file should be, e.g. ``"a sweep specification"``.
    limit : int
        Largest size accepted, in bytes.
    limit_name : str, optional
        The public name of the limit, shown in the message.

    Returns
    -------
    file object
        Opened for binary reading; the caller closes it.

    Raises
    ------
    ModelFileError
        With the field ``file``: not found, a folder, not a regular file, unreadable, or
        larger than ``limit``.
    """
    real = os.fsdecode(os.fspath(path))
    try:
        info = os.stat(real)
    except FileNotFoundError:
        raise ModelFileError(display, "file", "not found.") from None
    except NotADirectoryError:
        raise ModelFileError(display, "file", "not found (a part of the path is not a "
                                              "folder).") from None
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({_reason(exc)}).") from None
    _check_kind(info, display, what)
    flags = os.O_RDONLY | getattr(os, "O_BINARY", 0) | getattr(os, "O_NONBLOCK", 0) \
        | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(real, flags)
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({_reason(exc)}).") from None
    try:
        info = os.fstat(fd)
        _check_kind(info, display, what)  # the file may have been swapped since the stat
        if info.st_size > limit:
            shown = f" ({limit_name})" if limit_name else ""
            raise ModelFileError(display, "file", f"has {info.st_size} bytes, more than the limit "
                                                  f"of {limit} bytes for {what}{shown}.")
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def _check_kind(info: os.stat_result, display: str, what: str) -> None:
    if stat.S_ISDIR(info.st_mode):
        raise ModelFileError(display, "file", f"is a folder, not {what}.")
    if not stat.S_ISREG(info.st_mode):
        raise ModelFileError(display, "file", "is not a regular file (a device, pipe or socket); "
                                              f"give {what} saved as a file.")


def read_capped(handle, display: str, what: str, *, limit: int) -> bytes:
    """All bytes of an open file, refusing it once it passes ``limit`` bytes."""
    try:
        data = handle.read(limit + 1)
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({_reason(exc)}).") from None
    if len(data) > limit:
        raise ModelFileError(display, "file", f"has more than {limit} bytes, the limit for "
                                              f"{what}.")
    return data


def _npy_header(fp, display: str, field: str, in_archive: bool):
    fmt = np.lib.format
    try:
        version = fmt.read_magic(fp)
    except ValueError:
        where = " inside the archive" if in_archive else ""
        raise ModelFileError(display, field, f"is not a .npy array{where} (no .npy header); save "
                                             "it with numpy.save or numpy.savez.") from None
    try:
        if version == (1, 0):
            shape, fortran, dtype = fmt.read_array_header_1_0(fp)
        elif version == (2, 0):
            shape, fortran, dtype = fmt.read_array_header_2_0(fp)
        else:
            raise ModelFileError(display, field, f"uses .npy format version {version[0]}."
                                                 f"{version[1]}, which plantcore does not read; "
                                                 "save plain numeric arrays with numpy.save.")
    except ModelFileError:
        raise
    except (ValueError, TypeError, SyntaxError) as exc:
        raise ModelFileError(display, field, "has a damaged .npy header "
                                             f"({' '.join(str(exc).split())}).") from None
    return tuple(shape), bool(fortran), dtype


def read_npy(fp, display: str, field: str, *, limit: int, limit_name: str | None = None,
             in_archive: bool = False) -> np.ndarray:
    """Read one ``.npy`` array from an open stream, the header checked before any allocation.

    Parameters
    ----------
    fp : binary file object
        Positioned at the start of the ``.npy`` data (a file or an archive member).
    display, field : str
        For messages: the file and the field (the archive key, or ``file``).
    limit : int
        Largest array accepted, in bytes of data.
    limit_name : str, optional
        The public name of the limit, for the message.
    in_archive : bool
        The stream is a member of an ``.npz`` archive (for the message).

    Returns
    -------
    numpy.ndarray
        A writable array of the declared shape and dtype.

    Raises
    ------
    ModelFileError
        No ``.npy`` header, an unknown format version, an object dtype (refused without
        unpickling anything), a negative shape, more data than ``limit``, or fewer bytes than
        the header declares.
    """
    shape, fortran, dtype = _npy_header(fp, display, field, in_archive)
    if dtype.hasobject:
        raise ModelFileError(display, field, "holds Python objects (a pickled object array); "
                                             "plantcore never unpickles, save numeric arrays.")
    if any(size < 0 for size in shape):
        raise ModelFileError(display, field, f"declares the impossible shape {shape}.")
    count = 1
    for size in shape:
        count *= size
    nbytes = count * dtype.itemsize
    if nbytes > limit:
        shown = f" ({limit_name})" if limit_name else ""
        raise ModelFileError(display, field, f"declares shape {shape} of {dtype} ({nbytes} bytes), "
                                             f"more than the limit of {limit} bytes{shown}.")
    array = np.empty(count, dtype=dtype)
    view = memoryview(array.view(np.uint8).reshape(-1)) if nbytes else memoryview(b"")
    filled = 0
    while filled < nbytes:
        got = fp.readinto(view[filled:])
        if not got:
            raise ModelFileError(display, field, f"is truncated: the header declares {nbytes} bytes "
                                                 f"of data, the file holds {filled}.")
        filled += got
    return array.reshape(shape, order="F" if fortran else "C")


def open_npz(handle, display: str, *, limit: int, limit_name: str | None = None):
    """Open an ``.npz`` archive (a zip of ``.npy`` members) and check it before reading data.

    Parameters
    ----------
    handle : binary file object
        From :func:`open_input`.
    display : str
        The file as shown in messages.
    limit : int
        Largest total uncompressed size of the members, in bytes.

    Returns
    -------
    (zipfile.ZipFile, dict)
        The open archive and its members by key (the member name without ``.npy``).

    Raises
    ------
    ModelFileError
        Not a zip archive, damaged, too large once unpacked, a member twice, an encrypted
        member or one compressed with a method plantcore does not read.
    """
    try:
        if not zipfile.is_zipfile(handle):
            raise ModelFileError(display, "file", "is not an .npz archive (a zip of .npy arrays); "
                                                  "save it with numpy.savez.")
        handle.seek(0)
        archive = zipfile.ZipFile(handle)
    except ModelFileError:
        raise
    except OSError as exc:
        raise ModelFileError(display, "file", f"cannot be read ({_reason(exc)}).") from None
    except Exception as exc:  # BadZipFile, a central directory that lies, ...
        raise ModelFileError(display, "file", f"is a damaged .npz archive ({type(exc).__name__}: "
                                              f"{' '.join(str(exc).split())}).") from None
    try:
        members: dict[str, zipfile.ZipInfo] = {}
        total = 0
        for info in archive.infolist():
            key = info.filename.removesuffix(".npy")
            shown = key if key.isprintable() and len(key) <= 40 else repr(key[:40])
            if key in members:
                raise ModelFileError(display, shown, "appears twice in the archive.")
            if info.flag_bits & 0x1:
                raise ModelFileError(display, shown, "is encrypted; plantcore reads unencrypted "
                                                     "archives only (numpy.savez writes them).")
            if info.compress_type not in _SUPPORTED_COMPRESSION:
                raise ModelFileError(display, shown, f"uses compression method {info.compress_type}, "
                                                     "which plantcore does not read (numpy.savez "
                                                     "writes stored or deflated members).")
            members[key] = info
            total += info.file_size
        if total > limit:
            shown = f" ({limit_name})" if limit_name else ""
            raise ModelFileError(display, "file", f"the archive unpacks to {total} bytes, more "
                                                  f"than the limit of {limit} bytes{shown}.")
    except BaseException:
        archive.close()
        raise
    return archive, members


def read_npz_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, display: str, key: str,
                    *, limit: int, limit_name: str | None = None) -> np.ndarray:
    """One member of an archive from :func:`open_npz`, read with :func:`read_npy`.

    A damaged member (bad checksum, broken compressed stream, cut short) is one
    :class:`ModelFileError` naming the key.
    """
    try:
        with archive.open(info) as fp:
            return read_npy(fp, display, key, limit=limit, limit_name=limit_name, in_archive=True)
    except (ModelFileError, MemoryError):
        raise
    except Exception as exc:  # zipfile, zlib and the decompressors raise many types
        raise ModelFileError(display, key, f"is damaged ({type(exc).__name__}: "
                                           f"{' '.join(str(exc).split())}).") from None
