"""Tests for the packaged example models and their small API (plantcore.examples)."""

from __future__ import annotations

import os
import re

import numpy as np
import pytest
import scipy.linalg
import sympy

import plantcore as pc
from plantcore.examples import _generate

EXAMPLES = ("thermal_process", "motion_axis")


@pytest.fixture(scope="module")
def models():
    return {name: pc.load_example(name) for name in EXAMPLES}


# --- the API ---------------------------------------------------------------------------------

def test_list_examples_holds_our_models_and_only_model_files():
    names = pc.list_examples()
    assert set(EXAMPLES) <= set(names)
    assert names == sorted(names)
    for name in names:  # every listed entry loads as a model (sweep specs etc. are left out)
        assert isinstance(pc.load_example(name), pc.StateSpaceModel)


def test_example_path_points_at_a_packaged_file():
    path = pc.example_path("thermal_process")
    assert os.path.isfile(path) and path.endswith("thermal_process.toml")
    assert pc.example_path("thermal_process.toml") == path
    assert os.path.dirname(path) == os.path.dirname(os.path.abspath(_generate.__file__))


def test_unknown_example_lists_the_choices():
    with pytest.raises(ValueError, match=r"no packaged example called 'boiler'.*thermal_process"):
        pc.example_path("boiler")
    with pytest.raises(ValueError, match="must be a string"):
        pc.example_path(3)


def test_package_data_ships_the_example_files():
    # The demo must work from a wheel: every example file must match a package-data pattern.
    import fnmatch

    try:
        import tomllib
    except ImportError:  # Python 3.10
        import tomli as tomllib

    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(pc.__file__))))
    project = os.path.join(root, "pyproject.toml")
    if not os.path.isfile(project):
        pytest.skip("plantcore is not imported from a source checkout")
    with open(project, "rb") as f:
        patterns = tomllib.load(f)["tool"]["setuptools"]["package-data"]["plantcore"]
    for name in EXAMPLES:
        rel = os.path.relpath(pc.example_path(name), os.path.dirname(pc.__file__)).replace(os.sep, "/")
        assert any(fnmatch.fnmatch(rel, p) for p in patterns), rel


# --- the files match their recipe ------------------------------------------------------------

@pytest.mark.parametrize("name", EXAMPLES)
def test_packaged_file_equals_the_generator(models, name):
    built = _generate.EXAMPLE_BUILDERS[name]()
    m = models[name]
    for key in "ABCD":  # written with repr(): the round trip is exact
        np.testing.assert_array_equal(getattr(m, key), getattr(built, key))
    assert (m.states, m.inputs, m.outputs, m.dt, m.name) == \
        (built.states, built.inputs, built.outputs, built.dt, built.name)


def test_write_examples_regenerates_identical_files(tmp_path):
    written = _generate.write_examples(tmp_path)
    assert sorted(p.name for p in written) == sorted(f"{n}.toml" for n in EXAMPLES)
    for path in written:
        with open(path, encoding="utf-8") as f, open(pc.example_path(path.stem), encoding="utf-8") as g:
            assert f.read() == g.read()


@pytest.mark.parametrize("name", EXAMPLES)
def test_names_carry_units(models, name):
    m = models[name]
    unit = re.compile(r"_(degC|pct|A|mm_per_s)$")
    for label in m.inputs + m.outputs:
        assert unit.search(label), label
    if name == "thermal_process":
        assert all(unit.search(s) for s in m.states)


def test_time_domains_and_shapes(models):
    t, m = models["thermal_process"], models["motion_axis"]
    assert not t.is_discrete and (t.n, t.n_inputs, t.n_outputs) == (11, 3, 3)
    assert m.is_discrete and m.dt == 0.001 and (m.n, m.n_inputs, m.n_outputs) == (14, 1, 1)
    for model in (t, m):  # every mode is stable, as a real oven or axis would be
        ev = np.linalg.eigvals(model.A)
        assert (np.abs(ev).max() < 1.0) if model.is_discrete else (ev.real.max() < 0.0)


# --- the intended part sizes -----------------------------------------------------------------

@pytest.mark.parametrize("name", EXAMPLES)
def test_part_sizes_as_intended_with_clear_decisions(models, name):
    kd = pc.kalman_decomposition(models[name])
    assert tuple(kd.sizes) == _generate.INTENDED_PART_SIZES[name]
    # The story: every decision is far from the tolerance, both the exact cancellations
    # (dropped) and the near one (kept).
    # "Far" here: at least three times the fragility factor 100 (the motion axis's exact
    # cancellations leave rounding of about 1.4e-13 relative, a margin near 350).
    assert not kd.fragile
    assert min(d.margin for d in kd.decisions) > 300


def _exact(M):
    return sympy.Matrix([[sympy.Rational(float(x)) for x in row] for row in np.asarray(M).tolist()])


def test_thermal_part_sizes_in_exact_arithmetic(models):
    # Independent check with sympy's exact rational arithmetic on the file's own doubles:
    # controllable subspace R = range of [B, AB, ..., A^10 B], unobservable N = its dual's
    # null space (Kalman, "Mathematical description of linear dynamical systems", 1963).
    # Krylov matrices are fine here because the arithmetic is exact.
    m = models["thermal_process"]
    A, B, C = _exact(m.A), _exact(m.B), _exact(m.C)
    blocks = [B]
    for _ in range(m.n - 1):
        blocks.append(A * blocks[-1])
    R = sympy.Matrix.hstack(*blocks)
    rows = [C]
    for _ in range(m.n - 1):
        rows.append(rows[-1] * A)
    N = sympy.Matrix.vstack(*rows).nullspace()
    dim_r, dim_n = R.rank(), len(N)
    dim_sum = sympy.Matrix.hstack(R, *N).rank()
    both = dim_r + dim_n - dim_sum
    assert (dim_r - both, both, m.n - dim_sum, dim_n - both) == (7, 1, 2, 1)


def test_thermal_parts_are_the_story_directions(models):
    # Analytic derivation: zones 2 and 3 are identical, coupled alike and share one heater,
    # so the swap symmetry leaves e(z2) - e(z3) (air and wall) untouched by every input; the
    # two filter copies differ by e(fa) - e(fb), which is driven alike and averaged away;
    # the duct is driven by zone 4 and not measured.
    m = models["thermal_process"]
    kd = pc.kalman_decomposition(m)
    idx = {s: i for i, s in enumerate(m.states)}

    def span(*pairs):
        V = np.zeros((m.n, len(pairs)))
        for j, (plus, minus) in enumerate(pairs):
            V[idx[plus], j] = 1.0
            if minus:
                V[idx[minus], j] = -1.0
        return V

    expected = {
        "uncontrollable_observable": span(("zone2_air_temp_degC", "zone3_air_temp_degC"),
                                          ("zone2_wall_temp_degC", "zone3_wall_temp_degC")),
        "uncontrollable_unobservable": span(("zone1_sensor_filter_a_degC",
                                             "zone1_sensor_filter_b_degC")),
        "controllable_unobservable": span(("zone4_exhaust_duct_temp_degC", None)),
    }
    for part, V in expected.items():
        angles = scipy.linalg.subspace_angles(kd.basis(part), V)
        np.testing.assert_allclose(angles, 0.0, atol=1e-10, err_msg=part)


def test_motion_axis_minimal_order_matches_slycot(models):
    # Cross-check with python-control's minreal, which calls slycot's TB01PD (an orthogonal
    # staircase implementation independent of ours).  TB01PD's default tolerance
    # (n^2 eps, relative) sits right at the rounding noise of a 14-state model in
    # identification coordinates and keeps 4 spurious states; with a relative tolerance of
    # 1e-10 (between the noise, ~1e-14, and the smallest real coupling, ~1e-3) it agrees.
    pytest.importorskip("slycot")
    import control

    m = models["motion_axis"]
    reference = control.minreal(m.to_control(), tol=1e-10, verbose=False)
    assert reference.nstates == pc.minimal_realization(m).order == 6
    t = models["thermal_process"]
    assert control.minreal(t.to_control(), tol=1e-10, verbose=False).nstates == 7


def test_motion_axis_near_cancellation_is_real_but_negligible(models):
    m = models["motion_axis"]
    a = pc.analyze(m)
    narrow = a.narrow_modes
    # The one near-cancelling pair (built at radius 0.97, 230 Hz at 1 kHz sampling) is kept
    # by the minimal realization and flagged as a near cancellation.
    assert len(narrow) == 2 and all(mode.part == "controllable_observable" for mode in narrow)
    expected = 0.97 * np.exp(2j * np.pi * 230.0 * m.dt)
    for mode in narrow:
        z = complex(mode.value)
        assert abs(z - (expected if z.imag > 0 else expected.conjugate())) < 1e-8
    # A balanced truncation to the 4 states of the axis removes it with a tiny error bound.
    reduced = pc.balanced_truncation(a.minimal.model, order=4)
    gain = pc.peak_gain(m).value
    assert reduced.error_bound < 1e-3 * gain
    # ... while the true axis (current loop, friction pole, resonance) is what is left:
    # with scipy's ZOH discretization of the continuous axis as the reference.
    true_poles = np.sort_complex(np.linalg.eigvals(_generate._true_axis(m.dt)[0]))
    kept = np.sort_complex(np.linalg.eigvals(reduced.model.A))
    # (Truncation moves poles a little: the fast current-loop pole by about 0.004.)
    np.testing.assert_allclose(np.abs(kept), np.abs(true_poles), atol=0.01)


def test_thermal_balanced_truncation_to_the_three_wall_modes(models):
    m = models["thermal_process"]
    mr = pc.minimal_realization(m)
    gain = pc.peak_gain(m).value
    reduced = pc.balanced_truncation(mr.model, max_error=0.1 * gain)
    assert reduced.order == 3
    hsv = reduced.hankel_singular_values
    assert hsv[2] / hsv[3] > 5  # a clear gap after the three slow wall modes
