"""Norms, Hankel values, balanced truncation, distances and the report at extreme scales.

Issue 20 ("any scale"): models whose entries lie near 1e+-155 (where squares overflow or
underflow) or are scaled by exact powers of two up to 2^+-450.  The expected values follow
from exact scaling laws, derived by hand from the definitions (common practice): with
``A, B, C`` multiplied by ``s`` in continuous time, ``G_s(p) = s G(p / s)``, so the peak
gain is multiplied by ``s`` (at ``s`` times the frequency), the H2 norm by ``s^(3/2)``
(``||G_s||_2^2 = integral s^2 |G(j w / s)|^2 dw = s^3 ||G||_2^2``) and the Hankel singular
values by ``s`` (the Hankel operator of ``G(p / s)`` has the same singular values as that
of ``G``).  In discrete time (``B``, ``C`` multiplied by ``s``, ``A`` unchanged) all three
are multiplied by ``s^2``.  The suite turns every RuntimeWarning into an error, so each test
also checks that no square overflows.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

import plantcore as pc
from plantcore.analysis import report_contents
from plantcore.cli import main
from plantcore.reduction.power_of_two_scaling import model_scaling
from plantcore.structure.distance import distance_to_uncontrollability, distance_to_unobservability


def _base(discrete: bool):
    """A seeded 5-state, 2-input, 2-output model, stable (continuous or sampled)."""
    rng = np.random.default_rng(20)
    A = rng.standard_normal((5, 5)) - 3.0 * np.eye(5)
    if discrete:
        A = A / (1.25 * np.max(np.abs(np.linalg.eigvals(A))))
    return A, rng.standard_normal((5, 2)), rng.standard_normal((2, 5))


def _scaled(k: int, discrete: bool):
    A, B, C = _base(discrete)
    return pc.StateSpaceModel(A if discrete else np.ldexp(A, k), np.ldexp(B, k), np.ldexp(C, k),
                              dt=0.1 if discrete else None)


@pytest.mark.parametrize(("k", "discrete"), [(-450, False), (450, False), (-514, False),
                                              (514, False), (-450, True), (450, True)])
def test_norms_follow_exact_power_of_two_scalings(k, discrete):
    base, model = _scaled(0, discrete), _scaled(k, discrete)
    gain_power, h2_power = (2 * k, 2 * k) if discrete else (k, 3 * k // 2)
    p0, p = pc.peak_gain(base), pc.peak_gain(model)
    # the rescaled model carries the same digits: the laws hold to the last bit
    assert p.value == math.ldexp(p0.value, gain_power)
    assert p.upper_bound == math.ldexp(p0.upper_bound, gain_power)
    assert p.frequency == (p0.frequency if discrete else math.ldexp(p0.frequency, k))
    assert pc.h2_norm(model) == math.ldexp(pc.h2_norm(base), h2_power)
    hsv0, hsv = pc.hankel_singular_values(base), pc.hankel_singular_values(model)
    np.testing.assert_array_equal(hsv, np.ldexp(hsv0, gain_power))


@pytest.mark.parametrize("factor", [1e155, 1e-155, 1e200])
def test_h2_norm_and_peak_gain_of_a_model_in_extreme_units(factor):
    # 1e155 is not a power of two: the laws hold to rounding; before the rescaling the H2
    # norm of the 1e155 model was inf (its true value, about 1e232, is a double)
    A, B, C = _base(False)
    base = pc.StateSpaceModel(A, B, C)
    model = pc.StateSpaceModel(A * factor, B * factor, C * factor)
    assert pc.h2_norm(model) == pytest.approx(pc.h2_norm(base) * factor ** 1.5, rel=1e-12)
    peak = pc.peak_gain(model)
    assert peak.value == pytest.approx(pc.peak_gain(base).value * factor, rel=1e-12)
    # the base model peaks at 0 rad/s; the scaled one within rounding of 0 on its own scale
    w0 = pc.peak_gain(base).frequency
    assert abs(peak.frequency - w0 * factor) <= 1e-8 * factor * max(w0, 1.0)


@pytest.mark.parametrize("discrete", [False, True])
@pytest.mark.parametrize("k", [-450, 450])
def test_balanced_truncation_comes_back_in_the_original_units(k, discrete):
    base, model = _scaled(0, discrete), _scaled(k, discrete)
    gain_power = 2 * k if discrete else k
    r0, r = pc.balanced_truncation(base, order=3), pc.balanced_truncation(model, order=3)
    assert r.error_bound == math.ldexp(r0.error_bound, gain_power)
    # same transfer function as the plain inverse scaling, and still balanced: A by the
    # time scaling, B and C each by the square root of the whole gain factor
    time = 0 if discrete else k
    half = (gain_power + time) // 2
    np.testing.assert_array_equal(r.model.A, np.ldexp(r0.model.A, time))
    np.testing.assert_array_equal(r.model.B, np.ldexp(r0.model.B, half))
    np.testing.assert_array_equal(r.model.C, np.ldexp(r0.model.C, half))


def test_a_scaling_is_the_identity_on_ordinary_models():
    assert model_scaling(_scaled(0, False)).is_identity
    assert model_scaling(_scaled(40, False)).is_identity      # 1e12 (gain 1e24): in the band
    scaling = model_scaling(_scaled(300, False))
    assert scaling.time % 2 == 0 and scaling.gain % 2 == 0 and not scaling.is_identity


@pytest.mark.parametrize("factor", [1e155, 1e-155, 1e300])
def test_distances_are_relative_and_follow_the_scale(factor):
    rng = np.random.default_rng(3)
    A = rng.standard_normal((4, 4)) - 2.0 * np.eye(4)
    B, C = rng.standard_normal((4, 1)), rng.standard_normal((1, 4))
    for distance in (distance_to_uncontrollability, distance_to_unobservability):
        d0 = distance((A, B, C))
        d = distance((A * factor, B * factor, C * factor))
        assert d.value == pytest.approx(d0.value, rel=1e-12)
        assert abs(d.at - d0.at * factor) <= 1e-12 * abs(d0.at * factor)


def test_report_frequency_grid_of_a_model_in_large_units():
    A = np.diag([-1.0, -100.0]) * 1e155
    model = pc.StateSpaceModel(A, np.ones((2, 1)), np.ones((1, 2)))
    modes = [SimpleNamespace(value=v) for v in np.diag(A)]
    grid = report_contents._frequency_grid(model, modes, 5)
    np.testing.assert_allclose(grid[[0, -1]], [1e154, 1e158], rtol=1e-12)


def test_report_frequency_grid_of_a_tiny_sample_time():
    # Nyquist frequency pi / 1e-300: a double, so the grid is drawn up to it
    model = pc.StateSpaceModel(np.diag([0.5, 1e-200]), np.ones((2, 1)), np.ones((1, 2)), dt=1e-300)
    modes = [SimpleNamespace(value=v) for v in (0.5, 1e-200)]
    grid = report_contents._frequency_grid(model, modes, 5)
    assert np.all(np.isfinite(grid)) and grid[-1] == pytest.approx(math.pi * 1e300, rel=1e-12)


def test_report_refuses_a_subnormal_sample_time_in_one_line(tmp_path, capsys):
    model = pc.StateSpaceModel(np.diag([0.5, -0.3]), np.ones((2, 1)), np.ones((1, 2)), dt=1e-310)
    source = tmp_path / "fast.toml"
    pc.save_model(model, source)
    with pytest.raises(ValueError, match=r"sample_time 1e-310 .* 3.14e\+310 rad/s"):
        report_contents.collect_report(model, progress=False)
    assert main(["report", str(source), "-o", str(tmp_path / "fast.html")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "sample_time" in err and "Traceback" not in err
    assert not (tmp_path / "fast.html").exists()


@pytest.mark.parametrize("k", [-1000, -515, 515, 1000])
def test_mode_table_follows_exact_power_of_two_scalings(k):
    # scaling A, B and C by 2^k scales the eigenvalues by 2^k and leaves the (relative)
    # margins as they are: exact scaling laws (common practice)
    A, B, C = _base(False)
    reference = pc.classify_modes(pc.StateSpaceModel(A, B, C))
    scaled = pc.classify_modes(_scaled(k, False))
    assert len(scaled) == len(reference)
    for mode, ref in zip(scaled, reference):
        assert abs(mode.value - math.ldexp(1.0, k) * ref.value) <= \
            1e-12 * math.ldexp(1.0, k) * abs(ref.value)
        assert mode.controllability_margin == pytest.approx(ref.controllability_margin, rel=1e-9)
        assert mode.observability_margin == pytest.approx(ref.observability_margin, rel=1e-9)
        assert (mode.stable, mode.marginal, mode.part) == (ref.stable, ref.marginal, ref.part)


def test_inspect_and_report_of_a_model_near_1e155(tmp_path, capsys):
    # entries near 1e155: squares overflow, so every norm and distance must be scaled
    A, B, C = _base(False)
    model = pc.StateSpaceModel(A * 1e155, B * 1e155, C * 1e155)
    source = tmp_path / "large.toml"
    pc.save_model(model, source)
    assert main(["inspect", str(source)]) == 0
    assert main(["report", str(source), "-o", str(tmp_path / "large.html")]) == 0
    assert "Traceback" not in capsys.readouterr().err
    assert (tmp_path / "large.html").stat().st_size > 0
