"""Tests of plantcore.sweeps.spec (the sweep file form and its safe expressions) and of the
``plantcore sweep`` command line."""

from __future__ import annotations

import math
import os
import pickle
import textwrap

import numpy as np
import pytest
from folder_snapshot import hidden_entries, snapshot

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION
from plantcore.sweeps.expressions import ExpressionError, ModelFromExpressions, parse_expression
from plantcore.sweeps.spec import load_sweep_spec

TWO_TANKS = """\
name = "two coupled tanks"
states = ["level_1", "level_2"]
inputs = ["inflow"]
outputs = ["level_2"]
A = [["-outflow / area", 0.0], ["coupling / area", "-outflow / area"]]
B = [["1 / area"], [0]]
C = [[0, 1]]

[constants]
outflow = 0.5

[parameter_grid]
coupling = { values = [0.0, 0.25, 0.5] }
area = { start = 1.0, stop = 2.0, count = 2 }
"""


def write(tmp_path, text, name="spec.toml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def spec_with_entry(tmp_path, entry: str):
    """A one-state spec whose A[1][1] is the given expression (as a TOML string)."""
    text = ('A = [[' + _toml_string(entry) + ']]\nB = [[1.0]]\nC = [[1.0]]\n\n'
            '[parameter_grid]\nmass = { values = [1.0, 2.0] }\n')
    return write(tmp_path, text)


def _toml_string(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


# --- expressions ----------------------------------------------------------------------------

def test_expressions_evaluate_like_the_same_formula_in_numpy():
    names = ["a", "b"]
    text = "sqrt(a) * sin(b) + a**2 / 3 - log10(100) + exp(-b) * abs(-a) + atan2(a, b) - pi"
    build = ModelFromExpressions({"A": [[text]], "B": [[1]], "C": [[1]]}, names)
    for a, b in [(2.0, 0.3), (0.5, 4.0)]:
        expected = (math.sqrt(a) * math.sin(b) + a ** 2 / 3 - 2.0 + math.exp(-b) * a
                    + math.atan2(a, b) - math.pi)
        assert build({"a": a, "b": b}).A[0, 0] == pytest.approx(expected, rel=1e-14)
    # Decimal constants keep every digit (printed as float literals, not 15 digits).
    exact = ModelFromExpressions({"A": [["0.1 * a + 1/3"]], "B": [[1]], "C": [[1]]}, ["a"])
    assert exact({"a": 1.0}).A[0, 0] == 0.1 * 1.0 + 1 / 3


SECURITY_CASES = [
    ("mass.__class__", "attribute access"),
    ("().__class__.__bases__[0].__subclasses__()", "attribute access"),
    ("__import__('os').system('echo unsafe')", "attribute access"),
    ("__import__('os')", "underscore"),
    ("__builtins__", "underscore"),
    ("_hidden + 1", "underscore"),
    ("lambda: 1", "lambda"),
    ("(lambda x: x)(mass)", "only the listed functions"),
    ("mass[0]", "subscripts"),
    ("open('/etc/passwd')", "unknown function 'open'"),
    ("eval('1')", "unknown function 'eval'"),
    ("getattr(mass, 'real')", "unknown function 'getattr'"),
    ("mass(2)", "is a value, not a function"),
    ("sin", "must be called"),
    ("sin(mass, mass)", "takes 1 argument"),
    ("sin(x=mass)", "keyword"),
    ("speed * 2", "unknown name 'speed'"),
    ("mass if mass else 1", "'if ... else'"),
    ("mass < 2", "comparisons"),
    ("mass and 1", "'and' / 'or'"),
    ("[mass]", "lists"),
    ("'text'", "not a number"),
    ("True", "not a number"),
    ("1e999", "not finite"),
    ("1j * mass", "not a number"),
    ("mass % 2", "operator Mod"),
    ("mass // 2", "operator FloorDiv"),
    ("~mass", "operator Invert"),
    ("import os", "not a valid arithmetic expression"),
    ("mass; 1", "not a valid arithmetic expression"),
    ("mass = 1", "not a valid arithmetic expression"),
    ("x!", "not a valid arithmetic expression"),
    ("", "empty"),
    ("1" + "+1" * 150, "too long"),
    ("1" + "+1" * 300, "longer than 500 characters"),
]


@pytest.mark.parametrize("text, problem", SECURITY_CASES)
def test_unsafe_or_invalid_expressions_are_refused_before_sympy_sees_them(
        text, problem, monkeypatch):
    import sympy.parsing.sympy_parser as parser

    def must_not_run(*args, **kwargs):
        raise AssertionError("a refused expression reached sympy's parser")

    monkeypatch.setattr(parser, "parse_expr", must_not_run)
    with pytest.raises(ExpressionError, match=_escape(problem)):
        parse_expression(text, ["mass"])


def _escape(text):
    import re

    return re.escape(text)


@pytest.mark.parametrize("text, problem", [
    ("mass.__class__", "attribute access"),
    ("__import__('os').system('touch pwned')", "attribute access"),
    ("__import__('os')", "underscore"),
    ("(lambda: 1)()", "only the listed functions"),
    ("mass[0]", "subscripts"),
    ("system(mass)", "unknown function 'system'"),
    ("gravity * mass", "unknown name 'gravity'"),
])
def test_cli_refuses_bad_expressions_with_one_line_and_exit_2(tmp_path, capsys, monkeypatch,
                                                              text, problem):
    spec = spec_with_entry(tmp_path, text)
    before = spec.read_bytes()
    out = tmp_path / "out"
    monkeypatch.chdir(tmp_path)   # a successful 'touch pwned' would land here
    code = main(["sweep", str(spec), "-o", str(out)])
    captured = capsys.readouterr()
    assert code == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1
    assert f"{spec}: A[1][1]: " in lines[0] and problem in lines[0]
    assert "Traceback" not in captured.err
    assert not out.exists() and not (tmp_path / "pwned").exists()
    assert spec.read_bytes() == before


def test_expressions_cannot_run_unbounded_arithmetic():
    # sympy evaluates nothing (evaluate=False) and the compiled code sees only floats, so a
    # tower of powers overflows at once instead of computing a huge integer.
    build = ModelFromExpressions({"A": [["-10**10**10 * mass"]], "B": [[1]], "C": [[1]]}, ["mass"])
    with pytest.raises(ValueError, match=r"A\[1\]\[1\]"):
        build({"mass": 1.0})


def test_entry_that_cannot_be_evaluated_fails_only_its_point():
    build = ModelFromExpressions(
        {"A": [["-1", 0], ["1 / (speed - 2)", "-sqrt(speed - 1)"]], "B": [[1], [0]],
         "C": [[0, 1]]}, ["speed"])
    result = pc.sweep(build, pc.grid(speed=[3.0, 2.0, 0.5, 5.0]), executor="serial")
    errors = [row["error"] for row in result.rows]
    assert errors[0] is None and errors[3] is None
    assert "A[2][1] = '1 / (speed - 2)' evaluates to inf" in errors[1]
    assert "A[2][2] = '-sqrt(speed - 1)' evaluates to nan" in errors[2]


def test_builder_pickles_by_its_text():
    build = ModelFromExpressions({"A": [["-k / m"]], "B": [[1]], "C": [["2 * k"]]}, ["k", "m"],
                                 {"scale": 3.0}, dt=0.1, name="spring")
    copy = pickle.loads(pickle.dumps(build))
    a, b = build({"k": 6.0, "m": 2.0}), copy({"k": 6.0, "m": 2.0})
    assert np.array_equal(a.A, b.A) and np.array_equal(a.C, b.C) and a.dt == b.dt == 0.1
    assert a.name == "spring" and float(a.A[0, 0]) == -3.0


# --- the file -------------------------------------------------------------------------------

def test_grid_spec_loads_points_constants_and_names(tmp_path):
    spec = load_sweep_spec(write(tmp_path, TWO_TANKS))
    assert spec.parameters == ("coupling", "area") and spec.sampling == "grid"
    assert spec.points == tuple(pc.grid(coupling=[0.0, 0.25, 0.5], area=[1.0, 2.0]))
    model = spec.build({"coupling": 0.25, "area": 2.0})
    np.testing.assert_array_equal(model.A, [[-0.25, 0.0], [0.125, -0.25]])
    np.testing.assert_array_equal(model.B, [[0.5], [0.0]])
    assert model.states == ("level_1", "level_2") and model.outputs == ("level_2",)
    assert model.name == "two coupled tanks" and model.dt is None


def test_random_spec_draws_what_random_points_draws(tmp_path):
    text = "sample_time = 0.5\n" + TWO_TANKS.split("[parameter_grid]")[0] + textwrap.dedent("""\
        [random_draws]
        seed = 7
        count = 25
        [random_draws.parameters]
        coupling = { distribution = "uniform", low = 0.0, high = 1.0 }
        area = { distribution = "log_uniform", low = 0.5, high = 4.0 }

        [analysis]
        tolerance = 1e-9
        reduced_order = 1
        """)
    spec = load_sweep_spec(write(tmp_path, text))
    expected = pc.random_points({"coupling": ("uniform", 0.0, 1.0),
                                 "area": ("log_uniform", 0.5, 4.0)}, 25, seed=7)
    assert list(spec.points) == expected and spec.seed == 7
    assert spec.tolerance == 1e-9 and spec.reduced_order == 1
    assert spec.build(expected[0]).dt == 0.5


BAD_FILES = [
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\ncolour = 1\n[parameter_grid]\nm = { values = [1.0] }\n",
     "colour", "unknown key"),
    ("B = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { values = [1.0] }\n", "A", "missing"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n", "parameter_grid", "missing"),
    (("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { values = [1.0] }\n"
     "[random_draws]\nseed = 1\ncount = 2\n[random_draws.parameters]\n"
     "m = { distribution = \"uniform\", low = 0.0, high = 1.0 }\n"), "random_draws", "not both"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { start = 0.0, stop = 1.0, count = 0 }\n",
     "parameter_grid.m.count", ">= 1"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { start = 0.0, count = 3 }\n",
     "parameter_grid.m", "missing 'stop'"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { values = [1.0, \"x\"] }\n",
     "parameter_grid.m.values", "finite number"),
    (("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[random_draws]\nseed = 1\ncount = 2\n"
     "[random_draws.parameters]\nm = { distribution = \"triangle\", low = 0.0, high = 1.0 }\n"),
     "random_draws.parameters.m.distribution", "choose one of"),
    (("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[random_draws]\nseed = 1\ncount = 2\n"
     "[random_draws.parameters]\nm = { distribution = \"normal\", mean = 0.0 }\n"),
     "random_draws.parameters.m", "standard_deviation"),
    ("A = [[1.0, 0.0], [0.0, 1.0]]\nB = [[1.0]]\nC = [[1.0, 0.0]]\n[parameter_grid]\nm = { values = [1.0] }\n",
     "B", "has 1 rows but A is 2 x 2"),
    ("A = [[1.0, 0.0], [0.0]]\nB = [[1.0], [1.0]]\nC = [[1.0, 0.0]]\n[parameter_grid]\nm = { values = [1.0] }\n",
     "A", "rows of different lengths"),
    ("A = [[true]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { values = [1.0] }\n",
     "A[1][1]", "number or an expression"),
    ("states = [\"a\", \"b\"]\nA = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nm = { values = [1.0] }\n",
     "states", "2 names but the matrices give 1"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nsin = { values = [1.0] }\n",
     "parameter_grid.sin", "built-in function"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\nerror = { values = [1.0] }\n",
     "parameter_grid.error", "column of the result table"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[parameter_grid]\n_m = { values = [1.0] }\n",
     "parameter_grid._m", "underscore"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[constants]\ng = \"9.81\"\n[parameter_grid]\nm = { values = [1.0] }\n",
     "constants.g", "finite number"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\nsample_time = -1\n[parameter_grid]\nm = { values = [1.0] }\n",
     "sample_time", "positive"),
    ("A = [[1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[analysis]\ntolerance = 2.0\n[parameter_grid]\nm = { values = [1.0] }\n",
     "analysis.tolerance", "(0, 1)"),
    ("A = [[1.0]\n", None, "TOML syntax error"),
]


@pytest.mark.parametrize("text, field, problem", BAD_FILES)
def test_bad_files_name_the_field_and_the_problem(tmp_path, text, field, problem):
    path = write(tmp_path, text)
    with pytest.raises(pc.ModelFileError) as info:
        load_sweep_spec(path)
    message = str(info.value)
    assert message.startswith(f"{path}: ")
    if field is not None:
        assert info.value.field == field
    assert problem in message
    assert "\n" not in message


def test_missing_file_is_a_one_line_error(tmp_path):
    with pytest.raises(pc.ModelFileError, match="absent.toml: file: not found"):
        load_sweep_spec(tmp_path / "absent.toml")


# --- command line ---------------------------------------------------------------------------

def test_cli_writes_table_plots_and_summary(tmp_path, capsys):
    spec = write(tmp_path, TWO_TANKS.replace("coupling = { values = [0.0, 0.25, 0.5] }\n", "")
                 .replace("-outflow / area\", 0.0], [\"coupling", "-outflow / area\", 0.0], [\"0.2"))
    out = tmp_path / "sweep"
    code = main(["sweep", str(spec), "-o", str(out), "--executor", "serial",
                 "--reduced-order", "1"])
    assert code == 0, capsys.readouterr().err
    names = sorted(os.listdir(out))
    assert {"table.csv", "margins.png", "structure.png", "summary.md"} <= set(names)
    assert not [n for n in os.listdir(tmp_path) if n.startswith(".sweep")]   # no staging left
    summary = (out / "summary.md").read_text(encoding="utf-8")
    assert SAFETY_CAUTION in summary and "two coupled tanks" in summary
    assert "Balanced truncation to order 1" in summary
    table = (out / "table.csv").read_text(encoding="utf-8").splitlines()
    assert table[0].startswith("area,states,minimal_order") and len(table) == 3
    for name in ("margins.png", "structure.png"):
        assert (out / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # An existing, non-empty folder is refused: nothing is overwritten.
    before = (out / "table.csv").read_bytes()
    capsys.readouterr()
    assert main(["sweep", str(spec), "-o", str(out), "--executor", "serial"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not empty" in err[0]
    assert (out / "table.csv").read_bytes() == before
    # The specification itself as output: refused, untouched.
    spec_bytes = spec.read_bytes()
    assert main(["sweep", str(spec), "-o", str(spec), "--executor", "serial"]) == 2
    assert spec.read_bytes() == spec_bytes


SMALL_GRID = ("coupling = { values = [0.0, 0.25, 0.5] }\n"
              "area = { start = 1.0, stop = 2.0, count = 2 }\n")


def test_cli_force_replaces_an_earlier_sweep_whole(tmp_path, capsys):
    good = write(tmp_path, TWO_TANKS.replace(SMALL_GRID, "coupling = { values = [0.0, 0.5] }\n"
                                              "area = { values = [1.0] }\n"), "good.toml")
    failing = write(tmp_path, TWO_TANKS.replace(SMALL_GRID, "coupling = { values = [0.0, 0.5] }"
                                                 "\narea = { values = [0.0] }\n"), "bad.toml")
    out = tmp_path / "sweep"
    assert main(["sweep", str(good), "-o", str(out), "--executor", "serial"]) == 0
    assert {"margins.png", "structure.png"} <= set(os.listdir(out))
    # every point of the second run fails: it writes no plots, and none of the old ones stay
    assert main(["sweep", str(failing), "-o", str(out), "--executor", "serial", "--force"]) == 0
    assert "(2 failed)" in capsys.readouterr().out
    assert sorted(os.listdir(out)) == ["index.html", "summary.md", "table.csv"]
    assert "## Failed points (2;" in (out / "summary.md").read_text(encoding="utf-8")
    assert hidden_entries(tmp_path) == []
    # and once more with the good specification: the plots are back
    assert main(["sweep", str(good), "-o", str(out), "--executor", "serial", "--force"]) == 0
    assert {"margins.png", "structure.png", "table.csv"} <= set(os.listdir(out))
    assert hidden_entries(tmp_path) == []


@pytest.mark.parametrize("foreign, named", [
    ("file", "the file 'notes.txt'"),
    ("subfolder", "the folder 'old'"),
    ("symlink", "the symbolic link 'summary.md'"),
    ("spec", "the input"),
])
def test_cli_force_refuses_a_folder_that_is_not_a_sweep_output(tmp_path, capsys, monkeypatch,
                                                               foreign, named):
    import importlib

    sweep_module = importlib.import_module("plantcore.sweeps.sweep")  # the package exports
    out = tmp_path / "sweep"
    out.mkdir()
    (out / "table.csv").write_text("an earlier table\n", encoding="utf-8")
    spec = write(tmp_path, TWO_TANKS)
    if foreign == "file":
        (out / "notes.txt").write_text("mine", encoding="utf-8")
    elif foreign == "subfolder":
        (out / "old").mkdir()
        (out / "old" / "table.csv").write_text("older", encoding="utf-8")
    elif foreign == "symlink":
        os.symlink(spec, out / "summary.md")
    else:  # the specification, even under a name a sweep writes, inside the folder
        spec = write(out, TWO_TANKS, "summary.md")
    before = snapshot(tmp_path)

    def no_work(*args, **kwargs):
        raise AssertionError("the folder must be refused before the sweep runs")

    monkeypatch.setattr(sweep_module, "sweep", no_work)  # the command imports it late
    assert main(["sweep", str(spec), "-o", str(out), "--executor", "serial", "--force"]) == 2
    said = capsys.readouterr()
    err = said.err.strip().splitlines()
    assert said.out == "" and len(err) == 1 and f"holds {named}" in err[0]
    assert ("--force never replaces a folder holding an input file" if foreign == "spec" else
            "--force only replaces a folder holding a sweep's own output") in err[0]
    assert snapshot(tmp_path) == before


@pytest.mark.parametrize("extra, problem", [
    (["--executor", "dask"], "needs --scheduler"),
    (["--executor", "serial", "--scheduler", "tcp://127.0.0.1:1"], "only used with"),
    (["--reduced-order", "x"], "invalid int value"),
])
def test_cli_refuses_bad_options(tmp_path, capsys, extra, problem):
    spec = write(tmp_path, TWO_TANKS)
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "-o", str(out), *extra]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and problem in err[0]
    assert not out.exists()


def test_cli_with_two_and_three_parameters_and_a_failing_point(tmp_path, capsys):
    two = write(tmp_path, TWO_TANKS.replace("values = [0.0, 0.25, 0.5]", "values = [0.0, 0.5]")
                .replace("start = 1.0, stop = 2.0, count = 2", "values = [1.0, 0.0]"), "two.toml")
    assert main(["sweep", str(two), "-o", str(tmp_path / "two"), "--executor", "serial"]) == 0
    summary = (tmp_path / "two" / "summary.md").read_text(encoding="utf-8")
    assert "## Failed points (2;" in summary and "evaluates to" in summary
    assert "## Where the structure changes" in summary
    three = write(tmp_path, TWO_TANKS.replace(
        "[parameter_grid]", "[parameter_grid]\nleak = { values = [0.0, 0.1] }")
        .replace("[0, 1]]", "[\"leak\", 1]]"), "three.toml")
    assert main(["sweep", str(three), "-o", str(tmp_path / "three"), "--executor", "serial"]) == 0
    assert (tmp_path / "three" / "margins.png").exists()
    summary = (tmp_path / "three" / "summary.md").read_text(encoding="utf-8")
    assert "## Weakest points" in summary
    captured = capsys.readouterr()
    assert "swept 12 points" in captured.out


def test_packaged_crane_spec_loads(tmp_path):
    from importlib import resources

    with resources.as_file(resources.files("plantcore.examples")
                           / "crane_twin_hoist_sweep.toml") as path:
        spec = load_sweep_spec(path)
    assert spec.parameters == ("cable_length_2", "load_mass_2")
    assert len(spec.points) == 61 * 3 and spec.reduced_order == 4
    lengths = sorted({p["cable_length_2"] for p in spec.points})
    assert any(abs(L - 5.0) < 1e-12 for L in lengths)     # the critical length is on the grid


def test_parameter_names_that_sympy_uses_internally_are_harmless():
    # sympy's parser emits calls such as Mul(...), Symbol(...), Integer(...); parameters of
    # those names must not shadow them (they are renamed internally).
    names = ["Mul", "Symbol", "Add", "Integer", "Float"]
    build = ModelFromExpressions({"A": [["Mul * 2 + Symbol * Add - Integer / Float"]],
                                  "B": [[1]], "C": [[1]]}, names)
    value = build({"Mul": 1.0, "Symbol": 2.0, "Add": 3.0, "Integer": 4.0, "Float": 8.0}).A[0, 0]
    assert value == 1.0 * 2 + 2.0 * 3.0 - 4.0 / 8.0
