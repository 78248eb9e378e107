"""The state-space model object and conversions into it.

A :class:`StateSpaceModel` holds

.. math::

    \\dot x = A x + B u,\\quad y = C x + D u \\qquad\\text{(continuous time, ``dt=None``)}

    x_{k+1} = A x_k + B u_k,\\quad y_k = C x_k + D u_k \\qquad\\text{(discrete time, ``dt>0``)}

with real matrices and named states, inputs and outputs.  It is immutable: the arrays are
private copies marked read-only.  Every public function of plantcore that takes a model
passes it through :func:`as_model`, which also accepts python-control state-space objects and
tuples ``(A, B, C)`` / ``(A, B, C, D)`` of array-likes.

Sparse models
-------------
``A`` may be a ``scipy.sparse`` matrix or array.  The model then keeps it sparse (a private
CSR copy whose data are read-only) and ``model.is_sparse`` is True; ``B``, ``C`` and ``D``
are stored as dense arrays whatever they arrive as, since they have only ``m`` columns or
``p`` rows.  The rule for the rest of the package:

* ``.A`` of a sparse model is the sparse matrix (never silently densified).
* :func:`as_model` refuses a sparse model with one line that names the dense size the
  caller would need (``n x n`` doubles), unless the caller passes ``allow_sparse=True``.
  Every dense-only function goes through :func:`as_model`, so none of them allocates
  ``n x n`` arrays for a sparse model behind the user's back; the routines that work on
  sparse models (:mod:`plantcore.large`) ask for them explicitly.
* :meth:`StateSpaceModel.to_dense` makes the dense model when the user wants it.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
import scipy.sparse

from plantcore.core.names import list_problem, name_problem

__all__ = ["StateSpaceModel", "as_model", "dense_size_text", "from_transfer_function", "require_dense",
           "sparse_model_or_none"]


def _name_list(names, count: int, prefix: str, what: str) -> tuple[str, ...]:
    if names is None:
        return tuple(f"{prefix}{i + 1}" for i in range(count))
    if isinstance(names, str):
        raise ValueError(f"{what} must be a list of names, got the single string {names!r}.")
    names = tuple(names)
    if len(names) != count:
        raise ValueError(
            f"{what} has {len(names)} names but the model has {count}; give one name each."
        )
    for item in names:
        if not isinstance(item, str):
            raise ValueError(f"{what} must hold strings, got {type(item).__name__} {item!r}.")
    if len(set(names)) != len(names):
        seen, dup = set(), None
        for item in names:
            if item in seen:
                dup = item
                break
            seen.add(item)
        raise ValueError(f"{what} holds the name {dup!r} twice; names must be unique.")
    problem = list_problem(names)
    if problem:
        raise ValueError(f"{what}: {problem}.")
    return names


def _real_matrix(value, label: str, flat: str | None = None) -> np.ndarray:
    """Convert one matrix to a 2-D float array, refusing anything that is not real numbers."""
    if isinstance(value, str):
        raise ValueError(f"{label} must be a matrix of real numbers, got a string.")
    try:
        arr = np.asarray(value)
    except Exception as exc:  # ragged nested lists raise here on new numpy
        raise ValueError(f"{label} is not a rectangular matrix (rows of different lengths?).") from exc
    if arr.dtype == object:
        # Could be ragged rows, or numbers mixed with other objects.
        raise ValueError(
            f"{label} is not a rectangular matrix of real numbers "
            "(rows of different lengths, or entries that are not numbers)."
        )
    if arr.dtype.kind == "b":
        raise ValueError(f"{label} holds booleans; give real numbers (use 0 and 1).")
    if arr.dtype.kind == "c":
        raise ValueError(f"{label} holds complex numbers; plantcore works with real models.")
    if arr.dtype.kind not in "iuf":
        raise ValueError(f"{label} holds entries that are not real numbers (dtype {arr.dtype}).")
    if arr.ndim == 0:
        arr = arr.reshape(1, 1)
    elif arr.ndim == 1:
        # A flat list: an empty one is "no entries".  A non-empty one is one column of B or
        # one row of C (unambiguous: B has a row and C a column per state; common practice
        # in general-purpose control libraries); elsewhere it is ambiguous.
        if arr.size == 0:
            arr = arr.reshape(0, 0)
        elif flat == "column":
            arr = arr.reshape(-1, 1)
        elif flat == "row":
            arr = arr.reshape(1, -1)
        else:
            raise ValueError(
                f"{label} is a flat list of {arr.size} numbers; give it as a matrix "
                "(a list of rows), for example [[1.0], [2.0]] for a column."
            )
    elif arr.ndim != 2:
        raise ValueError(f"{label} must be a 2-D matrix, got an array with {arr.ndim} dimensions.")
    arr = np.array(arr, dtype=float)  # private copy
    if not np.all(np.isfinite(arr)):
        bad = np.argwhere(~np.isfinite(arr))[0]
        raise ValueError(
            f"{label} has a non-finite entry ({arr[tuple(bad)]}) at row {bad[0] + 1}, "
            f"column {bad[1] + 1}; every entry must be a finite real number."
        )
    return arr


def _sparse_matrix(value, label: str):
    """A private CSR copy of a scipy.sparse matrix of finite reals, its arrays read-only."""
    if value.ndim != 2:
        raise ValueError(f"{label} must be a 2-D matrix, got a sparse array with {value.ndim} "
                         "dimensions.")
    kind = value.dtype.kind
    if kind == "b":
        raise ValueError(f"{label} holds booleans; give real numbers (use 0 and 1).")
    if kind == "c":
        raise ValueError(f"{label} holds complex numbers; plantcore works with real models.")
    if kind not in "iuf":
        raise ValueError(f"{label} holds entries that are not real numbers (dtype {value.dtype}).")
    out = scipy.sparse.csr_array(value, dtype=float, copy=True)
    out.sum_duplicates()
    if not np.all(np.isfinite(out.data)):
        k = int(np.flatnonzero(~np.isfinite(out.data))[0])
        row = int(np.searchsorted(out.indptr, k, side="right")) - 1
        raise ValueError(
            f"{label} has a non-finite entry ({out.data[k]}) at row {row + 1}, column "
            f"{int(out.indices[k]) + 1}; every entry must be a finite real number.")
    for arr in (out.data, out.indices, out.indptr):
        arr.flags.writeable = False
    return out


def _dense_or_sparse(value, label: str, flat: str | None = None) -> np.ndarray:
    """B, C and D are stored dense; a sparse one is converted (it has few columns or rows)."""
    if scipy.sparse.issparse(value):
        return _real_matrix(_sparse_matrix(value, label).toarray(), label)
    return _real_matrix(value, label, flat)


def _validated(A, B, C, D):
    A = _sparse_matrix(A, "A") if scipy.sparse.issparse(A) else _real_matrix(A, "A")
    B = _dense_or_sparse(B, "B", flat="column")
    C = _dense_or_sparse(C, "C", flat="row")
    D = None if D is None else _dense_or_sparse(D, "D")
    if A.shape[0] != A.shape[1]:
        raise ValueError(f"A is {A.shape[0]} x {A.shape[1]} but must be square (one row and column per state).")
    n = A.shape[0]
    # Empty matrices of a state-free (static gain) model arrive as 0 x 0; size them from D.
    if n == 0:
        # Empty matrices of a state-free (static gain) model may arrive as 0 x 0; size them
        # from D when it is given.
        p, m = D.shape if D is not None else (C.shape[0], B.shape[1])
        if B.size == 0:
            B = np.zeros((0, m))
        if C.size == 0:
            C = np.zeros((p, 0))
    if B.shape[0] != n:
        raise ValueError(f"B has {B.shape[0]} rows but A is {n} x {n}; B needs one row per state.")
    if C.shape[1] != n:
        raise ValueError(f"C has {C.shape[1]} columns but A is {n} x {n}; C needs one column per state.")
    m, p = B.shape[1], C.shape[0]
    if D is None:
        D = np.zeros((p, m))
    elif D.size == 0 and p * m == 0:
        D = np.zeros((p, m))
    if D.shape != (p, m):
        raise ValueError(
            f"D is {D.shape[0]} x {D.shape[1]} but the model has {p} outputs (rows of C) and "
            f"{m} inputs (columns of B); D must be {p} x {m}."
        )
    return A, B, C, D


def _validated_dt(dt):
    if dt is None:
        return None
    if isinstance(dt, bool) or not isinstance(dt, numbers.Real):
        raise ValueError(f"dt (sample time) must be a positive number or None, got {dt!r}.")
    dt = float(dt)
    if not np.isfinite(dt) or dt <= 0.0:
        raise ValueError(f"dt (sample time) must be positive and finite, got {dt!r}; use None for continuous time.")
    return dt


class StateSpaceModel:
    """An immutable, validated linear time-invariant state-space model.

    Parameters
    ----------
    A : (n, n) array_like or scipy.sparse matrix
        State matrix.  A ``scipy.sparse`` matrix or array is kept sparse (CSR) and makes
        :attr:`is_sparse` True; see the module notes for what that means for other
        functions.
    B : (n, m) array_like
        Input matrix; a flat sequence of ``n`` numbers is one input (one column).
    C : (p, n) array_like
        Output matrix; a flat sequence of ``n`` numbers is one output (one row).
    D : (p, m) array_like, optional
        Feedthrough matrix; zeros when omitted.
    dt : float or None, optional
        ``None`` for continuous time, a positive sample time for discrete time.
    states, inputs, outputs : sequence of str, optional
        Names; defaults ``x1..xn``, ``u1..um``, ``y1..yp``.  Unique within each list, compared
        as written; control, zero-width and bidirectional characters are refused, and so are
        two names that Unicode normalization (NFKC) makes equal (see
        :mod:`plantcore.core.names`).
    name : str, optional
        A label for reports.

    Raises
    ------
    ValueError
        When a matrix has the wrong shape, a non-finite, complex, boolean or non-numeric
        entry, or the names or sample time are invalid.  The message names the matrix.

    Examples
    --------
    >>> import numpy as np
    >>> from plantcore import StateSpaceModel
    >>> m = StateSpaceModel([[-1.0]], [[1.0]], [[2.0]])
    >>> bool(np.isclose(m.transfer_at(1.0)[0, 0], 2.0 / (1.0 + 1.0)))
    True
    """

    __slots__ = ("_A", "_B", "_C", "_D", "_dt", "_states", "_inputs", "_outputs", "_name",
                 "__weakref__")

    def __init__(self, A, B, C, D=None, dt=None, states=None, inputs=None, outputs=None, name=None):
        A, B, C, D = _validated(A, B, C, D)
        for arr in (B, C, D) if scipy.sparse.issparse(A) else (A, B, C, D):
            arr.flags.writeable = False
        n, m, p = A.shape[0], B.shape[1], C.shape[0]
        object.__setattr__(self, "_A", A)
        object.__setattr__(self, "_B", B)
        object.__setattr__(self, "_C", C)
        object.__setattr__(self, "_D", D)
        object.__setattr__(self, "_dt", _validated_dt(dt))
        object.__setattr__(self, "_states", _name_list(states, n, "x", "states"))
        object.__setattr__(self, "_inputs", _name_list(inputs, m, "u", "inputs"))
        object.__setattr__(self, "_outputs", _name_list(outputs, p, "y", "outputs"))
        if name is not None and not isinstance(name, str):
            raise ValueError(f"name must be a string, got {type(name).__name__}.")
        if name is not None and name_problem(name, allow_empty=True):
            raise ValueError(f"name {name!r} {name_problem(name, allow_empty=True)}; a model name "
                             "must be printable text on one line.")
        object.__setattr__(self, "_name", name)

    def __setattr__(self, key, value):
        raise AttributeError("StateSpaceModel is immutable; build a new one instead.")

    # --- read-only attributes -------------------------------------------------------------
    A = property(lambda self: self._A, doc="State matrix, (n, n), read-only; a "
                 "scipy.sparse CSR array when the model is sparse.")
    B = property(lambda self: self._B, doc="Input matrix, (n, m), read-only.")
    C = property(lambda self: self._C, doc="Output matrix, (p, n), read-only.")
    D = property(lambda self: self._D, doc="Feedthrough matrix, (p, m), read-only.")
    dt = property(lambda self: self._dt, doc="Sample time, or None for continuous time.")
    states = property(lambda self: self._states, doc="State names.")
    inputs = property(lambda self: self._inputs, doc="Input names.")
    outputs = property(lambda self: self._outputs, doc="Output names.")
    name = property(lambda self: self._name, doc="Model name, or None.")

    @property
    def n(self) -> int:
        """Number of states."""
        return self._A.shape[0]

    @property
    def n_inputs(self) -> int:
        """Number of inputs."""
        return self._B.shape[1]

    @property
    def n_outputs(self) -> int:
        """Number of outputs."""
        return self._C.shape[0]

    @property
    def is_discrete(self) -> bool:
        """True for a discrete-time model."""
        return self._dt is not None

    @property
    def is_sparse(self) -> bool:
        """True when ``A`` is held as a scipy.sparse matrix (see the module notes)."""
        return scipy.sparse.issparse(self._A)

    def to_dense(self) -> StateSpaceModel:
        """The same model with a dense ``A`` (itself when it is dense already).

        This allocates ``n x n`` doubles (:func:`dense_size_text` says how much); it is the
        explicit way to hand a sparse model to the dense routines.
        """
        if not self.is_sparse:
            return self
        return self.replace(A=self._A.toarray())

    def to_sparse(self) -> StateSpaceModel:
        """The same model with ``A`` held sparse (itself when it is sparse already)."""
        if self.is_sparse:
            return self
        return self.replace(A=scipy.sparse.csr_array(self._A))

    def replace(self, **changes) -> "StateSpaceModel":
        """A copy with some fields changed (``A``, ``B``, ``C``, ``D``, ``dt``, names).

        State names are dropped (reset to defaults) when the number of states changes and no
        new names are given.
        """
        fields = dict(A=self._A, B=self._B, C=self._C, D=self._D, dt=self._dt,
                      states=self._states, inputs=self._inputs, outputs=self._outputs,
                      name=self._name)
        fields.update(changes)
        shape_a, shape_b, shape_c = (_shape(fields[key]) for key in "ABC")
        n_new = shape_a[0] if len(shape_a) == 2 else None
        if "states" not in changes and n_new != self.n:
            fields["states"] = None
        if "inputs" not in changes and len(shape_b) == 2 and shape_b[1] != self.n_inputs:
            fields["inputs"] = None
        if "outputs" not in changes and len(shape_c) == 2 and shape_c[0] != self.n_outputs:
            fields["outputs"] = None
        return StateSpaceModel(**fields)

    def transfer_at(self, point) -> np.ndarray:
        """Evaluate the transfer matrix ``C (point I - A)^{-1} B + D`` at a complex point.

        ``point`` is ``s`` in continuous time and ``z`` in discrete time.  Returns a complex
        ``(p, m)`` array; raises ``ValueError`` when the point is an eigenvalue of ``A``.
        A sparse model is evaluated with one sparse LU factorization of ``point I - A``
        in real arithmetic (:mod:`plantcore.core.sparse_solve`), never a dense ``n x n``
        array.
        """
        s = complex(point)
        n = self.n
        if n == 0:
            return self._D.astype(complex)
        if self.is_sparse:
            return self._sparse_transfer_at(s, point)
        M = s * np.eye(n) - self._A
        try:
            X = np.linalg.solve(M, self._B.astype(complex))
        except np.linalg.LinAlgError:
            raise ValueError(f"the transfer matrix is not defined at {point}: it is an eigenvalue of A.") from None
        return self._C @ X + self._D

    def _sparse_transfer_at(self, s: complex, point) -> np.ndarray:
        from plantcore.core.sparse_solve import sparse_lu

        identity = scipy.sparse.identity(self.n, format="csc")
        try:
            lu = sparse_lu(s.real * identity - self._A, s.imag * identity if s.imag else None)
        except ValueError:
            raise ValueError(f"the transfer matrix is not defined at {point}: it is an "
                             "eigenvalue of A.") from None
        return self._C @ lu.solve(self._B) + self._D

    def to_control(self):
        """Convert to a ``control.StateSpace`` object (python-control); dense models only."""
        import control

        require_dense(self, "to_control()")
        dt = 0 if self._dt is None else self._dt
        kwargs = {}
        if self.n or self.n_inputs or self.n_outputs:
            kwargs = dict(inputs=list(self._inputs) or None, outputs=list(self._outputs) or None,
                          states=list(self._states) or None)
        try:
            return control.ss(self._A, self._B, self._C, self._D, dt, **kwargs)
        except TypeError:  # older python-control without signal names
            return control.ss(self._A, self._B, self._C, self._D, dt)

    @classmethod
    def from_control(cls, obj) -> "StateSpaceModel":
        """Build from a python-control ``StateSpace`` (or ``TransferFunction``) object."""
        return as_model(obj)

    def __repr__(self) -> str:
        domain = "continuous time" if self._dt is None else f"discrete time, dt={self._dt:g}"
        label = f" {self._name!r}" if self._name else ""
        sparse = f", sparse A with {self._A.nnz} nonzeros" if self.is_sparse else ""
        return (f"<StateSpaceModel{label}: {self.n} states, {self.n_inputs} inputs, "
                f"{self.n_outputs} outputs, {domain}{sparse}>")

    def __reduce__(self):
        return (_rebuild, (self._A, self._B, self._C, self._D, self._dt, self._states,
                           self._inputs, self._outputs, self._name))


def _rebuild(A, B, C, D, dt, states, inputs, outputs, name):
    return StateSpaceModel(A, B, C, D, dt, states, inputs, outputs, name)


def _shape(value) -> tuple:
    if scipy.sparse.issparse(value):
        return value.shape
    return np.shape(value)


def dense_size_text(n: int) -> str:
    """How much one dense ``n x n`` array of doubles takes, e.g. ``"800 MB"``."""
    size = 8.0 * n * n
    for unit in ("bytes", "kB", "MB", "GB", "TB"):
        if size < 1000.0 or unit == "TB":
            return f"{size:.0f} {unit}" if unit == "bytes" else f"{size:.3g} {unit}"
        size /= 1000.0
    raise AssertionError("unreachable")


def require_dense(model: StateSpaceModel, what: str = "this function") -> None:
    """Refuse a sparse model in a routine that needs dense ``n x n`` arrays (one line).

    Raises
    ------
    ValueError
        Naming the number of states, the size of one dense ``n x n`` array, and the routes
        that work on sparse models.
    """
    if not model.is_sparse:
        return
    label = f"model {model.name!r}" if model.name else "the model"
    raise ValueError(
        f"{label} is sparse with {model.n:,} states and {what} needs dense {model.n:,} x "
        f"{model.n:,} arrays ({dense_size_text(model.n)} each); use the sparse routes "
        "(plantcore.structural_reduction, plantcore.hankel_singular_values, "
        "plantcore.balanced_truncation, plantcore.low_rank_gramians, transfer_at), or "
        "model.to_dense() when that size fits in memory.")


def sparse_model_or_none(obj: Any) -> StateSpaceModel | None:
    """The sparse :class:`StateSpaceModel` that ``obj`` describes, or None when it is dense.

    ``obj`` may be a model or a tuple ``(A, B, C[, D])`` whose ``A`` is scipy.sparse; this is
    the test the dense routines use to hand a sparse model to :mod:`plantcore.large`.
    """
    if isinstance(obj, StateSpaceModel):
        return obj if obj.is_sparse else None
    if isinstance(obj, (tuple, list)) and len(obj) in (3, 4) and scipy.sparse.issparse(obj[0]):
        return StateSpaceModel(*obj)
    return None


def _names_from_control(obj, attr: str, count: int):
    try:
        names = getattr(obj, attr)
    except Exception:
        return None
    if names is None:
        return None
    names = list(names)
    if len(names) != count or len(set(names)) != count or not all(isinstance(x, str) for x in names):
        return None
    return names


def _name_from_control(obj):
    name = getattr(obj, "name", None)
    if not isinstance(name, str) or (name.startswith("sys[") and name.endswith("]")):
        return None  # python-control's automatic names carry no information
    return name


def as_model(obj: Any, *, allow_sparse: bool = False) -> StateSpaceModel:
    """Turn any supported model description into a :class:`StateSpaceModel`.

    Accepts a :class:`StateSpaceModel` (returned as is), a python-control ``StateSpace`` or
    ``TransferFunction`` object, or a tuple ``(A, B, C)`` / ``(A, B, C, D)`` of array-likes.
    A sparse model (or a tuple with a scipy.sparse ``A``) is refused with one line naming the
    dense size it would need, unless ``allow_sparse=True``: the dense routines call this
    without it, the sparse ones (:mod:`plantcore.large`) with it.
    """
    if isinstance(obj, StateSpaceModel):
        if not allow_sparse:
            require_dense(obj)
        return obj
    if isinstance(obj, (tuple, list)):
        if len(obj) not in (3, 4):
            raise ValueError(
                f"a model tuple must be (A, B, C) or (A, B, C, D); got {len(obj)} items."
            )
        model = StateSpaceModel(*obj)
        if not allow_sparse:
            require_dense(model)
        return model
    mod = type(obj).__module__ or ""
    if mod.startswith("control"):
        import control

        if isinstance(obj, control.TransferFunction):
            obj = control.ss(obj)
        if not isinstance(obj, control.StateSpace):
            raise TypeError(f"cannot use a {type(obj).__name__} as a model; give a state-space system.")
        dt = obj.dt
        if dt is None or dt is False or dt == 0:
            sample_time = None
        elif dt is True:
            raise ValueError(
                "the python-control system is discrete time with an unspecified sample time "
                "(dt=True); give it a numeric sample time."
            )
        else:
            sample_time = float(dt)
        n, m, p = obj.A.shape[0], obj.B.shape[1], obj.C.shape[0]
        return StateSpaceModel(
            np.asarray(obj.A), np.asarray(obj.B), np.asarray(obj.C), np.asarray(obj.D), sample_time,
            states=_names_from_control(obj, "state_labels", n),
            inputs=_names_from_control(obj, "input_labels", m),
            outputs=_names_from_control(obj, "output_labels", p),
            name=_name_from_control(obj),
        )
    raise TypeError(
        f"cannot use a {type(obj).__name__} as a model; give a StateSpaceModel, a python-control "
        "state-space object, or a tuple (A, B, C) or (A, B, C, D)."
    )


# --- transfer functions -------------------------------------------------------------------

def _poly(coeffs, label: str) -> np.ndarray:
    """Validate one coefficient list and strip leading zeros."""
    flat = np.atleast_1d(np.asarray(coeffs, dtype=object) if isinstance(coeffs, (list, tuple)) else coeffs)
    if flat.ndim != 1:
        raise ValueError(f"{label} must be a flat list of coefficients.")
    arr = _real_matrix(np.asarray(flat.tolist()).reshape(1, -1), label)[0]
    nz = np.flatnonzero(arr)
    return arr[nz[0]:] if nz.size else np.zeros(1)


def _siso_realization(num, den, label: str):
    """Controllable canonical (companion) realization of one proper rational function."""
    num = _poly(num, f"{label} numerator")
    den = _poly(den, f"{label} denominator")
    if not np.any(den):
        raise ValueError(f"{label} denominator is zero.")
    if len(num) > len(den):
        raise ValueError(
            f"{label} is improper (numerator degree {len(num) - 1} > denominator degree "
            f"{len(den) - 1}); a state-space realization needs a proper transfer function."
        )
    lead = den[0]
    den = den / lead
    num = np.concatenate([np.zeros(len(den) - len(num)), num / lead])
    k = len(den) - 1
    d = num[0]
    rem = num[1:] - d * den[1:]  # strictly proper remainder, highest power first
    if k == 0:
        return np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[d]])
    A = np.zeros((k, k))
    A[0, :] = -den[1:]
    A[1:, :-1] = np.eye(k - 1)
    B = np.zeros((k, 1))
    B[0, 0] = 1.0
    C = rem[None, :].copy()
    return A, B, C, np.array([[d]])


def from_transfer_function(num, den, dt=None) -> StateSpaceModel:
    """A state-space realization of a SISO or MIMO transfer function.

    Parameters
    ----------
    num, den : coefficient lists, highest power first
        SISO: flat lists.  MIMO: nested lists where ``num[i][j]`` and ``den[i][j]`` belong to
        output ``i`` and input ``j``.
    dt : float or None
        Sample time, or None for continuous time.

    Returns
    -------
    StateSpaceModel
        Each entry is realized in controllable companion form and the entries are placed
        block-diagonally, so a MIMO realization is generally **not minimal**: pass it to
        :func:`plantcore.minimal_realization` to remove the redundant states.  A SISO
        realization is minimal exactly when numerator and denominator have no common root.

    Notes
    -----
    The companion form is the textbook realization (Kailath, *Linear Systems*, 1980,
    section 2.1); it is badly scaled for high orders, which the staircase algorithms offset
    by equilibrating before deciding ranks.

    Examples
    --------
    >>> import numpy as np
    >>> from plantcore import from_transfer_function
    >>> g = from_transfer_function([1.0, 3.0], [1.0, 3.0, 2.0])
    >>> bool(np.isclose(g.transfer_at(1j)[0, 0], (1j + 3) / ((1j) ** 2 + 3j + 2)))
    True
    """
    def is_flat(x):
        return all(not isinstance(v, (list, tuple, np.ndarray)) for v in x)

    num_l = num.tolist() if isinstance(num, np.ndarray) else num
    den_l = den.tolist() if isinstance(den, np.ndarray) else den
    if isinstance(num_l, numbers.Real):
        num_l = [num_l]
    if isinstance(den_l, numbers.Real):
        den_l = [den_l]
    if not isinstance(num_l, (list, tuple)) or not isinstance(den_l, (list, tuple)):
        raise ValueError("num and den must be coefficient lists (highest power first).")
    if is_flat(num_l) and is_flat(den_l):
        A, B, C, D = _siso_realization(num_l, den_l, "transfer function")
        return StateSpaceModel(A, B, C, D, dt)
    if is_flat(num_l) or is_flat(den_l):
        raise ValueError("num and den must both be flat (SISO) or both nested per output and input (MIMO).")
    p = len(num_l)
    if len(den_l) != p:
        raise ValueError(f"num has {p} rows (outputs) but den has {len(den_l)}; they must match.")
    m = len(num_l[0]) if p else 0
    blocks = []
    for i in range(p):
        if len(num_l[i]) != m or len(den_l[i]) != m:
            raise ValueError(f"row {i + 1} of num or den does not have {m} entries (one per input).")
        for j in range(m):
            blocks.append((i, j, *_siso_realization(num_l[i][j], den_l[i][j], f"entry ({i + 1}, {j + 1})")))
    n = sum(b[2].shape[0] for b in blocks)
    A = np.zeros((n, n))
    B = np.zeros((n, m))
    C = np.zeros((p, n))
    D = np.zeros((p, m))
    k = 0
    for i, j, a, b, c, d in blocks:
        r = a.shape[0]
        A[k:k + r, k:k + r] = a
        B[k:k + r, j] = b[:, 0]
        C[i, k:k + r] = c[0]
        D[i, j] = d[0, 0]
        k += r
    return StateSpaceModel(A, B, C, D, dt)
