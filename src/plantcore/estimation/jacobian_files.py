"""Reading the Jacobian sequences of an estimator from an ``.npz`` file, safely.

:func:`audit_from_file` reads the keys of :data:`AUDIT_FILE_KEYS` member by member through
:mod:`plantcore.files.safe_read` (a member whose header declares an object dtype or more
data than the cap is refused before its data are read; encrypted members and unknown
compression methods are refused from the archive's directory) and runs
:func:`~plantcore.estimation.audit.audit_linearized_observability` on them.

Limits: only regular files are read (a named pipe, device or socket is refused without
blocking); an audit archive may unpack to at most :data:`MAX_AUDIT_FILE_BYTES` (256 MiB) and
an expected-basis ``.npy`` file may hold at most :data:`MAX_ARRAY_FILE_BYTES` (256 MiB).
State names follow :mod:`plantcore.core.names` (no control, zero-width or bidirectional
characters; no two names equal after NFKC normalization).  Every problem raises
:class:`~plantcore.core.errors.ModelFileError` naming the file, the key and the problem.
"""

from __future__ import annotations

import os
import zipfile

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.estimation.audit import ObservabilityAudit, audit_linearized_observability
from plantcore.estimation.validation import _validate_basis, _validate_sequences
from plantcore.files.array_checks import real_finite_array, unique_names
from plantcore.files.safe_read import open_input, open_npz, read_npy, read_npz_member

__all__ = ["AUDIT_FILE_KEYS", "MAX_ARRAY_FILE_BYTES", "MAX_AUDIT_FILE_BYTES", "audit_from_file"]


#: Keys an audit ``.npz`` file may hold (the first two are required).
AUDIT_FILE_KEYS = (
    "transition_jacobians",
    "measurement_jacobians",
    "expected_unobservable",
    "measurement_noise",
    "state_scale",
    "state_names",
)

#: Largest audit archive accepted: the members together may unpack to at most this many
#: bytes (256 MiB), checked from the archive's directory and each member's header before any
#: data are read.
MAX_AUDIT_FILE_BYTES = 256 * 1024 * 1024

#: Largest ``.npy`` file accepted for an expected unobservable basis (``--expected``), in bytes
#: of the file and of the data its header declares (256 MiB).
MAX_ARRAY_FILE_BYTES = 256 * 1024 * 1024


def _load_npy_safely(path, display, key_label):
    """A single ``.npy`` array: a regular file, its header checked before anything is allocated."""
    handle = open_input(path, display, "a .npy array", limit=MAX_ARRAY_FILE_BYTES,
                        limit_name="plantcore.estimation.jacobian_files.MAX_ARRAY_FILE_BYTES")
    with handle:
        if zipfile.is_zipfile(handle):
            raise ModelFileError(display, key_label, "is an .npz archive; give a single .npy array "
                                                     "saved with numpy.save.")
        handle.seek(0)
        try:
            return read_npy(handle, display, key_label, limit=MAX_ARRAY_FILE_BYTES,
                            limit_name="plantcore.estimation.jacobian_files.MAX_ARRAY_FILE_BYTES")
        except OSError as exc:
            raise ModelFileError(display, key_label, "cannot be read "
                                                     f"({exc.strerror or exc}).") from None


def _check_member_dtype(array: np.ndarray, display, key: str, *, text: bool = False):
    kind = array.dtype.kind
    if text:
        if array.ndim != 1 or (array.size and kind != "U"):
            raise ModelFileError(display, key, "must be a 1-D array of text (one name per state).")
        return unique_names([str(x) for x in array.tolist()], display, key)
    return real_finite_array(array, display, key)


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
    limit_name = "plantcore.estimation.jacobian_files.MAX_AUDIT_FILE_BYTES"
    arrays = {}
    with open_input(display, display, "an .npz archive of Jacobians",
                    limit=MAX_AUDIT_FILE_BYTES, limit_name=limit_name) as handle:
        archive, members = open_npz(handle, display, limit=MAX_AUDIT_FILE_BYTES,
                                    limit_name=limit_name)
        with archive:
            for key, info in members.items():
                if key not in AUDIT_FILE_KEYS:
                    shown = key if key.isprintable() and len(key) <= 40 else repr(key[:40])
                    raise ModelFileError(display, shown, "unknown key; an audit file holds "
                                                         f"{', '.join(AUDIT_FILE_KEYS)}.")
            for key, info in members.items():
                arrays[key] = read_npz_member(archive, info, display, key,
                                              limit=MAX_AUDIT_FILE_BYTES, limit_name=limit_name)
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
