"""The sweep files' expression language: a small, safe subset of arithmetic.

Matrix entries of a sweep specification may be expressions in the sweep parameters.  An
expression is parsed with :mod:`ast` and checked node by node against a short allow-list
(numbers, parameter names, ``+ - * / **`` and the functions of :data:`FUNCTIONS`) before it
is turned into a sympy expression; nothing is ever evaluated by Python's ``eval``, attribute
access, subscripts, calls of other names and oversized numbers or trees are refused with an
:class:`ExpressionError` that says what is allowed.  :class:`ModelFromExpressions` builds one
model per operating point from such entries.
"""

from __future__ import annotations

import ast
import functools
import math
from numbers import Real

import numpy as np

from plantcore.core.names import lookalike_note, spelled_out

__all__ = ["FUNCTIONS", "NAMED_CONSTANTS", "ExpressionError", "parse_expression", "ModelFromExpressions"]


#: Function names allowed in expressions, with their number of arguments.
FUNCTIONS = {
    "sin": 1, "cos": 1, "tan": 1, "asin": 1, "acos": 1, "atan": 1, "atan2": 2,
    "sinh": 1, "cosh": 1, "tanh": 1, "exp": 1, "log": 1, "log10": 1, "sqrt": 1, "abs": 1,
}

#: Named constants allowed in expressions.
NAMED_CONSTANTS = ("pi",)

_MAX_EXPRESSION_LENGTH = 500

_MAX_NODES = 200

_MAX_INTEGER = 10 ** 300


class ExpressionError(ValueError):
    """An expression is not allowed or not valid; the message says why, in one sentence."""

_BINARY = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}

_UNARY = {ast.UAdd: "+", ast.USub: "-"}

_REFUSED = {
    ast.Attribute: "attribute access ('.') is not allowed",
    ast.Subscript: "subscripts ('[...]') are not allowed",
    ast.Lambda: "lambda is not allowed",
    ast.Compare: "comparisons are not allowed",
    ast.BoolOp: "'and' / 'or' are not allowed",
    ast.IfExp: "'if ... else' is not allowed",
    ast.Starred: "'*' unpacking is not allowed",
    ast.NamedExpr: "':=' is not allowed",
    ast.List: "lists are not allowed",
    ast.Tuple: "tuples are not allowed",
    ast.Dict: "dicts are not allowed",
    ast.Set: "sets are not allowed",
    ast.JoinedStr: "strings are not allowed",
    ast.ListComp: "comprehensions are not allowed",
    ast.SetComp: "comprehensions are not allowed",
    ast.DictComp: "comprehensions are not allowed",
    ast.GeneratorExp: "comprehensions are not allowed",
    ast.Await: "'await' is not allowed",
    ast.Yield: "'yield' is not allowed",
    ast.YieldFrom: "'yield' is not allowed",
}


def _allowed_summary() -> str:
    return ("only numbers, parameter names, + - * / ** and the functions "
            + " ".join(FUNCTIONS) + " are allowed")


class _Checker:
    """Walks a Python expression tree and refuses every node outside the whitelist."""

    def __init__(self, names):
        self.names = set(names)
        self.nodes = 0

    def check(self, node) -> None:
        self.nodes += 1
        if self.nodes > _MAX_NODES:
            raise ExpressionError(f"the expression is too long (more than {_MAX_NODES} terms).")
        if isinstance(node, ast.Expression):
            return self.check(node.body)
        if isinstance(node, ast.Constant):
            value = node.value
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ExpressionError(f"the constant {value!r} is not a number; "
                                      + _allowed_summary() + ".")
            if isinstance(value, int) and abs(value) > _MAX_INTEGER:
                raise ExpressionError("an integer in the expression is too large.")
            if isinstance(value, float) and not math.isfinite(value):
                raise ExpressionError("a number in the expression is not finite.")
            return None
        if isinstance(node, ast.BinOp):
            if type(node.op) not in _BINARY:
                raise ExpressionError(f"the operator {type(node.op).__name__} is not allowed; "
                                      + _allowed_summary() + ".")
            self.check(node.left)
            return self.check(node.right)
        if isinstance(node, ast.UnaryOp):
            if type(node.op) not in _UNARY:
                raise ExpressionError(f"the operator {type(node.op).__name__} is not allowed; "
                                      + _allowed_summary() + ".")
            return self.check(node.operand)
        if isinstance(node, ast.Name):
            return self._check_name(node.id, as_function=False)
        if isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name):
                if isinstance(node.func, ast.Attribute):
                    raise ExpressionError("attribute access ('.') is not allowed; "
                                          + _allowed_summary() + ".")
                raise ExpressionError("only the listed functions may be called; "
                                      + _allowed_summary() + ".")
            self._check_name(node.func.id, as_function=True)
            if node.keywords:
                raise ExpressionError(f"{node.func.id}() takes no keyword arguments.")
            arity = FUNCTIONS[node.func.id]
            if len(node.args) != arity:
                raise ExpressionError(f"{node.func.id}() takes {arity} argument(s), "
                                      f"got {len(node.args)}.")
            for arg in node.args:
                self.check(arg)
            return None
        for kind, problem in _REFUSED.items():
            if isinstance(node, kind):
                raise ExpressionError(problem + "; " + _allowed_summary() + ".")
        raise ExpressionError(f"{type(node).__name__} is not allowed; " + _allowed_summary() + ".")

    def _check_name(self, name: str, *, as_function: bool) -> None:
        if name.startswith("_"):
            raise ExpressionError(f"the name {name!r} is not allowed (names starting with an "
                                  "underscore are refused).")
        if as_function:
            if name in FUNCTIONS:
                return
            if name in self.names or name in NAMED_CONSTANTS:
                raise ExpressionError(f"{name!r} is a value, not a function.")
            raise ExpressionError(f"unknown function {spelled_out(name)}"
                                  f"{lookalike_note(name, FUNCTIONS)}; the functions allowed are "
                                  + " ".join(FUNCTIONS) + ".")
        if name in self.names or name in NAMED_CONSTANTS:
            return
        if name in FUNCTIONS:
            raise ExpressionError(f"the function {name!r} must be called, e.g. {name}(x).")
        known = ", ".join(sorted(self.names)) or "none"
        note = lookalike_note(name, [*self.names, *NAMED_CONSTANTS, *FUNCTIONS])
        raise ExpressionError(f"unknown name {spelled_out(name)}{note}; the declared parameters "
                              f"and constants are: {known}.")


def _sympy_namespace() -> dict:
    import sympy

    functions = {
        "sin": sympy.sin, "cos": sympy.cos, "tan": sympy.tan, "asin": sympy.asin,
        "acos": sympy.acos, "atan": sympy.atan, "atan2": sympy.atan2, "sinh": sympy.sinh,
        "cosh": sympy.cosh, "tanh": sympy.tanh, "exp": sympy.exp, "log": sympy.log,
        "log10": lambda x: sympy.log(x, 10), "sqrt": sympy.sqrt, "abs": sympy.Abs,
    }
    assert set(functions) == set(FUNCTIONS)
    # What sympy's own transformations emit (number and symbol wrappers, unevaluated
    # arithmetic), the whitelisted functions and pi; no builtins at all.
    namespace = {"__builtins__": {}, "Integer": sympy.Integer, "Float": sympy.Float,
                 "Rational": sympy.Rational, "Symbol": sympy.Symbol, "Add": sympy.Add,
                 "Mul": sympy.Mul, "Pow": sympy.Pow, "pi": sympy.pi}
    namespace.update(functions)
    return namespace


def parse_expression(text: str, names):
    """Check an arithmetic expression against the whitelist and return it as a sympy expression.

    Parameters
    ----------
    text : str
        The expression, e.g. ``"gravity * load_mass / trolley_mass"``.
    names : iterable of str
        The parameter and constant names the expression may use.

    Returns
    -------
    sympy.Expr
        The unevaluated expression, in the symbols of ``names``.

    Raises
    ------
    ExpressionError
        When the text is not a valid expression or uses anything outside the whitelist
        (see the module documentation); the message is one sentence.

    Examples
    --------
    >>> from plantcore.sweeps.expressions import parse_expression
    >>> str(parse_expression("2 * sin(angle) / mass", ["angle", "mass"]))
    '2*sin(angle)/mass'
    >>> parse_expression("mass.__class__", ["mass"])
    Traceback (most recent call last):
    ...
    plantcore.sweeps.expressions.ExpressionError: attribute access ('.') is not allowed; only numbers, parameter names, + - * / ** and the functions sin cos tan asin acos atan atan2 sinh cosh tanh exp log log10 sqrt abs are allowed.
    """
    import sympy
    from sympy.parsing.sympy_parser import parse_expr, standard_transformations

    if not isinstance(text, str):
        raise ExpressionError(f"an expression must be a string, got {type(text).__name__}.")
    if len(text) > _MAX_EXPRESSION_LENGTH:
        raise ExpressionError(f"the expression is longer than {_MAX_EXPRESSION_LENGTH} characters.")
    if not text.strip():
        raise ExpressionError("the expression is empty.")
    if "\x00" in text:
        raise ExpressionError("the expression contains a NUL character.")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        where = f" at column {exc.offset}" if exc.offset else ""
        raise ExpressionError(f"{text.strip()!r} is not a valid arithmetic expression "
                              f"(syntax error{where}).") from None
    except (ValueError, RecursionError, MemoryError):
        raise ExpressionError(f"{text.strip()[:40]!r} is not a valid arithmetic expression.") from None
    names = list(names)
    # Python reads identifiers in NFKC form (a fullwidth "ｐｉ" becomes "pi"); names are
    # compared as written, so every name is put back as it appears in the text.
    source = text.strip()
    for node in ast.walk(tree):
        if isinstance(node, ast.Name):
            node.id = ast.get_source_segment(source, node) or node.id
    _Checker(names).check(tree)
    # Rename every parameter to an internal name that cannot collide with the names sympy's
    # own transformations emit (a parameter called ``Mul`` or ``Symbol`` would otherwise
    # shadow them); the symbols keep the user's names.
    internal = {name: f"_v{k}" for k, name in enumerate(names)}
    for node in ast.walk(tree):
        if isinstance(node, ast.Name) and node.id in internal:
            node.id = internal[node.id]
    canonical = ast.unparse(tree)
    local = {internal[name]: sympy.Symbol(name) for name in names}
    try:
        expression = parse_expr(canonical, local_dict=local, global_dict=_sympy_namespace(),
                                transformations=standard_transformations, evaluate=False)
    except Exception as exc:  # anything sympy refuses, in one sentence
        raise ExpressionError(f"sympy could not read {text.strip()!r} "
                              f"({type(exc).__name__}: {' '.join(str(exc).split())}).") from None
    _check_printable(expression, source)
    return expression


_NOT_FINITE_ATOMS = ("ComplexInfinity", "Infinity", "NegativeInfinity", "NaN")


def _check_printable(expression, source: str) -> None:
    """Refuse an expression that cannot become numpy code (e.g. ``k/0``, infinite everywhere)."""
    import sympy

    try:
        # Rebuilding the tree with fresh symbols (as sympy.lambdify does) evaluates the
        # constant parts: 1/0 becomes complex infinity here, not at every point later.
        rebuilt = expression.xreplace({symbol: sympy.Dummy() for symbol in expression.free_symbols})
        if rebuilt.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise KeyError("ComplexInfinity")
        _float_printer()().doprint(rebuilt)
    except KeyError as exc:
        if exc.args and exc.args[0] in _NOT_FINITE_ATOMS:
            raise ExpressionError(f"{source!r} divides by zero or holds another part that is "
                                  "infinite or undefined for every value of the parameters."
                                  ) from None
        raise ExpressionError(f"{source!r} cannot be turned into arithmetic (KeyError: "
                              f"{exc}).") from None
    except Exception as exc:
        raise ExpressionError(f"{source!r} cannot be turned into arithmetic "
                              f"({type(exc).__name__}: {' '.join(str(exc).split())}).") from None


@functools.lru_cache(maxsize=1)
def _float_printer():
    from sympy.printing.numpy import NumPyPrinter

    class _FloatPrinter(NumPyPrinter):
        """Prints every number as a Python float literal, so the compiled code never does
        integer arithmetic of unbounded size and loses no digit of a decimal constant."""

        def _print_Float(self, expr):
            return repr(float(expr))

        def _print_Integer(self, expr):
            return repr(float(expr))

        def _print_Rational(self, expr):
            return f"({float(expr.p)!r}/{float(expr.q)!r})"

    return _FloatPrinter


class ModelFromExpressions:
    """A picklable ``build`` function: a parameter dict to a :class:`plantcore.StateSpaceModel`.

    Parameters
    ----------
    matrices : dict
        ``{"A": rows, "B": rows, "C": rows, "D": rows or None}`` with every entry a number
        or an expression string (see the module documentation).
    parameters : sequence of str
        The parameter names a point must give.
    constants : dict, optional
        Fixed named numbers usable in expressions.
    dt, states, inputs, outputs, name
        As for :class:`plantcore.StateSpaceModel`.

    Notes
    -----
    Expressions are checked when the object is made and compiled on first use in each
    process (the compiled function is not pickled; the expression text is).  Calling with
    a point evaluates every expression; an entry that evaluates to a non-finite or complex
    value raises ``ValueError`` naming the entry, which :func:`plantcore.sweeps.sweep` records as
    that point's error.

    Examples
    --------
    >>> from plantcore.sweeps.expressions import ModelFromExpressions
    >>> build = ModelFromExpressions({"A": [["-k / m"]], "B": [[1]], "C": [[1]]}, ["k", "m"])
    >>> float(build({"k": 6.0, "m": 2.0}).A[0, 0])
    -3.0
    """

    def __init__(self, matrices, parameters, constants=None, *, dt=None, states=None,
                 inputs=None, outputs=None, name=None):
        self.parameters = tuple(parameters)
        self.constants = dict(constants or {})
        self.dt, self.states, self.inputs, self.outputs, self.name = dt, states, inputs, outputs, name
        self.matrices = {key: None if rows is None else [list(r) for r in rows]
                         for key, rows in matrices.items()}
        names = self.parameters + tuple(self.constants)
        self._entries = []  # (matrix, row, column, text)
        for key, rows in self.matrices.items():
            for i, row in enumerate(rows or []):
                for j, value in enumerate(row):
                    if isinstance(value, str):
                        self._entries.append((key, i, j, value))
        self._expressions = [self._checked(key, i, j, text, names)
                             for key, i, j, text in self._entries]
        self._compiled = None

    @staticmethod
    def _checked(key, i, j, text, names):
        try:
            return parse_expression(text, names)
        except ExpressionError as exc:
            raise ExpressionError(f"{key}[{i + 1}][{j + 1}]: {exc}") from None

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_compiled"] = None
        state["_expressions"] = None  # re-parsed from the text on first use
        return state

    def _compile(self):
        import sympy

        if self._expressions is None:
            names = self.parameters + tuple(self.constants)
            self._expressions = [parse_expression(text, names) for *_, text in self._entries]
        symbols = [sympy.Symbol(name) for name in self.parameters + tuple(self.constants)]
        function = sympy.lambdify(symbols, list(self._expressions), modules="numpy",
                                  printer=_float_printer(), dummify=True)
        templates = {}
        for key, rows in self.matrices.items():
            if rows is None:
                templates[key] = None
                continue
            width = len(rows[0]) if rows else 0
            array = np.zeros((len(rows), width))
            for i, row in enumerate(rows):
                for j, value in enumerate(row):
                    if not isinstance(value, str):
                        array[i, j] = float(value)
            templates[key] = array
        self._compiled = (function, templates)
        return self._compiled

    def __call__(self, point) -> "StateSpaceModel":
        from plantcore.core.model import StateSpaceModel

        function, templates = self._compiled or self._compile()
        missing = [p for p in self.parameters if p not in point]
        if missing:
            raise ValueError(f"the point gives no value for the parameter {missing[0]!r}.")
        args = []
        for p in self.parameters:
            value = point[p]
            if isinstance(value, bool) or not isinstance(value, Real):
                raise ValueError(f"parameter {p!r} must be a real number, got {value!r}.")
            args.append(np.float64(value))
        args.extend(np.float64(self.constants[c]) for c in self.constants)
        arrays = {key: None if t is None else t.copy() for key, t in templates.items()}
        with np.errstate(all="ignore"):
            try:
                values = function(*args) if self._entries else []
            except (ArithmeticError, ValueError, TypeError) as exc:
                values = self._one_by_one(args, exc)
        for (key, i, j, text), value in zip(self._entries, values):
            if np.iscomplexobj(value) or not np.isfinite(value):
                raise ValueError(f"{key}[{i + 1}][{j + 1}] = {text!r} evaluates to {value} at "
                                 f"the point {self._point_text(args)}.")
            arrays[key][i, j] = float(value)
        return StateSpaceModel(arrays["A"], arrays["B"], arrays["C"], arrays.get("D"), self.dt,
                               states=self.states, inputs=self.inputs, outputs=self.outputs,
                               name=self.name)

    def _one_by_one(self, args, first_exc):
        """Find which entry failed, for the message."""
        import sympy

        symbols = [sympy.Symbol(name) for name in self.parameters + tuple(self.constants)]
        for (key, i, j, text), expr in zip(self._entries, self._expressions):
            single = sympy.lambdify(symbols, expr, modules="numpy", printer=_float_printer(),
                                    dummify=True)
            try:
                single(*args)
            except (ArithmeticError, ValueError, TypeError) as exc:
                raise ValueError(f"{key}[{i + 1}][{j + 1}] = {text!r} cannot be evaluated at the "
                                 f"point {self._point_text(args)} ({type(exc).__name__}: "
                                 f"{exc}).") from None
        raise ValueError(f"the expressions cannot be evaluated at the point "
                         f"{self._point_text(args)} ({first_exc}).")

    def _point_text(self, args) -> str:
        """The swept parameters of a point, ``name=value`` (the first six), for messages."""
        items = [f"{name}={float(value)!r}" for name, value in zip(self.parameters, args)]
        if len(items) > 6:
            items = items[:6] + [f"and {len(items) - 6} more"]
        return ", ".join(items) if items else "(no parameters)"
