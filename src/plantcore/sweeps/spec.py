"""Sweep specification files: a model family whose matrix entries are expressions.

A sweep specification is a TOML file laid out like a model file (see DESIGN.md), except that
a matrix entry may be a string holding an arithmetic expression in named parameters, and
that tables describe the parameters and where to sample them::

    name = "twin-hoist gantry crane"
    sample_time = 0.05                  # omit for continuous time
    states  = ["trolley_position", "trolley_velocity"]
    inputs  = ["drive_force"]
    outputs = ["trolley_position"]
    A = [[0, 1], [0, "-friction / trolley_mass"]]
    B = [[0], ["1 / trolley_mass"]]
    C = [[1, 0]]
    D = [[0]]                           # optional, zeros when omitted

    [constants]                         # optional: fixed named numbers
    friction = 40.0

    [parameter_grid]                    # either a grid ...
    trolley_mass = { start = 500.0, stop = 3000.0, count = 26 }
    # other_parameter = { values = [1.0, 2.0, 5.0] }

    # [random_draws]                    # ... or random draws (not both)
    # seed = 2024
    # count = 500
    # [random_draws.parameters]
    # trolley_mass = { distribution = "uniform", low = 500.0, high = 3000.0 }
    # friction_factor = { distribution = "normal", mean = 1.0, standard_deviation = 0.1 }

    [analysis]                          # optional
    tolerance = 1e-10                   # relative rank tolerance
    reduced_order = 2                   # measure the error of a balanced truncation

Grid axes are ``{ start, stop, count }`` (``count`` evenly spaced values, both ends
included) or ``{ values = [...] }``; the grid is the full combination of the axes, the last
axis varying fastest (see :func:`plantcore.grid`).  Random draws name a distribution of
:func:`plantcore.random_points`: ``uniform`` and ``log_uniform`` (``low``, ``high``),
``normal`` (``mean``, ``standard_deviation``) or ``choice`` (``values``).

Expressions
-----------
An expression may use numbers, the declared parameter and constant names, ``+ - * / **``,
parentheses, the constant ``pi`` and the functions ``sin cos tan asin acos atan atan2
sinh cosh tanh exp log log10 sqrt abs``.  Nothing else is accepted: no attribute access, no
subscripts, no other calls, no names starting with an underscore, no lambda, no comparison.
The text is first parsed with Python's :mod:`ast` and every node checked against that
whitelist; only then is the (re-printed) text handed to sympy's ``parse_expr`` with a global
namespace that holds only the whitelisted sympy functions, ``pi`` and the number and
arithmetic constructors sympy's own transformations emit (no builtins), with the parameters
renamed to internal names that cannot shadow those, and with ``evaluate=False`` so that
sympy does no arithmetic on the constants.  The expression is
compiled once with :func:`sympy.lambdify` to numpy, with every number printed as a float
(so that no integer arithmetic of unbounded size can run).  Nothing is ever passed to
Python's ``eval`` before it has passed the whitelist.

Names
-----
Parameter and constant names are compared as written.  Python reads identifiers in their
Unicode NFKC form, so a name that NFKC turns into another declared name, a built-in function
or constant (a fullwidth ``ｐｉ`` would become ``pi``), a Python keyword or a result column
is refused with both names and their code points; so is a name in an expression that differs
as written from every declared name (the micro sign ``µ`` is not the Greek ``μ``).  Control,
zero-width and bidirectional characters are refused in every name, including ``states``,
``inputs``, ``outputs`` and ``name`` (:mod:`plantcore.core.names`).

Limits
------
Only a regular file is read (a named pipe or device is refused without blocking), of at
most :data:`MAX_SPEC_FILE_BYTES` (16 MiB), describing at most :data:`MAX_POINTS` points; numbers
must be finite doubles (an integer of 400 digits is refused, not overflowed), and a grid span
``stop - start`` or a ``uniform`` / ``log_uniform`` range must stay within the floating-point
range.

Errors in the file are reported as :class:`plantcore.ModelFileError`, one line
``file: field: problem``, with matrix entries named ``A[row][column]`` counting from 1 as one
reads the file.  An expression that is infinite or undefined for every value (``k/0``) is
refused when the file is read; one that cannot be evaluated at one point (a division by zero
there, the square root of a negative number) only fails that point of the sweep, with a
message naming the entry, the expression and the point's parameter values.
"""

from __future__ import annotations

import keyword
import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.errors import ModelFileError
from plantcore.core.names import collision_problem, list_problem, name_problem
from plantcore.files.layout import _decode_text
from plantcore.files.safe_read import open_input, read_capped
from plantcore.files.toml_format import _parse_toml
from plantcore.sweeps.expressions import (
    FUNCTIONS,
    NAMED_CONSTANTS,
    ExpressionError,
    ModelFromExpressions,
    parse_expression,
)
from plantcore.sweeps.point_analysis import RESULT_COLUMNS
from plantcore.sweeps.points import DISTRIBUTIONS, grid, random_points

__all__ = ["MAX_POINTS", "MAX_SPEC_FILE_BYTES", "SweepSpec", "load_sweep_spec"]


#: Largest number of points a specification may describe.
MAX_POINTS = 1_000_000

#: Largest sweep specification file accepted, in bytes (16 MiB: a grid of a million listed
#: values fits); a longer file, or one that keeps growing while it is read, is refused.
MAX_SPEC_FILE_BYTES = 16 * 1024 * 1024

_TOP_KEYS = ("name", "sample_time", "states", "inputs", "outputs", "A", "B", "C", "D",
             "constants", "parameter_grid", "random_draws", "analysis")


@dataclass(frozen=True)
class SweepSpec:
    """A parsed sweep specification.

    Attributes
    ----------
    path : str
        The file it was read from.
    name : str or None
        The model family's name.
    parameters : tuple of str
        The swept parameter names.
    constants : dict
        Named fixed numbers.
    points : tuple of dict
        The operating points, in sweep order.
    sampling : str
        ``"grid"`` or ``"random draws"``.
    build : ModelFromExpressions
        The picklable function from a point to its model.
    tolerance : float or None
        ``[analysis] tolerance``.
    reduced_order : int or None
        ``[analysis] reduced_order``.
    seed : int or None
        The seed of random draws.
    """

    path: str
    name: str | None
    parameters: tuple
    constants: dict = field(repr=False)
    points: tuple = field(repr=False)
    sampling: str
    build: ModelFromExpressions = field(repr=False)
    tolerance: float | None = None
    reduced_order: int | None = None
    seed: int | None = None


def _is_number(value) -> bool:
    return not isinstance(value, bool) and isinstance(value, (int, float))


def _is_finite_number(value) -> bool:
    """A number that is a finite double (an integer of 400 digits is not: it overflows)."""
    if not _is_number(value):
        return False
    try:
        return math.isfinite(float(value))
    except OverflowError:
        return False


def _shown(value) -> str:
    """A value from the file for a message: repr(), cut short (a 400-digit integer)."""
    text = repr(value)
    if isinstance(value, int) and not isinstance(value, bool) and len(text) > 24:
        return f"an integer of {len(text.lstrip('-'))} digits (beyond the floating-point range)"
    return text if len(text) <= 60 else text[:57] + "..."


class _Reader:
    """Validates the parsed TOML document, raising ModelFileError with the field's name."""

    def __init__(self, path):
        self.path = str(path)

    def fail(self, where, problem):
        raise ModelFileError(self.path, where, problem)

    def table(self, value, where, allowed=None):
        """Check that value is a table; with ``allowed``, refuse other keys."""
        if not isinstance(value, dict):
            self.fail(where or None, f"must be a table, got {type(value).__name__}.")
        for key in value if allowed is not None else ():
            if key not in allowed:
                self.fail(f"{where}.{key}" if where else key,
                          f"unknown key; the keys allowed here are: {', '.join(allowed)}.")
        return value

    def number(self, value, where, *, positive=False):
        if not _is_finite_number(value):
            self.fail(where, f"must be a finite number, got {_shown(value)}.")
        if positive and value <= 0:
            self.fail(where, f"must be positive, got {value!r}.")
        return float(value)

    def whole(self, value, where, *, minimum=0, maximum=None):
        if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
            self.fail(where, f"must be a whole number >= {minimum}, got {_shown(value)}.")
        if maximum is not None and value > maximum:
            self.fail(where, f"is larger than {maximum}.")
        return int(value)

    def names(self, value, where):
        if value is None:
            return None
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.fail(where, "must be a list of strings.")
        problem = list_problem(value)
        if problem:
            self.fail(where, problem + ".")
        if len(set(value)) != len(value):
            self.fail(where, "holds a name twice; names must be unique.")
        return tuple(value)

    def identifier(self, name, where):
        problem = name_problem(name)
        if problem:
            self.fail(where, f"the name {name!r} {problem}.")
        clash = (collision_problem([name], FUNCTIONS, reserved_label="a built-in function")
                 or collision_problem([name], NAMED_CONSTANTS, reserved_label="a built-in constant")
                 or collision_problem([name], keyword.kwlist, reserved_label="a Python keyword")
                 or collision_problem([name], RESULT_COLUMNS,
                                      reserved_label="a column of the result table"))
        if clash:
            self.fail(where, clash + ".")
        if not name.isidentifier() or keyword.iskeyword(name):
            self.fail(where, f"{name!r} is not a valid name (letters, digits and '_', not "
                             "starting with a digit).")
        if name.startswith("_"):
            self.fail(where, f"{name!r} starts with an underscore; such names are not allowed.")
        if name in FUNCTIONS or name in NAMED_CONSTANTS:
            self.fail(where, f"{name!r} is the name of a built-in function or constant of "
                             "expressions; choose another name.")
        if name in RESULT_COLUMNS:
            self.fail(where, f"{name!r} is also a column of the result table; choose another name.")
        return name

    def matrix(self, value, key, names):
        if not isinstance(value, list) or not all(isinstance(r, list) for r in value):
            self.fail(key, "must be a list of rows, e.g. [[1.0, 0.0], [0.0, \"k / m\"]].")
        widths = {len(r) for r in value}
        if len(widths) > 1:
            self.fail(key, f"has rows of different lengths ({', '.join(map(str, sorted(widths)))}).")
        for i, row in enumerate(value):
            for j, entry in enumerate(row):
                where = f"{key}[{i + 1}][{j + 1}]"
                if isinstance(entry, str):
                    try:
                        parse_expression(entry, names)
                    except ExpressionError as exc:
                        self.fail(where, str(exc))
                elif not _is_finite_number(entry):
                    self.fail(where, "must be a finite number or an expression string, got "
                                     f"{_shown(entry)}.")
        return value


def _shape(rows):
    return (len(rows), len(rows[0]) if rows else 0)


def load_sweep_spec(path) -> SweepSpec:
    """Read and check a sweep specification (TOML; see the module documentation).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    SweepSpec

    Raises
    ------
    plantcore.ModelFileError
        With a one-line message ``file: field: problem`` for anything wrong in the file.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file name (str or os.PathLike), got {type(path).__name__}.")
    path = os.fspath(path)
    reader = _Reader(path)
    with open_input(path, reader.path, "a sweep specification", limit=MAX_SPEC_FILE_BYTES,
                    limit_name="plantcore.sweeps.spec.MAX_SPEC_FILE_BYTES") as handle:
        data = read_capped(handle, reader.path, "sweep specifications", limit=MAX_SPEC_FILE_BYTES)
    document = _parse_toml(_decode_text(data, reader.path), reader.path)
    reader.table(document, "", _TOP_KEYS)

    name = document.get("name")
    if name is not None and not isinstance(name, str):
        reader.fail("name", f"must be a string, got {_shown(name)}.")
    if name is not None and name_problem(name, allow_empty=True):
        reader.fail("name", f"{name!r} {name_problem(name, allow_empty=True)}.")
    dt = None
    if "sample_time" in document:
        dt = reader.number(document["sample_time"], "sample_time", positive=True)

    constants = {}
    for key, value in reader.table(document.get("constants", {}), "constants").items():
        reader.identifier(key, f"constants.{key}")
        constants[key] = reader.number(value, f"constants.{key}")

    has_grid, has_random = "parameter_grid" in document, "random_draws" in document
    if has_grid and has_random:
        reader.fail("random_draws", "give either [parameter_grid] or [random_draws], not both.")
    if not (has_grid or has_random):
        reader.fail("parameter_grid", "missing: describe the parameters in a [parameter_grid] "
                                      "or a [random_draws] table.")
    seed = None
    if has_grid:
        points, parameters = _grid_points(reader, document["parameter_grid"])
        sampling = "grid"
    else:
        points, parameters, seed = _random_points(reader, document["random_draws"])
        sampling = "random draws"
    for p in parameters:
        if p in constants:
            reader.fail(f"constants.{p}", f"{p!r} is also a swept parameter; use one or the other.")
    clash = collision_problem(parameters)
    if clash:
        reader.fail("parameter_grid" if has_grid else "random_draws.parameters", clash + ".")
    clash = collision_problem(parameters + tuple(constants))
    if clash:
        reader.fail("constants", clash + ".")

    names = parameters + tuple(constants)
    matrices = {}
    for key in ("A", "B", "C"):
        if key not in document:
            reader.fail(key, "missing; a sweep specification needs the matrices A, B and C.")
        matrices[key] = reader.matrix(document[key], key, names)
    matrices["D"] = reader.matrix(document["D"], "D", names) if "D" in document else None
    _check_shapes(reader, matrices)
    n = _shape(matrices["A"])[0]
    m = _shape(matrices["B"])[1] if n else (_shape(matrices["D"])[1] if matrices["D"] else 0)
    p = _shape(matrices["C"])[0]
    labels = {}
    for key, count in (("states", n), ("inputs", m), ("outputs", p)):
        labels[key] = reader.names(document.get(key), key)
        if labels[key] is not None and len(labels[key]) != count:
            reader.fail(key, f"has {len(labels[key])} names but the matrices give {count}; "
                             "give one name each.")

    tolerance = reduced_order = None
    if "analysis" in document:
        analysis = reader.table(document["analysis"], "analysis", ("tolerance", "reduced_order"))
        if "tolerance" in analysis:
            tolerance = reader.number(analysis["tolerance"], "analysis.tolerance", positive=True)
            if tolerance >= 1:
                reader.fail("analysis.tolerance", f"is relative and must lie in (0, 1), got {tolerance!r}.")
        if "reduced_order" in analysis:
            reduced_order = reader.whole(analysis["reduced_order"], "analysis.reduced_order")

    build = ModelFromExpressions(matrices, parameters, constants, dt=dt, states=labels["states"],
                                 inputs=labels["inputs"], outputs=labels["outputs"], name=name)
    return SweepSpec(path, name, parameters, constants, tuple(points), sampling, build,
                     tolerance, reduced_order, seed)


def _check_shapes(reader, matrices) -> None:
    (na, ma), (nb, mb), (pc_, nc) = (_shape(matrices[k]) for k in ("A", "B", "C"))
    if na != ma:
        reader.fail("A", f"is {na} x {ma} but must be square (one row and column per state).")
    if nb != na and not (na == 0 and nb == 0):
        reader.fail("B", f"has {nb} rows but A is {na} x {na}; B needs one row per state.")
    if nc != na and na:
        reader.fail("C", f"has {nc} columns but A is {na} x {na}; C needs one column per state.")
    if matrices["D"] is not None and na:
        pd, md = _shape(matrices["D"])
        if (pd, md) != (pc_, mb):
            reader.fail("D", f"is {pd} x {md} but the model has {pc_} outputs and {mb} inputs; "
                             f"D must be {pc_} x {mb}.")


def _grid_points(reader, table):
    reader.table(table, "parameter_grid")
    if not table:
        reader.fail("parameter_grid", "is empty; give at least one parameter axis.")
    axes = {}
    count = 1
    for name, axis in table.items():
        where = f"parameter_grid.{name}"
        reader.identifier(name, where)
        reader.table(axis, where, ("start", "stop", "count", "values"))
        if "values" in axis:
            if set(axis) != {"values"}:
                reader.fail(where, "give either values = [...] or start, stop and count, not both.")
            values = axis["values"]
            if not isinstance(values, list) or not values:
                reader.fail(f"{where}.values", "must be a non-empty list of numbers.")
            axes[name] = [reader.number(v, f"{where}.values") for v in values]
        else:
            for key in ("start", "stop", "count"):
                if key not in axis:
                    reader.fail(where, f"missing {key!r}; give start, stop and count, or values.")
            start = reader.number(axis["start"], f"{where}.start")
            stop = reader.number(axis["stop"], f"{where}.stop")
            n = reader.whole(axis["count"], f"{where}.count", minimum=1, maximum=MAX_POINTS)
            if n == 1 and start != stop:
                reader.fail(f"{where}.count", "is 1 but start and stop differ; use values = [x] "
                                              "for a single value.")
            if not math.isfinite(stop - start):
                reader.fail(where, f"the span stop - start ({stop!r} - {start!r}) is beyond the "
                                   "floating-point range (about 1.8e308); narrow it.")
            axes[name] = np.linspace(start, stop, n).tolist()
        count *= len(axes[name])
        if count > MAX_POINTS:
            reader.fail("parameter_grid", f"describes more than {MAX_POINTS} points.")
    return grid(**axes), tuple(axes)


def _random_points(reader, table):
    reader.table(table, "random_draws", ("seed", "count", "parameters"))
    for key in ("seed", "count", "parameters"):
        if key not in table:
            reader.fail("random_draws", f"missing {key!r}; random draws need seed, count and a "
                                        "[random_draws.parameters] table.")
    seed = reader.whole(table["seed"], "random_draws.seed")
    count = reader.whole(table["count"], "random_draws.count", minimum=1, maximum=MAX_POINTS)
    parameters = table["parameters"]
    reader.table(parameters, "random_draws.parameters")
    if not parameters:
        reader.fail("random_draws.parameters", "is empty; give at least one parameter.")
    distributions = {}
    for name, description in parameters.items():
        where = f"random_draws.parameters.{name}"
        reader.identifier(name, where)
        if not isinstance(description, dict) or "distribution" not in description:
            reader.fail(where, "must be a table with a 'distribution' key, e.g. "
                               "{ distribution = \"uniform\", low = 1.0, high = 2.0 }.")
        kind = description["distribution"]
        if kind not in DISTRIBUTIONS:
            reader.fail(f"{where}.distribution", f"is {kind!r}; choose one of "
                                                 f"{', '.join(DISTRIBUTIONS)}.")
        arguments = DISTRIBUTIONS[kind]
        reader.table(description, where, ("distribution",) + arguments)
        values = []
        for argument in arguments:
            if argument not in description:
                reader.fail(where, f"missing {argument!r} for the {kind} distribution.")
            if argument == "values":
                items = description["values"]
                if not isinstance(items, list) or not items:
                    reader.fail(f"{where}.values", "must be a non-empty list of numbers.")
                values.append([reader.number(v, f"{where}.values") for v in items])
            else:
                values.append(reader.number(description[argument], f"{where}.{argument}"))
        distributions[name] = (kind, *values)
    try:
        points = random_points(distributions, count, seed)
    except ValueError as exc:
        reader.fail("random_draws.parameters", str(exc))
    return points, tuple(distributions), seed
