"""Tests of plantcore.sweeps.sweep: points, executors (serial, local pool, Dask), failures, table.

The analytic check uses the packaged twin-hoist crane sweep (a trolley carrying two
pendulum loads): the parameter value where a swing mode loses controllability is derived
here with sympy in exact rational arithmetic and must be found by the sweep to the grid's
resolution.
"""

from __future__ import annotations

import csv
import math
from importlib import resources

import numpy as np
import pytest
import sympy as sp

import plantcore as pc
from plantcore.sweeps.point_analysis import RESULT_COLUMNS
from plantcore.sweeps.executors import _batches
from plantcore.sweeps.spec import load_sweep_spec

CRANE_FILE = "crane_twin_hoist_sweep.toml"


@pytest.fixture(scope="module")
def crane():
    """The packaged crane specification (its build is picklable: text expressions)."""
    with resources.as_file(resources.files("plantcore.examples") / CRANE_FILE) as path:
        return load_sweep_spec(path)


def crane_points(lengths, load_mass_2=1500.0):
    return [{"cable_length_2": float(L), "load_mass_2": load_mass_2} for L in lengths]


# --- points ---------------------------------------------------------------------------------

def test_grid_is_the_product_with_the_last_axis_fastest():
    points = pc.grid(a=[1, 2], b=[10.0, 20.0, 30.0], c=["x", "y"])
    # Written out as nested loops (the documented order), not with itertools.
    expected = []
    for a in [1, 2]:
        for b in [10.0, 20.0, 30.0]:
            for c in ["x", "y"]:
                expected.append({"a": a, "b": b, "c": c})
    assert points == expected
    assert pc.grid() == [{}]
    values = pc.grid(mass=np.linspace(1.0, 2.0, 3))
    assert [type(p["mass"]) for p in values] == [float] * 3   # numpy scalars made plain


@pytest.mark.parametrize("axes, match", [
    ({"a": 3.0}, "1-D list"),
    ({"a": []}, "empty"),
    ({"a": "abc"}, "1-D list"),
    ({"a": [[1.0, 2.0]]}, "1-D list"),
])
def test_grid_refuses_bad_axes(axes, match):
    with pytest.raises(ValueError, match=match):
        pc.grid(**axes)


def test_random_points_follow_their_distributions_and_are_reproducible():
    dists = {"mass": ("uniform", 1.0, 5.0), "speed": ("normal", 10.0, 2.0),
             "stiffness": ("log_uniform", 1e2, 1e4), "gear": ("choice", [1, 2, 3])}
    count = 4000
    points = pc.random_points(dists, count, seed=11)
    assert len(points) == count and all(set(p) == set(dists) for p in points)
    mass = np.array([p["mass"] for p in points])
    speed = np.array([p["speed"] for p in points])
    stiff = np.array([p["stiffness"] for p in points])
    assert mass.min() >= 1.0 and mass.max() < 5.0
    # Sample mean of n normal draws: standard error sigma / sqrt(n) (common practice);
    # 5 standard errors is a bound this seeded draw can only miss through a defect.
    assert abs(speed.mean() - 10.0) < 5 * 2.0 / math.sqrt(count)
    assert abs(speed.std() - 2.0) < 0.1
    assert stiff.min() >= 1e2 and stiff.max() < 1e4
    # log of a log-uniform value is uniform on [log 1e2, log 1e4): mean log10 = 3.
    assert abs(np.log10(stiff).mean() - 3.0) < 5 * (2 / math.sqrt(12)) / math.sqrt(count)
    assert {p["gear"] for p in points} == {1, 2, 3}
    assert points == pc.random_points(dists, count, seed=11)
    assert points != pc.random_points(dists, count, seed=12)
    # Adding a parameter at the end leaves the earlier draws unchanged (documented).
    more = pc.random_points({**dists, "extra": ("uniform", 0.0, 1.0)}, count, seed=11)
    assert [{k: p[k] for k in dists} for p in more] == points


@pytest.mark.parametrize("dists, count, seed, match", [
    ({"a": ("triangle", 0, 1)}, 5, 0, "choose one of"),
    ({"a": ("uniform", 2.0, 1.0)}, 5, 0, "low < high"),
    ({"a": ("normal", 0.0, -1.0)}, 5, 0, "standard_deviation"),
    ({"a": ("log_uniform", 0.0, 1.0)}, 5, 0, "0 < low"),
    ({"a": ("uniform", 0.0)}, 5, 0, "takes 2 argument"),
    ({"a": ("choice", [])}, 5, 0, "non-empty"),
    ({"a": ("uniform", 0.0, 1.0)}, -1, 0, "count"),
    ({"a": ("uniform", 0.0, 1.0)}, 5, 1.5, "seed"),
    ([("a", "uniform")], 5, 0, "mapping"),
])
def test_random_points_refuse_bad_descriptions(dists, count, seed, match):
    with pytest.raises(ValueError, match=match):
        pc.random_points(dists, count, seed)


def test_batches_cover_every_point_once():
    for count, workers in [(0, 2), (1, 4), (7, 2), (1000, 2), (10_000, 2), (12_345, 64)]:
        spans = _batches(count, workers)
        covered = [i for a, b in spans for i in range(a, b)]
        assert covered == list(range(count))
        if count:
            sizes = [b - a for a, b in spans]
            assert max(sizes) <= 500 and max(sizes) - min(sizes) <= 1
            assert len(spans) >= min(count, workers)              # every worker busy
            assert len(spans) >= min(8 * workers, count // 10)     # balance where it's cheap
            assert min(sizes) >= min(10, count // workers)         # no tiny batches


# --- the analytic check ---------------------------------------------------------------------

def _crane_symbolic(L2):
    """The crane's (A, B) in exact rationals, written from the equations in the spec file.

    Trolley: M a = k (r - x) - b v + g (m1 th1 + m2 th2); loads: L_i th_i'' = -g th_i - a
    - L_i c th_i'.  Constants as in crane_twin_hoist_sweep.toml, load_mass_2 = 1500.
    """
    g, M, m1, m2 = sp.Rational(981, 100), sp.Integer(2000), sp.Integer(1500), sp.Integer(1500)
    L1, k, b, c = sp.Integer(5), sp.Integer(8000), sp.Integer(12000), sp.Rational(2, 100)
    A = sp.Matrix([
        [0, 1, 0, 0, 0, 0],
        [-k / M, -b / M, g * m1 / M, 0, g * m2 / M, 0],
        [0, 0, 0, 1, 0, 0],
        [k / (M * L1), b / (M * L1), -g / L1 - g * m1 / (M * L1), -c, -g * m2 / (M * L1), 0],
        [0, 0, 0, 0, 0, 1],
        [k / (M * L2), b / (M * L2), -g * m1 / (M * L2), 0, -g / L2 - g * m2 / (M * L2), -c]])
    B = sp.Matrix([0, k / M, 0, -k / (M * L1), 0, -k / (M * L2)])
    return A, B, L1


def test_crane_loses_controllability_exactly_where_the_analysis_says(crane):
    # Derivation.  With L1 = L2 = L, subtracting the two swing equations removes the trolley
    # acceleration: (th1 - th2)'' = -(g/L)(th1 - th2) - c (th1 - th2)', so the difference
    # mode is untouched by the input (R. E. Kalman, "Mathematical description of linear
    # dynamical systems", 1963: an invariant subspace outside the reach of B).  Conversely,
    # in exact rational arithmetic (sympy) the determinant of the controllability matrix
    # [B, AB, ..., A^5 B] as a function of L2 vanishes only at L2 = L1 for L2 > 0.
    L2 = sp.symbols("L2", positive=True)
    A, B, L1 = _crane_symbolic(L2)
    columns = [B]
    for _ in range(5):
        columns.append(A * columns[-1])
    numerator, _ = sp.fraction(sp.factor(sp.together(sp.Matrix.hstack(*columns).det())))
    roots = sp.solve(numerator, L2)
    assert roots == [L1]
    critical = float(L1)

    # A grid that contains the critical length (steps of 1 m): the sweep finds exactly that
    # point uncontrollable, with a 2-state swing mode in the uncontrollable, observable part.
    lengths = np.linspace(2.0, 8.0, 7)
    result = pc.sweep(crane.build, crane_points(lengths), executor="local")
    assert not result.failed
    lost = [row["cable_length_2"] for row in result.rows if row["minimal_order"] < 6]
    assert lost == [pytest.approx(critical, abs=1e-12)]
    row = next(r for r in result.rows if r["minimal_order"] < 6)
    assert (row["controllable_observable"], row["uncontrollable_observable"]) == (4, 2)
    assert row["stabilizable"] and row["detectable"]      # the lost mode is damped (c > 0)
    assert row["smallest_controllability_margin"] < 1e-12
    assert row["distance_to_uncontrollability"] < 1e-12

    # A grid that misses it (offset by half a step): the weakest margin lies within one
    # grid step of the critical length.
    offset = np.linspace(2.3, 7.3, 6)
    result = pc.sweep(crane.build, crane_points(offset), executor="serial")
    margins = result.column("smallest_controllability_margin")
    weakest = offset[int(np.argmin(margins))]
    assert abs(weakest - critical) <= (offset[1] - offset[0])
    assert all(r["minimal_order"] == 6 for r in result.rows)


def test_hankel_singular_values_agree_with_python_control(crane):
    # python-control's hsvd (slycot) is an independent computation of the same values.
    control = pytest.importorskip("control")
    point = {"cable_length_2": 3.7, "load_mass_2": 900.0}
    result = pc.sweep(crane.build, [point], executor="serial")
    model = crane.build(point)
    expected = np.asarray(control.hsvd(model.to_control()))
    np.testing.assert_allclose(result.rows[0]["hankel_singular_values"], expected, rtol=1e-8)


def test_reduced_order_columns_respect_the_truncation_bound(crane):
    points = crane_points([3.0, 5.0, 6.5])
    result = pc.sweep(crane.build, points, executor="serial", reduced_order=4)
    for row in result.rows:
        assert row["error"] is None and row["reduction_error"] is None
        assert row["reduced_order"] == 4
        # Balanced truncation bound (D. F. Enns, 1984; K. Glover, 1984):
        # peak error <= 2 x sum of the discarded Hankel singular values.
        assert row["reduced_peak_error"] <= row["reduced_error_bound"] * (1 + 1e-8) + 1e-12
    at_critical = result.rows[1]
    # At L2 = L1 the two discarded values belong to the uncontrollable mode: no error.
    assert at_critical["reduced_peak_error"] < 1e-10
    # Order 5 at the critical point would keep a rounding-level Hankel value: the
    # truncation is refused there, the rest of the row stands and the point did not fail.
    result = pc.sweep(crane.build, crane_points([5.0, 6.5]), executor="serial", reduced_order=5)
    critical, other = result.rows
    assert critical["error"] is None and critical["reduction_error"] is not None
    assert critical["minimal_order"] == 4 and critical["reduced_peak_error"] is None
    assert other["reduction_error"] is None and other["reduced_order"] == 5
    assert not result.failed


# --- failures -------------------------------------------------------------------------------

def test_a_failing_point_is_recorded_and_the_sweep_goes_on(crane):
    # cable_length_2 = 0 divides by zero in the expressions of row 6 of A.
    points = crane_points([4.0, 0.0, 6.0])
    result = pc.sweep(crane.build, points, executor="local")
    assert [r["error"] is None for r in result.rows] == [True, False, True]
    bad = result.failed
    assert len(bad) == 1 and bad[0]["cable_length_2"] == 0.0
    assert bad[0]["error"].startswith("ValueError: A[6][1]")
    assert all(bad[0][c] is None for c in RESULT_COLUMNS if c != "error")
    assert result.rows[0]["minimal_order"] == 6 and result.rows[2]["minimal_order"] == 6

    def build(point):   # serial executor: any callable, also a closure
        if point["k"] == 2:
            raise RuntimeError("no linearization at this operating point")
        if point["k"] == 3:
            return ([[1.0, 2.0]], [[1.0]], [[1.0]])    # A not square
        return ([[-point["k"]]], [[1.0]], [[1.0]])

    result = pc.sweep(build, pc.grid(k=[1, 2, 3, 4]), executor="serial")
    assert [r["error"] for r in result.rows][0] is None
    assert result.rows[1]["error"] == "RuntimeError: no linearization at this operating point"
    assert result.rows[2]["error"].startswith("ValueError: A is 1 x 2")
    assert result.rows[3]["minimal_order"] == 1
    assert len(result.failed) == 2


def test_models_without_states_and_with_marginal_modes():
    def build(point):
        if point["case"] == "static":
            return pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)),
                                      [[2.0]])
        # An integrator the input cannot reach: not stabilizable (by the definition, W. M.
        # Wonham, Linear Multivariable Control, 1979); Gramians do not exist.
        return ([[0.0, 0.0], [0.0, -1.0]], [[0.0], [1.0]], [[1.0, 1.0]])

    result = pc.sweep(build, pc.grid(case=["static", "integrator"]), executor="serial")
    static, integrator = result.rows
    assert static["error"] is None and static["minimal_order"] == 0
    assert static["stabilizable"] and static["detectable"]
    assert static["hankel_singular_values"] == ()
    assert integrator["error"] is None
    assert integrator["stabilizable"] is False and integrator["detectable"] is True
    assert integrator["uncontrollable_observable"] == 1
    assert integrator["hankel_singular_values"] is None


def test_local_executor_needs_a_picklable_build():
    with pytest.raises(TypeError, match="picklable"):
        pc.sweep(lambda p: ([[-1.0]], [[1.0]], [[1.0]]), [{"a": 1.0}], executor="local")


@pytest.mark.parametrize("kwargs, points, match", [
    ({"executor": "threads"}, [{"a": 1.0}], "executor must be one of"),
    ({"executor": "serial", "scheduler": "tcp://127.0.0.1:1"}, [{"a": 1.0}], "only used with"),
    ({"executor": "serial", "reduced_order": -1}, [{"a": 1.0}], "reduced_order"),
    ({"executor": "serial", "tol": 2.0}, [{"a": 1.0}], "tol"),
    ({"executor": "serial", "progress": "yes"}, [{"a": 1.0}], "progress"),
    ({"executor": "serial"}, {"a": 1.0}, "single dict"),
    ({"executor": "serial"}, [{"a": 1.0}, {"b": 2.0}], "same parameters"),
    ({"executor": "serial"}, [{"a": 1.0}, 3.0], "point 1"),
    ({"executor": "serial"}, [{"minimal_order": 1.0}], "result column"),
])
def test_sweep_refuses_bad_arguments(kwargs, points, match):
    with pytest.raises(ValueError, match=match):
        pc.sweep(_first_order, points, **kwargs)


def _first_order(point):
    return ([[-1.0]], [[1.0]], [[1.0]])


# --- progress and table ---------------------------------------------------------------------

def test_progress_callable_sees_every_batch():
    calls = []
    points = pc.grid(a=list(range(20)))
    pc.sweep(_first_order, points, executor="serial", progress=lambda d, t: calls.append((d, t)))
    assert calls[-1] == (20, 20)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls) and len(calls) >= 2


def test_progress_true_draws_a_line_on_stderr(capsys):
    pc.sweep(_first_order, pc.grid(a=[1.0, 2.0]), executor="serial", progress=True)
    err = capsys.readouterr().err
    assert "sweep: 2/2 (100%)" in err
    pc.sweep(_first_order, pc.grid(a=[1.0, 2.0]), executor="serial")   # auto: not a terminal
    assert capsys.readouterr().err == ""


def test_csv_table_round_trips(tmp_path, crane):
    def build(point):
        k = point["k"]
        return ([[-1.0, k], [0.0, -2.0]], [[0.0], [1.0]], [[1.0, 0.0]])

    result = pc.sweep(build, pc.grid(k=[0.0, 0.3], tag=["a"]), executor="serial")
    path = tmp_path / "table.csv"
    result.to_csv(path)
    with open(path, newline="", encoding="utf-8") as handle:
        records = list(csv.DictReader(handle))
    assert list(records[0]) == list(result.columns) == ["k", "tag", *RESULT_COLUMNS]
    for record, row in zip(records, result.rows):
        assert float(record["k"]) == row["k"] and record["tag"] == "a"
        assert int(record["minimal_order"]) == row["minimal_order"]
        assert record["stabilizable"] == ("true" if row["stabilizable"] else "false")
        assert record["error"] == ""
        hsv = [float(v) for v in record["hankel_singular_values"].split()]
        assert hsv == list(row["hankel_singular_values"])     # repr: every digit kept
        assert float(record["smallest_controllability_margin"]) == \
            row["smallest_controllability_margin"]
    # k = 0: the input reaches only state 2, the output sees only state 1: order 0.
    assert [r["minimal_order"] for r in result.rows] == [0, 2]
    assert path.read_text(encoding="utf-8") == result.to_csv_text()


# --- Dask -----------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def dask_client():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None, host="127.0.0.1")
    client = distributed.Client(cluster, set_as_default=False)
    yield client
    client.close()
    cluster.close()


def _same_table(a, b):
    assert a.columns == b.columns and len(a.rows) == len(b.rows)
    for ra, rb in zip(a.rows, b.rows):
        for name in a.columns:
            x, y = ra[name], rb[name]
            if isinstance(x, float) and isinstance(y, float):
                assert x == pytest.approx(y, rel=1e-12, abs=1e-300) or (math.isnan(x) and math.isnan(y))
            elif isinstance(x, tuple) and isinstance(y, tuple):
                np.testing.assert_allclose(x, y, rtol=1e-12, atol=0)
            else:
                assert x == y, name


DASK_POINTS = [2.5, 5.0, 0.0, 6.5]      # a critical and a failing point among them


@pytest.fixture(scope="module")
def local_table(crane):
    """The local pool's table, made before the Dask cluster starts (no fork of a process
    that runs the cluster's threads)."""
    return pc.sweep(crane.build, crane_points(DASK_POINTS), executor="local", reduced_order=4)


def test_dask_gives_the_same_table_as_the_local_pool(crane, local_table, dask_client):
    points = crane_points(DASK_POINTS)
    local = local_table
    on_client = pc.sweep(crane.build, points, executor="dask", scheduler=dask_client,
                         reduced_order=4)
    address = dask_client.scheduler.address
    on_address = pc.sweep(crane.build, points, executor="dask", scheduler=address,
                          reduced_order=4)
    assert len(local.failed) == 1
    _same_table(local, on_client)
    _same_table(local, on_address)
    assert on_client.executor == "dask"
    # The client passed in stays usable (the sweep only closes clients it opened).
    assert dask_client.submit(sum, [1, 2]).result() == 3


def test_dask_ships_closures_and_reports_progress(dask_client):
    gain = 3.0
    calls = []
    result = pc.sweep(lambda p: ([[-p["a"]]], [[gain]], [[1.0]]), pc.grid(a=[1.0, 2.0, 4.0]),
                      executor="dask", scheduler=dask_client,
                      progress=lambda d, t: calls.append((d, t)))
    assert [r["minimal_order"] for r in result.rows] == [1, 1, 1]
    # Analytic: for A = -a, B = gain, C = 1 the Gramians are P = gain^2 / (2a) and
    # Q = 1 / (2a), so the Hankel singular value is sqrt(P Q) = gain / (2a) (K. Glover, 1984).
    np.testing.assert_allclose([r["hankel_singular_values"][0] for r in result.rows],
                               [gain / 2.0, gain / 4.0, gain / 8.0], rtol=1e-12)
    assert calls[-1] == (3, 3)


def test_dask_without_a_scheduler_is_refused():
    pytest.importorskip("distributed")
    with pytest.raises(ValueError, match="scheduler"):
        pc.sweep(_first_order, [{"a": 1.0}], executor="dask")


def test_parquet_table_when_pyarrow_is_installed(tmp_path):
    pq = pytest.importorskip("pyarrow.parquet")
    result = pc.sweep(_first_order, pc.grid(a=[1.0, 2.0]), executor="serial")
    result.to_parquet(tmp_path / "t.parquet")
    table = pq.read_table(tmp_path / "t.parquet").to_pylist()
    assert [r["minimal_order"] for r in table] == [1, 1]
    assert list(table[0]) == list(result.columns)
