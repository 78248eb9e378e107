"""Reading the Jacobian sequences of an estimator from an ``.npz`` file, safely.

:func:`audit_from_file` reads the keys of :data:`AUDIT_FILE_KEYS` member by member with
``allow_pickle=False`` (a member whose header declares an object dtype is refused before
its data are read) and runs :func:`~plantcore.estimation.audit.audit_linearized_observability`
on them.  Every problem raises :class:`~plantcore.core.errors.ModelFileError` naming the
file, the key and the problem.
"""

from __future__ import annotations

import os
import zipfile

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.estimation.audit import ObservabilityAudit, audit_linearized_observability
from plantcore.estimation.validation import _validate_basis, _validate_sequences

__all__ = ["AUDIT_FILE_KEYS", "audit_from_file"]


#: Keys an audit ``.npz`` file may hold (the first two are required).
AUDIT_FILE_KEYS = (
    "transition_jacobians",
    "measurement_jacobians",
    "expected_unobservable",
    "measurement_noise",
    "state_scale",
    "state_names",
)

_MAX_AUDIT_FILE_BYTES = 256 * 1024 * 1024


def _load_npy_safely(path, display, key_label):
    if os.path.isfile(path) and zipfile.is_zipfile(path):
        raise ModelFileError(display, key_label, "is an .npz archive; give a single .npy array "
                                                 "saved with numpy.save.")
    try:
        with open(path, "rb") as fp:
            try:
                return np.lib.format.read_array(fp, allow_pickle=False)
            except ValueError as exc:
                raise ModelFileError(display, key_label, "could not be read as a numeric .npy "
                                     f"array ({' '.join(str(exc).split())}).") from None
    except FileNotFoundError:
        raise ModelFileError(display, None, "file not found.") from None
    except IsADirectoryError:
        raise ModelFileError(display, None, "is a folder, not a .npy file.") from None
    except PermissionError:
        raise ModelFileError(display, None, "cannot be read (permission denied).") from None


def _check_member_dtype(array: np.ndarray, display, key: str, *, text: bool = False):
    kind = array.dtype.kind
    if text:
        if array.ndim != 1 or (array.size and kind != "U"):
            raise ModelFileError(display, key, "must be a 1-D array of text (one name per state).")
        return [str(x) for x in array.tolist()]
    if kind not in "iuf":
        what = {"b": "booleans", "c": "complex numbers", "U": "text", "S": "bytes",
                "O": "Python objects", "V": "a structured record", "M": "dates",
                "m": "time spans"}.get(kind, f"dtype {array.dtype}")
        raise ModelFileError(display, key, f"holds {what}; give an array of real numbers.")
    out = np.asarray(array, dtype=float)
    bad = np.argwhere(~np.isfinite(out))
    if bad.size:
        where = ", ".join(str(int(i)) for i in bad[0])
        raise ModelFileError(display, key, f"has the non-finite entry {out[tuple(bad[0])]!r} at "
                                           f"index [{where}]; every entry must be finite.")
    return out


def _check_member_header(zf: zipfile.ZipFile, info: zipfile.ZipInfo, display, key: str) -> None:
    """Read only the .npy header of an archive member and refuse objects and huge shapes.

    This happens before any data is read, so a member that declares an enormous shape (or
    an object dtype, which would need unpickling) never allocates memory or runs code.
    """
    fmt = np.lib.format
    with zf.open(info) as fp:
        try:
            version = fmt.read_magic(fp)
            if version == (1, 0):
                shape, _, dtype = fmt.read_array_header_1_0(fp)
            elif version == (2, 0):
                shape, _, dtype = fmt.read_array_header_2_0(fp)
            else:
                raise ValueError(f"unsupported .npy format version {version}")
        except ValueError as exc:
            raise ModelFileError(display, key, "is not a readable .npy array "
                                               f"({' '.join(str(exc).split())}).") from None
    if dtype.hasobject:
        raise ModelFileError(display, key, "holds Python objects (a pickled object array); "
                                           "plantcore never unpickles, save numeric arrays.")
    if int(np.prod(shape, dtype=object)) * dtype.itemsize > _MAX_AUDIT_FILE_BYTES:
        raise ModelFileError(display, key, f"declares shape {tuple(shape)}, larger than the limit "
                                           f"of {_MAX_AUDIT_FILE_BYTES} bytes.")


def audit_from_file(path, *, expected_unobservable=None, tol=None) -> ObservabilityAudit:
    """Audit Jacobian sequences stored in an ``.npz`` file.

    Parameters
    ----------
    path : str or os.PathLike
        An ``.npz`` archive (``numpy.savez``) with the arrays

        ``transition_jacobians`` (K, n, n), required
        ``measurement_jacobians`` (K, p, n), required
        ``expected_unobservable`` (n, d), required unless given as an argument
        ``measurement_noise`` scalar, (p,), (p, p) or (K, p, p), optional
        ``state_scale`` (n,), optional
        ``state_names`` (n,) text array, optional

        with the meanings of :func:`audit_linearized_observability`.  Other keys are refused.
    expected_unobservable : (n, d) array_like or path to a ``.npy`` file, optional
        The expected unobservable basis; overrides the one stored in the archive.
    tol : float, optional
        Relative rank tolerance (see :func:`audit_linearized_observability`).

    Returns
    -------
    ObservabilityAudit

    Raises
    ------
    plantcore.ModelFileError
        A ``ValueError`` whose one-line message names the file, the key and the problem.

    Notes
    -----
    Arrays are read with ``allow_pickle=False``: nothing in the file is unpickled or run.

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "jacobians.npz")
    >>> F = np.repeat(np.eye(2)[None], 3, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.0]]]), 3, axis=0)
    >>> np.savez(path, transition_jacobians=F, measurement_jacobians=H,
    ...          expected_unobservable=np.ones((2, 1)))
    >>> audit_from_file(path).spurious_dimension
    0
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name, got {type(path).__name__}.")
    display = os.fsdecode(os.fspath(path))
    if not os.path.exists(display):
        raise ModelFileError(display, None, "file not found.")
    if os.path.isdir(display):
        raise ModelFileError(display, None, "is a folder, not an .npz file.")
    if not zipfile.is_zipfile(display):
        raise ModelFileError(display, None, "is not an .npz archive (a zip of .npy arrays); save "
                                            "the Jacobians with numpy.savez.")
    arrays = {}
    try:
        with zipfile.ZipFile(display) as zf:
            total = sum(info.file_size for info in zf.infolist())
            if total > _MAX_AUDIT_FILE_BYTES:
                raise ModelFileError(display, None, f"unpacks to {total} bytes, more than the "
                                                    f"limit of {_MAX_AUDIT_FILE_BYTES} bytes.")
            for info in zf.infolist():
                key = info.filename[:-4] if info.filename.endswith(".npy") else info.filename
                if key not in AUDIT_FILE_KEYS:
                    raise ModelFileError(display, key, "unknown key; an audit file holds "
                                                       f"{', '.join(AUDIT_FILE_KEYS)}.")
                if key in arrays:
                    raise ModelFileError(display, key, "appears twice in the archive.")
                _check_member_header(zf, info, display, key)
                with zf.open(info) as fp:
                    try:
                        arrays[key] = np.lib.format.read_array(fp, allow_pickle=False)
                    except ValueError as exc:
                        raise ModelFileError(display, key, "could not be read as a numeric array "
                                             f"({' '.join(str(exc).split())}).") from None
    except zipfile.BadZipFile as exc:
        raise ModelFileError(display, None, f"is a damaged .npz archive ({exc}).") from None
    for key in ("transition_jacobians", "measurement_jacobians"):
        if key not in arrays:
            raise ModelFileError(display, key, "missing; the file must hold "
                                               "transition_jacobians and measurement_jacobians.")
    values = {key: _check_member_dtype(arr, display, key, text=(key == "state_names"))
              for key, arr in arrays.items()}
    if expected_unobservable is not None:
        if isinstance(expected_unobservable, (str, os.PathLike)):
            basis_display = os.fsdecode(os.fspath(expected_unobservable))
            raw = _load_npy_safely(basis_display, basis_display, "expected basis")
            basis = _check_member_dtype(raw, basis_display, "expected basis")
            basis_where = (basis_display, "expected basis")
        else:
            basis = expected_unobservable
            basis_where = (display, "expected_unobservable")
    elif "expected_unobservable" in values:
        basis = values["expected_unobservable"]
        basis_where = (display, "expected_unobservable")
    else:
        raise ModelFileError(display, "expected_unobservable", "missing; store the expected "
                                                               "unobservable basis in the file "
                                                               "or give it separately.")
    F = values["transition_jacobians"]
    try:
        F, H, K, n, p = _validate_sequences(F, values["measurement_jacobians"])
    except ValueError as exc:
        raise ModelFileError(display, None, str(exc)) from None
    try:
        _validate_basis(basis, n, "expected_unobservable")
    except ValueError as exc:
        raise ModelFileError(basis_where[0], basis_where[1], str(exc)) from None
    try:
        return audit_linearized_observability(
            F, H, basis, measurement_noise=values.get("measurement_noise"), tol=tol,
            state_scale=values.get("state_scale"), state_names=values.get("state_names"))
    except ModelFileError:
        raise
    except ValueError as exc:
        raise ModelFileError(display, None, str(exc)) from None
