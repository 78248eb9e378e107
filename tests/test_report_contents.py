"""What a report shows is computed once, in the analysis layer, and reused by the renderer."""

import math

import numpy as np
import pytest

import plantcore as pc
from plantcore.analysis import report_contents
from plantcore.reduction import equivalence
from plantcore.reports.html import render_html

# Two stable modes, the second one unobservable (its C entry is zero): minimal order 1.
MODEL = ([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [1.0]], [[1.0, 0.0]])


def _refuse(*args, **kwargs):
    raise AssertionError("recomputed")


def test_the_model_peak_gain_is_computed_once_for_all_certificates(monkeypatch):
    # collect_report computes the peak gain of the model itself and hands it to both
    # certificates; inside check_equivalence it must then not be computed again.
    monkeypatch.setattr(equivalence, "peak_gain", _refuse)
    contents = report_contents.collect_report(MODEL, order=1, progress=False)
    assert contents.certificate.equivalent
    assert contents.certificate.reference_gain == pytest.approx(contents.peak_gain.value)
    assert contents.reduced_certificate is not None


def test_an_analysis_passed_in_is_not_repeated(monkeypatch, tmp_path):
    analysis = pc.analyze(MODEL)
    monkeypatch.setattr(report_contents, "analyze", _refuse)
    written = pc.write_html_report(analysis, tmp_path / "r.html", progress=False)
    assert written.contents.analysis is analysis
    assert 'id="certificate"' in written.path.read_text(encoding="utf-8")
    with pytest.raises(ValueError, match="tolerance"):
        pc.write_html_report(analysis, tmp_path / "s.html", tol=1e-6, progress=False)


def test_contents_are_rendered_as_they_are(tmp_path, monkeypatch):
    contents = report_contents.collect_report(MODEL, progress=False)
    # the renderer draws the sampled responses it is given and computes nothing itself
    monkeypatch.setattr(report_contents, "collect_report", _refuse)
    html = render_html(contents, progress=False)
    assert html.startswith("<!DOCTYPE html>")
    written = pc.write_html_report(contents, tmp_path / "c.html", progress=False)
    assert written.contents is contents
    labels = [r.label for r in contents.responses]
    # the default rule truncates the 1-state minimal model (to order 0 or 1)
    assert labels == ["original", "minimal", "reduced"]
    assert [r.states for r in contents.responses][:2] == [2, 1]
    for response in contents.responses:
        assert response.singular_values.shape == (response.frequencies.size, 1)
        assert np.all(np.isfinite(response.singular_values))


def _rigid_body_with_flexible_mode(discrete=False):
    # A rigid body (double integrator) and one flexible mode at 3 rad/s, 2 % damping,
    # one force and one position sensor, rotated by an orthogonal matrix so that the two
    # zero eigenvalues are computed at rounding level (about 1e-17), not exactly 0.
    A = np.zeros((4, 4))
    A[0, 1] = 1.0
    A[2:, 2:] = [[0.0, 1.0], [-9.0, -0.12]]
    B = np.array([[0.0], [1.0], [0.0], [1.0]])
    C = np.array([[1.0, 0.0, 1.0, 0.0]])
    Q, _ = np.linalg.qr(np.random.default_rng(5).standard_normal((4, 4)))
    A, B, C = Q.T @ A @ Q, Q.T @ B, C @ Q
    if discrete:
        import scipy.linalg
        dt = 0.05
        M = scipy.linalg.expm(np.block([[A, B], [np.zeros((1, 5))]]) * dt)
        return pc.StateSpaceModel(M[:4, :4], M[:4, 4:], C, dt=dt)
    return pc.StateSpaceModel(A, B, C)


@pytest.mark.parametrize("discrete", [False, True], ids=["continuous", "sampled"])
def test_grid_ignores_integrators_at_rounding_level(discrete):
    model = _rigid_body_with_flexible_mode(discrete)
    analysis = pc.analyze(model)
    w = report_contents._frequency_grid(model, analysis.modes, 50)
    # the flexible mode (3 rad/s) with a decade of margin: not 1e-18 .. 1e2
    assert 0.1 <= w[0] <= 0.3 + 1e-12
    assert w[-1] >= 3.0
    # the plotted original and minimal curves coincide where the certificate says so
    contents = report_contents.collect_report(model, progress=False)
    assert contents.certificate.equivalent
    original, minimal = contents.responses[:2]
    at = np.interp(np.log(original.frequencies), np.log(minimal.frequencies),
                   minimal.singular_values[:, 0])
    ok = np.isfinite(at) & np.isfinite(original.singular_values[:, 0])
    assert ok.sum() > 30
    assert np.max(np.abs(np.log(at[ok] / original.singular_values[ok, 0]))) < 0.05


# --- issue 21: plots that hold on integrators; issue 22: distance to the nearest zero ---------

def _rotated_rigid_body():
    """A rigid body (double integrator) and one flexible mode at 12 rad/s, damping 0.02, in
    rotated coordinates so that the integrator pair is computed at rounding level (our own
    scenario; the answer is known by construction)."""
    w, z = 12.0, 0.02
    A = np.array([[0, 1, 0, 0], [0, 0, 0, 0], [0, 0, 0, 1], [0, 0, -w * w, -2 * z * w]], float)
    B = np.array([[0.0], [1.0], [0.0], [1.0]])
    C = np.array([[1.0, 0.0, 1.0, 0.0]])
    T = np.linalg.qr(np.random.default_rng(3).standard_normal((4, 4)))[0]
    return pc.StateSpaceModel(T.T @ A @ T, T.T @ B, C @ T)


def test_integrators_set_no_frequency_and_the_plotted_curves_coincide():
    contents = report_contents.collect_report(_rotated_rigid_body(), progress=False)
    assert contents.certificate.equivalent
    original, minimal = contents.responses[:2]
    # the grid spans the flexible mode (12 rad/s) with a decade of margin, not 1e-18
    assert original.frequencies.min() == pytest.approx(1.2, rel=1e-3)
    assert minimal.frequencies.max() == pytest.approx(120.0, rel=1e-3)
    # the original is sampled on the minimal model's grid: at every plotted point the two
    # curves agree to the certificate's accuracy (here far below the tolerance 1e-9)
    shared = np.isin(minimal.frequencies, original.frequencies)
    assert shared.sum() == original.frequencies.size
    np.testing.assert_allclose(original.singular_values, minimal.singular_values[shared],
                               rtol=1e-9, atol=0)


def test_no_suggested_option_that_would_fail_for_a_boundary_mode():
    contents = report_contents.collect_report(_rotated_rigid_body(), progress=False)
    assert contents.reduction is None
    assert "--order" not in contents.reduction_problem
    # the rotated double integrator is a boundary pole of the transfer function: the peak
    # gain is infinite (issue 21), so the report names the boundary mode as the reason
    assert math.isinf(contents.peak_gain.value) and contents.peak_gain.boundary_pole
    assert "stability boundary" in contents.reduction_problem


def test_each_mode_knows_its_nearest_transmission_zero():
    # G(s) = (s + 1.001) / ((s + 1)(s + 2)): closed form, the zero -1.001 lies 0.001 from the
    # pole -1 and 0.999 from the pole -2; relative distances divide by max(|lambda|, 2) = 2.
    model = pc.from_transfer_function([1.0, 1.001], [1.0, 3.0, 2.0])
    contents = report_contents.collect_report(model, progress=False)
    assert contents.zeros.finite_zeros.size == 1
    by_pole = {round(m.value.real): d for m, d in zip(contents.analysis.modes,
                                                        contents.mode_zero_distances)}
    assert by_pole[-1].nearest_zero.real == pytest.approx(-1.001, rel=1e-9)
    assert by_pole[-1].distance == pytest.approx(0.001, rel=1e-6)
    assert by_pole[-2].distance == pytest.approx(0.999, rel=1e-9)
    assert by_pole[-1].relative_distance == pytest.approx(0.0005, rel=1e-6)


def test_a_model_without_finite_zeros_has_infinite_distances():
    contents = report_contents.collect_report(([[-1.0, 1.0], [0.0, -2.0]], [[0.0], [1.0]],
                                               [[1.0, 0.0]]), progress=False)
    assert contents.zeros.finite_zeros.size == 0 and contents.zeros.infinite_zero_count == 2
    assert all(d.nearest_zero is None and d.distance == np.inf
               for d in contents.mode_zero_distances)


@pytest.mark.parametrize("dt", [None, 0.1])
def test_sampled_responses_of_a_large_model_agree_with_dense_solves(dt):
    # above SCHUR_RESPONSE_STATES the responses come from one Schur form: the same
    # singular values as a dense solve per frequency (both backward stable; common practice)
    rng = np.random.default_rng(5)
    n = report_contents.SCHUR_RESPONSE_STATES + 20
    A = rng.standard_normal((n, n)) / math.sqrt(n) - 1.2 * np.eye(n)
    if dt:
        A /= 1.3 * np.max(np.abs(np.linalg.eigvals(A)))
    model = pc.StateSpaceModel(A, rng.standard_normal((n, 2)), rng.standard_normal((3, n)),
                               rng.standard_normal((3, 2)), dt=dt)
    w = np.geomspace(1e-2, 30.0, 25)
    points = np.exp(1j * w * dt) if dt else 1j * w
    dense = np.array([np.linalg.svd(model.transfer_at(z), compute_uv=False) for z in points])
    np.testing.assert_allclose(report_contents._singular_values(model, w), dense, rtol=1e-10)


def test_a_grid_point_on_an_eigenvalue_is_left_out_of_a_large_model():
    n = report_contents.SCHUR_RESPONSE_STATES + 2
    A = np.diag(np.concatenate([[0.0], -np.arange(1.0, n)]))
    A[0, 1] = 1.0
    model = pc.StateSpaceModel(A, np.ones((n, 1)), np.ones((1, n)))
    out = report_contents._singular_values(model, np.array([0.0, 1.0]))
    assert np.isnan(out[0, 0]) and np.isfinite(out[1, 0])
