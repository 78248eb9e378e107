"""Exact rational (and symbolic) arithmetic for part sizes, minimal order and transfer matrix.

The floating-point path of plantcore decides ranks from singular values with a tolerance.
This module decides them exactly, with sympy, for models whose entries are rational numbers
(or rational functions of symbolic parameters).  Users with small parametric models use it
to get answers that do not depend on any tolerance, and the test suite uses it as an oracle.

Accepted entries
----------------
* ``int``, :class:`fractions.Fraction`, sympy ``Integer`` / ``Rational``;
* strings holding a rational number: ``"1/3"``, ``"-2"``, ``"0.1"`` (= 1/10 exactly),
  ``"2.5e-3"``; they are parsed with :class:`fractions.Fraction`, never evaluated;
* ``float`` (and numpy floats, sympy ``Float``): converted **exactly** to the rational number
  the binary double holds, ``sympy.Rational(0.1) == 3602879701896397/36028797018963968``, not
  ``1/10``.  Users whose data are decimal numbers should pass them as strings or
  :class:`~fractions.Fraction` objects, otherwise a relation such as ``0.1 + 0.2 == 0.3``
  that holds for the decimals fails for the doubles and a rank comes out "generic";
* sympy expressions in symbols (``sympy.symbols("k m", positive=True)``).  Ranks are then
  **generic** ranks over the field of rational functions of the symbols: the answer for
  almost every value of the parameters.  At special values (a parameter zero, two
  parameters equal, ...) the true rank may be smaller, so the minimal order may drop;
  substitute the values and call again to check a particular point.

Complex entries, booleans, NaN and infinities are refused with a ``ValueError`` naming the
matrix and the entry.  The model may be a tuple ``(A, B, C)`` / ``(A, B, C, D)`` of such
entries (lists of rows, numpy arrays or sympy matrices), a :class:`plantcore.StateSpaceModel`,
or a python-control object (the last two hold doubles, converted exactly as above).  Tuples
are *not* passed through :func:`plantcore.as_model`, which would round the entries to
doubles; the same shape rules apply.

Cost
----
Exact arithmetic is slow and entries of ``A^k B`` grow in size: this path is meant for models
of a few tens of states with small rational entries, or a handful of states with symbols.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np

from plantcore.structure.kalman import PartSizes
from plantcore.core.model import StateSpaceModel, as_model

__all__ = ["ExactPartSizes", "ExactTransferComparison", "exact_minimal_order", "exact_part_sizes",
           "exact_transfer_comparison", "exact_transfer_matrix"]

# sympy is imported inside the functions that need it, so that ``import plantcore`` (and the
# command line) does not pay its import time unless the exact path is used.


# =============================================================================================
# Conversion of the input to exact matrices
# =============================================================================================

@dataclass(frozen=True)
class _ExactModel:
    A: sympy.Matrix
    B: sympy.Matrix
    C: sympy.Matrix
    D: sympy.Matrix
    is_discrete: bool
    parameters: tuple  # sorted free symbols

    @property
    def n(self) -> int:
        return self.A.rows


def _exact_entry(value: Any, label: str, where: str) -> sympy.Expr:
    """One entry as an exact sympy number or expression (no evaluation of text as code)."""
    import sympy

    if isinstance(value, (bool, np.bool_)):
        raise ValueError(f"{label} {where} is a boolean; give a number.")
    if isinstance(value, sympy.Basic):
        expr = value
        if not isinstance(expr, sympy.Expr):
            raise ValueError(f"{label} {where} is a sympy {type(expr).__name__}, not an expression.")
        floats = expr.atoms(sympy.Float)
        if floats:
            if any(not f.is_finite for f in floats):
                raise ValueError(f"{label} {where} is not finite ({expr}).")
            expr = expr.xreplace({f: sympy.Rational(f) for f in floats})
        if expr.has(sympy.I) or expr.has(sympy.zoo, sympy.oo, -sympy.oo, sympy.nan):
            raise ValueError(f"{label} {where} is {expr}; entries must be finite and real.")
        if expr.is_number and expr.is_real is False:
            raise ValueError(f"{label} {where} is the complex number {expr}; plantcore works with "
                             "real models only.")
        return expr
    if isinstance(value, Fraction):
        return sympy.Rational(value.numerator, value.denominator)
    if isinstance(value, numbers.Integral):
        return sympy.Integer(int(value))
    if isinstance(value, numbers.Real):
        x = float(value)
        if not np.isfinite(x):
            raise ValueError(f"{label} {where} is {x!r}; entries must be finite.")
        return sympy.Rational(x)  # the exact binary value of the double
    if isinstance(value, numbers.Complex):
        raise ValueError(f"{label} {where} is the complex number {value!r}; plantcore works with "
                         "real models only.")
    if isinstance(value, str):
        try:
            q = Fraction(value.strip())
        except (ValueError, ZeroDivisionError):
            shown = value if len(value) <= 40 else value[:40] + "..."
            raise ValueError(f"{label} {where} is the string {shown!r}, which is not a rational "
                             "number such as '3', '-1/3' or '0.25'.") from None
        return sympy.Rational(q.numerator, q.denominator)
    raise ValueError(f"{label} {where} is a {type(value).__name__}, not a number.")


def _exact_matrix(value: Any, label: str) -> sympy.Matrix:
    """A matrix of exact entries from nested lists, a numpy array or a sympy matrix."""
    import sympy

    if isinstance(value, sympy.MatrixBase):
        shape = value.shape
        rows = [[value[i, j] for j in range(shape[1])] for i in range(shape[0])]
    elif isinstance(value, np.ndarray):
        arr = value.reshape(1, 1) if value.ndim == 0 else value
        if arr.ndim == 1:
            if arr.size:
                raise ValueError(f"{label} is a flat array of {arr.size} entries; give it as a 2-D "
                                 "matrix.")
            arr = arr.reshape(0, 0)
        if arr.ndim != 2:
            raise ValueError(f"{label} must be a 2-D matrix, got an array with {arr.ndim} dimensions.")
        shape = arr.shape
        rows = arr.tolist()
    elif isinstance(value, (list, tuple)):
        is_row = [isinstance(r, (list, tuple, np.ndarray)) for r in value]
        if not value:
            shape, rows = (0, 0), []
        elif not any(is_row):
            raise ValueError(f"{label} is a flat list of {len(value)} entries; give it as a matrix "
                             "(a list of rows).")
        elif not all(is_row):
            raise ValueError(f"{label} mixes rows and single numbers; give a list of rows.")
        else:
            rows = [list(np.asarray(r, dtype=object).reshape(-1)) if isinstance(r, np.ndarray)
                    else list(r) for r in value]
            width = len(rows[0])
            for i, r in enumerate(rows, start=1):
                if len(r) != width:
                    raise ValueError(f"{label} row {i} has {len(r)} entries but row 1 has {width}; "
                                     "every row needs the same length.")
            shape = (len(rows), width)
    elif isinstance(value, str):
        raise ValueError(f"{label} must be a matrix, got a string.")
    else:  # a single number is a 1 x 1 matrix
        shape, rows = (1, 1), [[value]]
    entries = [[_exact_entry(rows[i][j], label, f"row {i + 1}, column {j + 1}")
                for j in range(shape[1])] for i in range(shape[0])]
    if shape[0] == 0 or shape[1] == 0:
        return sympy.zeros(shape[0], shape[1])
    return sympy.Matrix(entries)


def _exact_model(model) -> _ExactModel:
    import sympy

    if isinstance(model, (tuple, list)) and not isinstance(model, StateSpaceModel):
        if len(model) not in (3, 4):
            raise ValueError(f"a model tuple must be (A, B, C) or (A, B, C, D); got {len(model)} items.")
        A = _exact_matrix(model[0], "A")
        B = _exact_matrix(model[1], "B")
        C = _exact_matrix(model[2], "C")
        D = None if len(model) == 3 or model[3] is None else _exact_matrix(model[3], "D")
        discrete = False
    else:
        m = as_model(model)
        A, B, C, D = (_exact_matrix(x, label) for x, label in zip((m.A, m.B, m.C, m.D), "ABCD"))
        discrete = m.is_discrete
    if A.rows != A.cols:
        raise ValueError(f"A is {A.rows} x {A.cols} but must be square (one row and column per state).")
    n = A.rows
    if n == 0:
        p, m_ = (D.rows, D.cols) if D is not None else (C.rows, B.cols)
        B = sympy.zeros(0, m_) if B.rows == 0 else B
        C = sympy.zeros(p, 0) if C.cols == 0 else C
    if B.rows != n:
        raise ValueError(f"B has {B.rows} rows but A is {n} x {n}; B needs one row per state.")
    if C.cols != n:
        raise ValueError(f"C has {C.cols} columns but A is {n} x {n}; C needs one column per state.")
    m_, p = B.cols, C.rows
    if D is None or (D.rows * D.cols == 0 and p * m_ == 0):
        D = sympy.zeros(p, m_)
    if D.shape != (p, m_):
        raise ValueError(f"D is {D.rows} x {D.cols} but the model has {p} outputs and {m_} inputs; "
                         f"D must be {p} x {m_}.")
    free = set()
    for M in (A, B, C, D):
        free |= M.free_symbols
    parameters = tuple(sorted(free, key=lambda s: s.name))
    return _ExactModel(A, B, C, D, discrete, parameters)


# =============================================================================================
# Exact ranks
# =============================================================================================

def _rank(M: sympy.Matrix) -> int:
    """Exact rank: fraction-free elimination over the smallest exact domain holding M.

    Rational entries give the domain QQ (or ZZ); symbols give a polynomial ring or its field
    of fractions, so the rank is the generic rank; algebraic numbers fall back to sympy's
    expression domain, where zero tests use simplification.
    """
    if M.rows == 0 or M.cols == 0:
        return 0
    from sympy.polys.matrices import DomainMatrix

    return int(DomainMatrix.from_Matrix(M).rank())


def _krylov_basis(A: sympy.Matrix, B: sympy.Matrix) -> sympy.Matrix:
    """Columns spanning the reachable space: [B, AB, A^2 B, ...] up to the step where the
    rank stops growing (it never grows again after a step that adds nothing)."""
    n = A.rows
    import sympy

    if n == 0 or B.cols == 0:
        return sympy.zeros(n, 0)
    K = B
    rank = _rank(K)
    block = B
    for _ in range(n - 1):
        if rank == n:
            break
        block = A * block
        K_next = K.row_join(block)
        r_next = _rank(K_next)
        if r_next == rank:
            break
        K, rank = K_next, r_next
    return K


@dataclass(frozen=True)
class ExactPartSizes:
    """Exact dimensions of the four Kalman parts, and the derived dimensions.

    Attributes
    ----------
    controllable_observable : int
    controllable_unobservable : int
    uncontrollable_observable : int
    uncontrollable_unobservable : int
        The four part sizes, with the field names and meaning of :class:`plantcore.PartSizes`.
    controllable_dimension : int
        Dimension of the controllable (reachable) subspace R.
    unobservable_dimension : int
        Dimension of the unobservable subspace N.
    minimal_order : int
        Order of a minimal realization, ``controllable_observable``.
    n : int
        Number of states.
    parameters : tuple of str
        Names of the free symbols in the model; empty for a numeric model.  When not empty,
        all dimensions are generic (see :attr:`generic`).
    """

    controllable_observable: int
    controllable_unobservable: int
    uncontrollable_observable: int
    uncontrollable_unobservable: int
    controllable_dimension: int
    unobservable_dimension: int
    minimal_order: int
    n: int
    parameters: tuple = ()

    @property
    def generic(self) -> bool:
        """True when the model has symbols, so the ranks hold for almost all their values."""
        return bool(self.parameters)

    @property
    def part_sizes(self) -> PartSizes:
        """The four sizes as a :class:`plantcore.PartSizes`, comparable with
        ``plantcore.kalman_decomposition(model).sizes``."""
        return PartSizes(self.controllable_observable, self.controllable_unobservable,
                         self.uncontrollable_observable, self.uncontrollable_unobservable)


def _sizes(em: _ExactModel) -> ExactPartSizes:
    n = em.n
    K = _krylov_basis(em.A, em.B)            # columns span R
    O = _krylov_basis(em.A.T, em.C.T).T      # rows span the row space of O; kernel is N
    n_c = _rank(K)
    r_o = _rank(O)
    n1 = _rank(O * K) if K.cols and O.rows else 0
    n2 = n_c - n1                            # dim(R ∩ N)
    dim_n = n - r_o
    n4 = dim_n - n2
    n3 = n - n1 - n2 - n4
    return ExactPartSizes(n1, n2, n3, n4, n_c, dim_n, n1, n,
                          tuple(s.name for s in em.parameters))


def exact_part_sizes(model) -> ExactPartSizes:
    """The four Kalman part sizes, computed with exact ranks.

    Parameters
    ----------
    model : tuple (A, B, C[, D]) of exact entries, StateSpaceModel, or python-control object
        See the module documentation for the accepted entries (integers, fractions,
        rational strings, floats taken at their exact binary value, sympy expressions).

    Returns
    -------
    ExactPartSizes

    Raises
    ------
    ValueError
        An entry is not a finite real number, or the shapes do not fit (the message names the
        matrix).

    Notes
    -----
    With ``R`` the reachable subspace (Kalman 1963; Gilbert 1963) and ``N`` the unobservable
    subspace:

    * ``n_c = dim R = rank [B, AB, ..., A^{n-1} B]``;
    * ``dim N = n - rank O`` with ``O = [C; CA; ...; CA^{n-1}]``;
    * ``n1 = rank(O K)``: ``O K`` is the block Hankel matrix of Markov parameters
      ``C A^{i+j} B``, whose rank is the minimal order (Ho and Kalman 1966), and equals
      ``dim R - dim(R ∩ N)`` because the kernel of ``O`` is ``N``;
    * ``n2 = n_c - n1 = dim(R ∩ N)``, ``n4 = dim N - n2``, ``n3 = n - n1 - n2 - n4``.

    The Krylov matrices are built block by block and stop as soon as a block adds no rank
    (the chain of reachable spaces is then stationary).

    **Why Krylov matrices are acceptable here and not in floating point.**  Every rank here
    is decided exactly (fraction-free elimination over the rationals, or over the field of
    rational functions of the parameters), so the columns ``A^k B`` may be as badly scaled
    and nearly parallel as they like: no information is lost.  In floating point the same
    columns converge towards the dominant eigenvectors of ``A``; their condition grows
    geometrically with ``k`` and the singular values that carry well-separated or slow
    modes drop below rounding level, so a rank decided from them is wrong for many states
    (Paige 1981).  That is why the floating-point path uses orthogonal staircase forms.

    With symbols the ranks are generic: they hold except on a set of parameter values of
    measure zero, where the true ranks can be smaller.

    References
    ----------
    .. [1] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.
    .. [2] E. G. Gilbert, "Controllability and observability in multivariable control
       systems", J. SIAM Control, Ser. A, 1(2), 128-151, 1963.
    .. [3] B. L. Ho and R. E. Kalman, "Effective construction of linear state-variable models
       from input/output functions", Regelungstechnik 14(12), 545-548, 1966.
    .. [4] C. C. Paige, "Properties of numerical algorithms related to computing
       controllability", IEEE Trans. Automatic Control 26(1), 130-138, 1981.

    Examples
    --------
    Two identical first-order lags driven by the same input and summed at the output act as
    one lag; their difference is neither controllable nor observable:

    >>> from plantcore import exact_part_sizes
    >>> sizes = exact_part_sizes(([["-1/3", 0], [0, "-1/3"]], [[1], [1]], [[1, 1]]))
    >>> tuple(sizes.part_sizes), sizes.minimal_order
    ((1, 0, 0, 1), 1)
    """
    return _sizes(_exact_model(model))


def exact_minimal_order(model) -> int:
    """Order of a minimal realization, from the exact rank of ``O K`` (Ho and Kalman 1966).

    Parameters
    ----------
    model : tuple (A, B, C[, D]) of exact entries, StateSpaceModel, or python-control object
        As for :func:`exact_part_sizes`.

    Returns
    -------
    int
        The rank of the block Hankel matrix ``[C A^{i+j} B]`` of Markov parameters, which is
        the McMillan degree of the transfer matrix (generic when the model has symbols).

    References
    ----------
    .. [1] B. L. Ho and R. E. Kalman, "Effective construction of linear state-variable models
       from input/output functions", Regelungstechnik 14(12), 545-548, 1966.
    .. [2] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.

    Examples
    --------
    >>> import sympy
    >>> from plantcore import exact_minimal_order
    >>> a, b = sympy.symbols("a b")
    >>> exact_minimal_order(([[a, 0], [0, b]], [[1], [1]], [[1, 1]]))   # generic
    2
    >>> exact_minimal_order(([[a, 0], [0, a]], [[1], [1]], [[1, 1]]))   # a special case
    1
    """
    em = _exact_model(model)
    K = _krylov_basis(em.A, em.B)
    O = _krylov_basis(em.A.T, em.C.T).T
    return _rank(O * K) if K.cols and O.rows else 0


def exact_transfer_matrix(model, variable=None) -> sympy.Matrix:
    """The transfer matrix ``C (v I - A)^{-1} B + D`` as rational functions, exactly.

    Parameters
    ----------
    model : tuple (A, B, C[, D]) of exact entries, StateSpaceModel, or python-control object
        As for :func:`exact_part_sizes`.
    variable : sympy.Symbol or str, optional
        The frequency variable.  Default ``s``, or ``z`` for a discrete-time
        :class:`~plantcore.StateSpaceModel`.  It must not be one of the model's parameters.

    Returns
    -------
    sympy.Matrix, (p, m)
        Each entry a rational function in lowest terms (``sympy.cancel``): common factors of
        numerator and denominator, i.e. uncontrollable or unobservable poles, are removed.

    Notes
    -----
    The linear system ``(v I - A) X = B`` is solved by exact elimination over the field of
    rational functions in ``v`` (and the parameters), then ``G = C X + D``.  By the
    canonical structure theorem only the controllable, observable part contributes to ``G``
    (Kalman 1963; Gilbert 1963); for a SISO model the degree of the cancelled denominator
    is the minimal order.

    References
    ----------
    .. [1] R. E. Kalman, "Mathematical description of linear dynamical systems", J. SIAM
       Control, Ser. A, 1(2), 152-192, 1963.
    .. [2] E. G. Gilbert, "Controllability and observability in multivariable control
       systems", J. SIAM Control, Ser. A, 1(2), 128-151, 1963.

    Examples
    --------
    >>> import sympy
    >>> from plantcore import exact_transfer_matrix
    >>> s = sympy.Symbol("s")
    >>> G = exact_transfer_matrix(([[0, 1], [-2, -3]], [[0], [1]], [[1, 0]]), s)
    >>> sympy.cancel(G[0, 0] - 1 / (s**2 + 3*s + 2))
    0
    """
    import sympy
    from sympy.polys.matrices import DomainMatrix

    em = _exact_model(model)
    if variable is None:
        variable = sympy.Symbol("z" if em.is_discrete else "s")
    elif isinstance(variable, str):
        variable = sympy.Symbol(variable)
    elif not isinstance(variable, sympy.Symbol):
        raise ValueError(f"variable must be a sympy Symbol or a name, got {type(variable).__name__}.")
    if variable in em.parameters:
        raise ValueError(f"the variable {variable} is also a parameter of the model; choose "
                         "another name.")
    n, p, m = em.n, em.C.rows, em.B.cols
    if n == 0 or p == 0 or m == 0:
        return sympy.Matrix(em.D) if p and m else sympy.zeros(p, m)
    M = DomainMatrix.from_Matrix(variable * sympy.eye(n) - em.A)
    Bd = DomainMatrix.from_Matrix(em.B)
    M, Bd = M.unify(Bd)
    M, Bd = M.to_field(), Bd.to_field()
    X = M.lu_solve(Bd).to_Matrix()
    G = em.C * X + em.D
    return G.applyfunc(sympy.cancel)


# =============================================================================================
# Exact comparison of two transfer matrices by their Markov parameters
# =============================================================================================

@dataclass(frozen=True)
class ExactTransferComparison:
    """Whether two models have identical transfer matrices, decided in exact arithmetic.

    Attributes
    ----------
    equal : bool
        True when the feedthrough matrices and the first ``compared_markov_parameters``
        Markov parameters agree exactly, which proves that the transfer matrices are
        identical.
    differing_entries : tuple of (int, int)
        The (output, input) entries whose transfer functions differ.
    compared_markov_parameters : int
        How many Markov parameters were compared: the sum of the two orders (enough by the
        Cayley-Hamilton theorem), or fewer when a difference was found in every entry.
    first_difference : int or None
        The index k of the first Markov parameter ``C A^k B`` that differs (-1 for the
        feedthrough ``D``); None when the transfer matrices are equal.
    method : str
        ``"Markov parameters in exact integer arithmetic"`` or, for models with symbolic
        parameters, ``"rational functions (sympy)"``.
    """

    equal: bool
    differing_entries: tuple
    compared_markov_parameters: int
    first_difference: int | None
    method: str


def _integer_matrix(M) -> tuple[list, int]:
    """``M = N / d`` with ``N`` a list of rows of Python ints and ``d`` a positive int.

    ``M`` is a sympy matrix of rational numbers; raises ``TypeError`` for anything else
    (symbols, algebraic numbers), so the caller can fall back to rational functions.
    """
    import math as _math

    import sympy

    rows, cols = M.shape
    entries = []
    for value in M:
        if not isinstance(value, sympy.Rational):
            raise TypeError("not a rational number")
        entries.append(value)
    d = 1
    for value in entries:
        d = _math.lcm(d, int(value.q))
    N = [[int(entries[i * cols + j].p) * (d // int(entries[i * cols + j].q))
          for j in range(cols)] for i in range(rows)]
    return N, d


def _times(M, X):
    """The product of two integer matrices given as lists of rows."""
    columns = list(zip(*X)) if X else []
    return [[sum(a * b for a, b in zip(row, col)) for col in columns] for row in M]


def _markov_integers(em: _ExactModel, count: int, progress=None):
    """``C A^k B`` for k < count as (integer matrix, denominator) pairs, exactly."""
    A, dA = _integer_matrix(em.A)
    B, dB = _integer_matrix(em.B)
    C, dC = _integer_matrix(em.C)
    out = []
    X, dX = B, dB  # A^k B = X / dX
    for k in range(count):
        out.append((_times(C, X), dC * dX))
        if k + 1 < count:
            X, dX = _times(A, X), dA * dX
        if progress is not None:
            progress.step(f"Markov parameter {k + 1}")
    return out


def exact_transfer_comparison(a, b, *, progress=None) -> ExactTransferComparison:
    """Decide exactly whether two models have the same transfer matrix.

    Two realizations with ``n_a`` and ``n_b`` states have the same transfer matrix exactly
    when their feedthrough matrices agree and their Markov parameters ``C A^k B`` agree for
    ``k = 0, ..., n_a + n_b - 1``: the difference system has at most ``n_a + n_b`` states, so
    by the Cayley-Hamilton theorem every later Markov parameter is a combination of these
    (R. E. Kalman, "Mathematical description of linear dynamical systems", 1963; the
    realization argument of B. L. Ho and R. E. Kalman, "Effective construction of linear
    state-variable models from input/output functions", 1966).  The same holds entry by
    entry, and in discrete time (the Markov parameters are then the impulse response).

    Every entry is taken at its exact value (a double is the rational number it holds) and
    each matrix is written as an integer matrix over one common denominator, so the
    comparison is plain integer arithmetic: no rounding, no rank decision, and for 30 states
    a fraction of a second where elimination over rational functions takes minutes.  Models
    with symbolic parameters fall back to :func:`exact_transfer_matrix`.

    Parameters
    ----------
    a, b : model
        As for :func:`exact_part_sizes` (tuples of exact entries, StateSpaceModel, ...).
    progress : plantcore.core.progress.Progress, optional
        Stepped once per Markov parameter of each model.

    Returns
    -------
    ExactTransferComparison

    Examples
    --------
    >>> from plantcore.structure.exact import exact_transfer_comparison
    >>> one = ([[-1, 0], [0, -2]], [[1], [0]], [[1, 1]])      # the mode -2 is uncontrollable
    >>> exact_transfer_comparison(one, ([[-1]], [[1]], [[1]])).equal
    True
    >>> r = exact_transfer_comparison(one, ([[-1]], [[1]], [["1.000001"]]))
    >>> r.equal, r.differing_entries, r.first_difference
    (False, ((0, 0),), 0)
    """
    import sympy

    ea, eb = _exact_model(a), _exact_model(b)
    if (ea.C.rows, ea.B.cols) != (eb.C.rows, eb.B.cols):
        raise ValueError(f"the models have {ea.C.rows} x {ea.B.cols} and {eb.C.rows} x "
                         f"{eb.B.cols} transfer matrices; they cannot be compared.")
    p, m = ea.C.rows, ea.B.cols
    count = ea.n + eb.n
    try:
        differing = {(i, j) for i in range(p) for j in range(m) if ea.D[i, j] != eb.D[i, j]}
        first = -1 if differing else None
        markov_a = _markov_integers(ea, count, progress) if ea.n else []
        markov_b = _markov_integers(eb, count, progress) if eb.n else []
    except TypeError:
        variable = sympy.Symbol("s")
        Ga, Gb = exact_transfer_matrix(a, variable), exact_transfer_matrix(b, variable)
        differing = tuple((i, j) for i in range(p) for j in range(m)
                          if sympy.cancel(Ga[i, j] - Gb[i, j]) != 0)
        return ExactTransferComparison(not differing, differing, 0, None,
                                       "rational functions (sympy)")
    zero = [[0] * m for _ in range(p)]
    compared = 0
    for k in range(count):
        if len(differing) == p * m:
            break
        Ma, da = markov_a[k] if markov_a else (zero, 1)
        Mb, db = markov_b[k] if markov_b else (zero, 1)
        compared = k + 1
        for i in range(p):
            for j in range(m):
                if (i, j) not in differing and Ma[i][j] * db != Mb[i][j] * da:
                    differing.add((i, j))
                    first = k if first is None else first
    return ExactTransferComparison(not differing, tuple(sorted(differing)), compared, first,
                                   "Markov parameters in exact integer arithmetic")
