"""Observability rank of a symbolic nonlinear model from stacked Lie derivatives.

See :func:`nonlinear_observability` for the method, its references and how it can fail.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.rank import any_fragile, decide_rank, resolve_tolerance

__all__ = ["NonlinearObservability", "nonlinear_observability"]


@dataclass(frozen=True)
class NonlinearObservability:
    """Observability rank of a symbolic nonlinear model at a point.

    Attributes
    ----------
    states : tuple of sympy.Symbol
        The state symbols, in order.
    functions : sympy.Matrix
        The stacked observation functions: ``h``, then ``L_f h, L_f^2 h, ...`` (continuous
        time) or ``h(f(x)), h(f(f(x))), ...`` (discrete time), ``p (order + 1)`` rows.
    jacobian : sympy.Matrix
        Their Jacobian with respect to the states, ``(p (order + 1), n)``, symbolic.
    order : int
        The highest Lie derivative (or number of compositions) used.
    discrete : bool
        Whether ``f`` is a discrete-time map.
    point : dict
        Symbol -> value: where the rank was evaluated (states, inputs and parameters).
    generic_point : bool
        True when no point was given and a pseudo-random one was drawn (seeded).
    exact : bool
        True when the Jacobian at the point is rational and its rank was decided exactly
        (sympy, rational arithmetic); False for the numeric SVD path.
    rank : int
        Rank of the Jacobian at the point.
    n : int
        Number of states.
    unobservable_dimension : int
        ``n - rank``.
    unobservable_directions : (n, n - rank) ndarray
        Orthonormal basis of the null space of the Jacobian at the point: the directions in
        which the stacked observation functions do not change to first order.
    exact_directions : sympy.Matrix or None
        In the exact path, a rational basis of the same null space (``n x (n - rank)``).
    singular_values : (n,) ndarray
        Singular values of the Jacobian at the point (floating point), zero-padded to ``n``;
        informative in the exact path too.
    decisions : tuple of RankDecision
        The numeric rank decision (empty in the exact path, which needs no tolerance).
    fragile : bool
        True when the numeric decision lies within a factor 100 of the tolerance.
    notes : tuple of str
        Plain sentences on how to read the result.
    """

    states: tuple
    functions: object = field(repr=False)
    jacobian: object = field(repr=False)
    order: int
    discrete: bool
    point: dict = field(repr=False)
    generic_point: bool
    exact: bool
    rank: int
    n: int
    unobservable_dimension: int
    unobservable_directions: np.ndarray = field(repr=False)
    exact_directions: object = field(repr=False)
    singular_values: np.ndarray = field(repr=False)
    decisions: tuple = field(repr=False)
    fragile: bool
    notes: tuple = field(repr=False)


def _sympy_column(value, name: str):
    import sympy

    if isinstance(value, sympy.MatrixBase):
        items = list(value)
    elif isinstance(value, (list, tuple)):
        items = []
        for item in value:
            nested = isinstance(item, (sympy.MatrixBase, list, tuple))
            items.extend(list(item) if nested else [item])
    else:
        items = [value]
    out = []
    for i, item in enumerate(items):
        try:
            out.append(sympy.sympify(item, strict=True))
        except (sympy.SympifyError, TypeError, ValueError):
            raise ValueError(f"{name}[{i}] is not a sympy expression (got {item!r}); build the "
                             "model from sympy symbols.") from None
    return sympy.Matrix(len(out), 1, out)


def _symbols(value, name: str):
    import sympy

    if value is None:
        return ()
    if isinstance(value, sympy.Symbol):
        value = [value]
    items = tuple(value)
    for item in items:
        if not isinstance(item, sympy.Symbol):
            raise ValueError(f"{name} must be sympy Symbols, got {item!r} "
                             f"({type(item).__name__}).")
    if len(set(items)) != len(items):
        raise ValueError(f"{name} lists a symbol twice.")
    return items


def _is_exact_number(value) -> bool:
    import fractions

    import sympy

    if isinstance(value, bool):
        return False
    if isinstance(value, (int, fractions.Fraction)):
        return True
    return isinstance(value, sympy.Rational)


def _resolve_point(point, needed, states, inputs, seed=20240917):
    import fractions

    import sympy

    by_name = {str(s): s for s in needed}
    values = {}
    generic = point is None
    if generic:
        rng = np.random.default_rng(seed)
        for s in sorted(needed, key=str):
            values[s] = float(rng.uniform(0.5, 1.5))
        return values, True
    if isinstance(point, dict):
        for key, val in point.items():
            sym = key if isinstance(key, sympy.Symbol) else by_name.get(str(key))
            if sym is None or sym not in needed:
                known = ", ".join(sorted(by_name)) or "none"
                raise ValueError(f"point gives a value for {key!s}, which is not a state, input "
                                 f"or parameter of the model (known: {known}).")
            values[sym] = val
    else:
        seq = list(point)
        order = list(states) + list(inputs)
        if len(seq) not in (len(states), len(order)):
            raise ValueError(f"point as a sequence needs {len(states)} state values (or "
                             f"{len(order)} with the inputs), got {len(seq)}; use a dict to "
                             "give parameters.")
        values = dict(zip(order, seq))
    missing = [str(s) for s in needed if s not in values]
    if missing:
        raise ValueError(f"point has no value for {', '.join(sorted(missing))}; give every state, "
                         "input and parameter that appears in f and h.")
    clean = {}
    for sym, val in values.items():
        if _is_exact_number(val):
            clean[sym] = sympy.Rational(val.numerator, val.denominator) if isinstance(
                val, fractions.Fraction) else sympy.Rational(val)
            continue
        try:
            num = float(val)
        except (TypeError, ValueError):
            raise ValueError(f"point value for {sym} must be a real number, got {val!r}.") from None
        if not math.isfinite(num):
            raise ValueError(f"point value for {sym} is {num!r}; give a finite number.")
        clean[sym] = num
    return clean, False


def nonlinear_observability(f, h, states, *, inputs=None, point=None, order=None,
                            discrete=False, tol=None) -> NonlinearObservability:
    """Observability rank of a nonlinear model from stacked Lie derivatives or compositions.

    Parameters
    ----------
    f : sequence of sympy expressions, length n
        Continuous time: the vector field, ``dx/dt = f(x, u)``.  Discrete time
        (``discrete=True``): the map ``x[k+1] = f(x[k], u)``.
    h : sympy expression or sequence of them, length p
        The measurement ``y = h(x, u)``.
    states : sequence of sympy.Symbol, length n
        The state symbols, in the order of ``f``.
    inputs : sequence of sympy.Symbol, optional
        Input symbols.  Inputs are held constant at their values in ``point`` (see Notes).
        Any other free symbol of ``f`` and ``h`` is a parameter and needs a value in
        ``point``.
    point : dict or sequence, optional
        Where to evaluate the rank: a dict mapping symbols (or their names) to values, or a
        sequence of the state values (followed by the input values).  Integers, fractions and
        sympy rationals keep the evaluation exact when every Jacobian entry becomes rational.
        Default: a generic point drawn from a seeded generator (values in [0.5, 1.5]); the
        rank there equals the generic rank with probability one.
    order : int, optional
        Highest Lie derivative (or number of compositions) to stack, all of them computed.
        Default: stop as soon as the rank at the point stops growing (see Notes), and at
        ``n - 1`` at the latest.
    discrete : bool, optional
        Use compositions ``h(f(x))``, ``h(f(f(x)))``, ... instead of Lie derivatives.
    tol : float, optional
        Relative rank tolerance for the numeric path (default as
        :func:`plantcore.core.rank.resolve_tolerance`), relative to the largest singular value of
        the Jacobian at the point.

    Returns
    -------
    NonlinearObservability

    Raises
    ------
    ValueError
        Non-sympy input, sizes that do not fit, a point missing values, a Jacobian that is
        not finite at the point.

    Notes
    -----
    Hermann and Krener [1]_ call a system locally weakly observable at ``x0`` when the
    observation space (the span of ``h`` and its repeated Lie derivatives along the
    dynamics) has differentials of rank ``n`` at ``x0`` (the observability rank condition).
    Its null space there is the set of directions in which no stacked observation function
    changes to first order: the locally unobservable directions.  For discrete-time maps the
    compositions ``h``, ``h o f``, ``h o f o f``, ... play the same role.  Lie derivatives are
    ``L_f phi = (d phi / dx) f``, formed symbolically (sympy) without simplification.

    **Order.**  The codistributions ``Omega_k`` spanned by the differentials up to order
    ``k`` grow with ``k``; once ``Omega_{k+1} = Omega_k`` near a point, ``Omega_k`` is
    invariant under the Lie derivative along ``f`` and no higher order adds anything (the
    observability codistribution algorithm; A. Isidori, *Nonlinear Control Systems*, 3rd ed.,
    Springer, 1995, ch. 1, from memory).  At a regular point (where these ranks are locally
    constant, which holds at generic points) equal ranks at the point mean equal
    codistributions, so the default stops there: this also keeps the symbolic expressions,
    which swell quickly with the order, small.  At a singular point give ``order``
    explicitly.  ``n - 1`` is the last order needed by the same argument.

    **Rank at the point.**  When every entry of the Jacobian at the point is rational, its
    rank and null space are computed exactly in rational arithmetic (sympy).  Otherwise the
    Jacobian is evaluated in floating point and the rank is decided from its singular values,
    relative to the largest, with :func:`plantcore.core.rank.decide_rank`.  Rows are deliberately
    not normalized: a derivative that vanishes symbolically but evaluates to rounding noise
    (terms that cancel) would otherwise count as a direction, and a weak coupling (say
    ``1e-9`` relative) would hide instead of being flagged as fragile.  Derivatives of high
    order carry powers of the inputs and of the state's size; choose units in which states
    and inputs are of order one when they are not.

    **Inputs.**  Inputs are held constant at their values in the point, so the rank is that
    of the observation space generated with that constant input.  A system that needs
    switching inputs to become observable shows a lower rank here than its full observation
    space; evaluate at several input values to explore this.

    References
    ----------
    .. [1] R. Hermann and A. J. Krener, "Nonlinear controllability and observability", IEEE
       Transactions on Automatic Control 22(5), 728-740, 1977.  doi:10.1109/TAC.1977.1101601

    Examples
    --------
    A cart measured by its distance to a wall it does not know the position of: only the
    difference of the two positions is seen.

    >>> import sympy
    >>> p, v, w = sympy.symbols("p v w")
    >>> result = nonlinear_observability([v, 0, 0], [w - p], [p, v, w], point=[1, 2, 5])
    >>> result.exact, result.rank, result.unobservable_dimension
    (True, 2, 1)
    >>> list(result.exact_directions)
    [1, 0, 1]
    """
    import sympy

    x = _symbols(states, "states")
    u = _symbols(inputs, "inputs")
    if set(x) & set(u):
        raise ValueError("a symbol is listed both as a state and as an input.")
    n = len(x)
    fv = _sympy_column(f, "f")
    hv = _sympy_column(h, "h")
    if fv.shape[0] != n:
        raise ValueError(f"f has {fv.shape[0]} entries but there are {n} states; give one entry "
                         "per state.")
    automatic = order is None
    if not automatic and (isinstance(order, bool) or not isinstance(order, (int, np.integer))
                          or order < 0):
        raise ValueError(f"order must be a non-negative integer, got {order!r}.")
    max_order = max(n - 1, 0) if automatic else int(order)

    free = set(fv.free_symbols) | set(hv.free_symbols)
    needed = set(x) | set(u) | free
    values, generic = _resolve_point(point, needed, x, u)
    syms = sorted(needed, key=str)
    numbers = [np.float64(values[s]) for s in syms]   # numpy scalars: 1/0 gives inf, not an error
    tol_rel = resolve_tolerance(tol, n)
    notes = []
    if generic:
        notes.append("No point given: the rank was evaluated at a pseudo-random generic point "
                     "(seeded); it equals the generic rank with probability one.")

    exact = n > 0 and all(isinstance(v, sympy.Rational) for v in values.values())
    X = sympy.Matrix(x)
    blocks, jacobians, exact_blocks, numeric_blocks = [], [], [], []
    decisions = []
    previous_rank = -1
    rank = 0
    block = hv
    k = 0
    while True:
        J = block.jacobian(X) if n else sympy.zeros(block.shape[0], 0)
        blocks.append(block)
        jacobians.append(J)
        if n and J.shape[0]:
            fun = sympy.lambdify(syms, J, modules="numpy", cse=True)
            with np.errstate(all="ignore"):
                try:
                    Jn = np.array(fun(*numbers), dtype=float).reshape(J.shape)
                except (ArithmeticError, ValueError, TypeError):
                    Jn = np.full(J.shape, np.nan)
        else:
            Jn = np.zeros(J.shape)
        numeric_blocks.append(Jn)
        if exact:
            Je = J.xreplace(values)
            if all(entry.is_Rational for entry in Je):
                exact_blocks.append(Je)
            else:
                exact = False
        if not exact and not np.isfinite(Jn).all():
            i, j = np.argwhere(~np.isfinite(Jn))[0]
            raise ValueError(f"the observability Jacobian is not finite (or not real) at the point "
                             f"(order {k}, row {i}, state {x[j]}); choose a point where f and h "
                             "are smooth.")
        if exact:
            rank = int(sympy.Matrix.vstack(*exact_blocks).rank())
        elif n:
            stacked = np.vstack(numeric_blocks)
            sv = np.zeros(n)
            if stacked.shape[0]:
                values_k = np.linalg.svd(stacked, compute_uv=False)
                sv[:values_k.size] = values_k        # zero-padded: n values examined
            decision = decide_rank(sv, float(sv[0]) if sv.size else 0.0, tol_rel,
                                   f"observation space through order {k}")
            decisions.append(decision)
            rank = decision.rank
        if k >= max_order or (automatic and (rank == n or rank == previous_rank)):
            break
        previous_rank = rank
        block = block.xreplace(dict(zip(x, fv))) if discrete else J * fv
        k += 1
    if automatic and k < max(n - 1, 0) and rank < n:
        notes.append(f"Stopped at order {k}: the rank did not grow from order {k - 1}, so the "
                     "observation codistribution has stabilized (valid at a regular point; give "
                     "order= explicitly to go further).")

    functions = sympy.Matrix.vstack(*blocks)
    jacobian = sympy.Matrix.vstack(*jacobians)
    stacked = np.vstack(numeric_blocks) if numeric_blocks else np.zeros((0, n))
    sv = np.zeros(n)
    if stacked.shape[0] and n and np.isfinite(stacked).all():
        _, values_all, Vt = np.linalg.svd(stacked, full_matrices=True)
        sv[:values_all.size] = values_all
    else:
        Vt = np.eye(n)
    if exact:
        basis = sympy.Matrix.vstack(*exact_blocks).nullspace()
        exact_dirs = sympy.Matrix.hstack(*basis) if basis else sympy.zeros(n, 0)
        directions = np.array(exact_dirs.tolist(), dtype=float).reshape(n, n - rank)
        if directions.shape[1]:
            directions = np.linalg.qr(directions)[0]
        decisions = []
    else:
        exact_dirs = None
        directions = Vt[rank:].T.copy() if n else np.zeros((0, 0))
    decisions = tuple(decisions)
    return NonlinearObservability(
        states=x, functions=functions, jacobian=jacobian, order=k, discrete=bool(discrete),
        point=values, generic_point=generic, exact=bool(exact), rank=rank, n=n,
        unobservable_dimension=n - rank, unobservable_directions=directions,
        exact_directions=exact_dirs, singular_values=sv, decisions=decisions,
        fragile=any_fragile(decisions), notes=tuple(notes))
