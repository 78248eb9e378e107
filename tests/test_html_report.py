"""Tests for the HTML report (plantcore.reports.html) and ``plantcore report``."""

from __future__ import annotations

import base64
import html
import os
import re
from html.parser import HTMLParser

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION
from plantcore.reports.html import (
    DEFAULT_RELATIVE_ERROR,
    collect_report,
    render_html,
    write_html_report,
)

SECTION_IDS = ("model", "verdicts", "part-sizes", "rank-decisions", "modes", "eigenvalues",
               "frequency-response", "hankel-singular-values", "certificate", "caution")
EVIL = ["<script>alert(1)</script>", 'a"b', "x&y"]


@pytest.fixture(scope="module")
def thermal_report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    out = folder / "oven.html"
    report = write_html_report(pc.load_example("thermal_process"), out,
                               source=pc.example_path("thermal_process"))
    assert report.path == out.resolve()
    return report.path.read_text(encoding="utf-8"), report.contents


def _images(text):
    return re.findall(r'<img src="([^"]*)"', text)


class _TagBalance(HTMLParser):
    """Checks that every element is closed, in order (the standard library's HTML parser)."""

    VOID = frozenset({"meta", "img", "br", "hr", "input", "col", "wbr", "source"})

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack = []
        self.problems = []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.problems.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()


def assert_well_formed(text):
    checker = _TagBalance()
    checker.feed(text)
    checker.close()
    assert not checker.problems, checker.problems[:3]
    assert checker.stack == [], checker.stack


def assert_self_contained(text):
    """No network address, no script, no external style sheet, images inline only."""
    lowered = text.lower()
    assert "http://" not in lowered and "https://" not in lowered
    assert "<script" not in lowered
    assert "<link" not in lowered
    assert "@import" not in lowered and "url(" not in lowered
    assert "<iframe" not in lowered and "<object" not in lowered and "<embed" not in lowered
    for src in _images(text):
        assert src.startswith("data:image/png;base64,")
    for href in re.findall(r'href="([^"]*)"', text):
        assert href.startswith("#"), href  # in-page navigation only
    assert_well_formed(text)


def test_every_section_is_present_in_order(thermal_report):
    text, _ = thermal_report
    positions = [text.index(f'<section id="{sid}">') for sid in SECTION_IDS]
    assert positions == sorted(positions)
    for heading in ("Verdicts", "Kalman parts", "Rank decisions", "Modes", "Eigenvalue map",
                    "Frequency response", "Hankel singular values", "Equivalence certificate"):
        assert f"</span>{heading}" in text


def test_report_is_self_contained(thermal_report):
    text, _ = thermal_report
    assert_self_contained(text)
    assert text.startswith("<!DOCTYPE html>")
    assert "@media print" in text


def test_plots_are_valid_png_images(thermal_report):
    text, _ = thermal_report
    images = _images(text)
    assert len(images) == 3  # eigenvalues, frequency response, Hankel singular values
    for src in images:
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        assert b"matplotlib.org" not in data  # no software metadata with an address


def test_content_matches_the_library(thermal_report):
    text, contents = thermal_report
    a = contents.analysis
    assert tuple(a.sizes) == (7, 1, 2, 1)
    # part sizes are in the table, in state order
    sizes = re.findall(r'<td><span class="swatch p(\d)"></span>\d\. [^<]*</td><td class="n">(\d+)</td>',
                       text)
    assert [(int(p), int(s)) for p, s in sizes] == [(1, 7), (2, 1), (3, 2), (4, 1)]
    # one row per rank decision and per mode
    decisions = text[text.index('id="rank-decisions"'):text.index('id="modes"')]
    assert decisions.count("<tr><td>") == len(a.decisions)
    modes = text[text.index('id="modes"'):text.index('id="eigenvalues"')]
    assert modes.count('<tr><td class="n">') == len(a.modes) == 11
    # the reduction follows the documented default and its bound holds
    red = contents.reduction
    assert red.order == 3
    assert red.error_bound <= DEFAULT_RELATIVE_ERROR * contents.peak_gain.value
    assert contents.reduced_certificate.peak_error <= red.error_bound
    assert contents.certificate.equivalent
    # the story directions are named
    assert "0.71 zone1_sensor_filter_a_degC - 0.71 zone1_sensor_filter_b_degC" in text
    assert "zone4_exhaust_duct_temp_degC" in text


def test_caution_is_the_last_section(thermal_report):
    text, _ = thermal_report
    caution = text.index('<section id="caution">')
    assert html.escape(SAFETY_CAUTION, quote=True) in text[caution:]
    assert text.rindex("<section") == caution


def test_names_are_escaped(tmp_path):
    model = pc.StateSpaceModel(np.diag([-1.0, -2.0, -3.0]), [[1.0], [1.0], [0.0]],
                               [[1.0, 0.0, 1.0]], states=EVIL, inputs=['in"put<1>'],
                               outputs=["out&put"], name="<b>plant</b> & 'co'")
    text = write_html_report(model, tmp_path / "r.html").path.read_text(encoding="utf-8")
    assert_self_contained(text)
    for raw in EVIL + ['in"put<1>', "out&put", "<b>plant</b>"]:
        assert raw not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "a&quot;b" in text and "x&amp;y" in text
    assert "in&quot;put&lt;1&gt;" in text and "out&amp;put" in text
    assert "&lt;b&gt;plant&lt;/b&gt; &amp; &#x27;co&#x27;" in text
    # nothing of a name leaks into an attribute unescaped
    for alt in re.findall(r'alt="([^"]*)"', text):
        assert "<" not in alt


def test_discrete_model_and_analysis_to_html():
    a = pc.analyze(pc.load_example("motion_axis"))
    text = a.to_html()  # Analysis.to_html -> plantcore.reports.text.analysis_html -> html_report
    assert_self_contained(text)
    assert "near cancellation" in text       # the narrow pair is flagged
    assert "discrete time, sample time 0.001" in text
    for sid in SECTION_IDS:
        assert f'<section id="{sid}">' in text


def test_edge_cases_render(tmp_path):
    # a static gain (no states), a model with an integrator (mode on the stability boundary:
    # no Hankel values, no default truncation), and an unstable model (kept unreduced)
    static = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), [[2.0]])
    integrator = pc.StateSpaceModel([[0.0, 1.0], [0.0, -1.0]], [[0.0], [1.0]], [[1.0, 0.0]])
    unstable = pc.StateSpaceModel(np.diag([0.5, -1.0, -20.0]), np.ones((3, 1)), np.ones((1, 3)))
    reports = [collect_report(static, progress=False), collect_report(integrator, progress=False),
               collect_report(unstable, order=2, progress=False)]
    for contents in reports:
        text = render_html(contents, progress=False)
        assert_self_contained(text)
        assert all(f'<section id="{sid}">' in text for sid in SECTION_IDS)
    assert reports[0].reduction is None and "no states" in reports[0].reduction_problem
    assert reports[1].reduction is None and "stability boundary" in reports[1].reduction_problem
    assert reports[2].reduction.unstable_order == 1 and reports[2].reduction.order == 2


def test_options_are_checked():
    model = pc.load_example("thermal_process")
    with pytest.raises(ValueError, match="either order or max_error"):
        collect_report(model, order=2, max_error=0.1)
    with pytest.raises(ValueError, match="above the minimal order 7"):
        collect_report(model, order=9)
    with pytest.raises(ValueError, match="whole number of states"):
        collect_report(model, order=2.5)
    with pytest.raises(ValueError, match="progress must be"):
        collect_report(model, progress="yes")


# --- command line ----------------------------------------------------------------------------

def test_cli_report_with_max_error(tmp_path, capsys):
    out = tmp_path / "axis.html"
    code = main(["report", pc.example_path("motion_axis"), "-o", str(out), "--max-error", "0.05"])
    assert code == 0
    said = capsys.readouterr()
    assert said.out.strip() == f"report written to {out} (14 states, minimal 6, reduced 4)"
    assert said.err == ""  # not a terminal: no progress
    assert_self_contained(out.read_text(encoding="utf-8"))


def _one_line_error(capsys, code):
    said = capsys.readouterr()
    assert code == 2
    assert said.out == ""
    lines = said.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in said.err
    return lines[0]


def test_cli_report_bad_input(tmp_path, capsys):
    out = tmp_path / "r.html"
    missing = tmp_path / "missing.toml"
    line = _one_line_error(capsys, main(["report", str(missing), "-o", str(out)]))
    assert "missing.toml" in line
    bad = tmp_path / "bad.toml"
    bad.write_text('A = [[-1.0]]\nB = [[1.0]]\nC = [["x"]]\n', encoding="utf-8")
    line = _one_line_error(capsys, main(["report", str(bad), "-o", str(out)]))
    assert "bad.toml" in line and "C" in line
    line = _one_line_error(capsys, main(["report", pc.example_path("thermal_process"), "-o",
                                         str(out), "--order", "2", "--max-error", "1"]))
    assert "not allowed" in line
    line = _one_line_error(capsys, main(["report", pc.example_path("thermal_process"), "-o",
                                         str(out), "--order", "8"]))
    assert "minimal order 7" in line
    line = _one_line_error(capsys, main(["report", pc.example_path("thermal_process"), "-o",
                                         str(tmp_path / "no" / "r.html")]))
    assert not out.exists()
    assert sorted(os.listdir(tmp_path)) == ["bad.toml"]  # nothing written, no temporary left


def test_cli_report_never_overwrites_its_input(tmp_path, capsys):
    model = tmp_path / "plant.toml"
    pc.save_model(pc.load_example("thermal_process"), model)
    before = model.read_bytes()
    _one_line_error(capsys, main(["report", str(model), "-o", str(model)]))
    assert model.read_bytes() == before


def test_the_well_formedness_check_can_fail():
    with pytest.raises(AssertionError):
        assert_well_formed("<section><p>text</section>")
    with pytest.raises(AssertionError):
        assert_well_formed("<main><div>")
    assert_well_formed('<p>a<br><img src="x" alt="y"></p>')


# --- removed modes that are not stable (issue 20, item 2) -----------------------------------

def test_hidden_unstable_mode_is_shown_above_every_section(tmp_path):
    # By construction (zero row of B, PBH test, Hautus 1969): 0.5 cannot be moved by the input.
    model = (np.diag([-1.0, -2.0, 0.5]), [[1.0], [1.0], [0.0]], [[1.0, 1.0, 1.0]])
    text = write_html_report(model, tmp_path / "hidden.html", progress=False).path.read_text(
        encoding="utf-8")
    alert = text.index('<div class="alert" role="alert">WARNING: the minimal realization removed')
    assert alert < text.index('<section id="model">')
    assert "0.5 (unstable, in the uncontrollable part" in text
    assert re.search(r'Removed modes not stable</div><div class="a">1<', text)
    assert SAFETY_CAUTION in html.unescape(text)


def test_stable_model_report_has_no_hidden_mode_alert(thermal_report):
    text, contents = thermal_report
    assert contents.analysis.removed_unstable_modes == ()
    assert 'class="alert"' not in text
    assert re.search(r'Removed modes not stable</div><div class="a">0<', text)


# --- issue 21: what a user sees -----------------------------------------------------------

def _rotated_rigid_body():
    """A rigid body and one flexible mode in rotated coordinates (integrators computed at
    rounding level; our own scenario)."""
    w, z = 12.0, 0.02
    A = np.array([[0, 1, 0, 0], [0, 0, 0, 0], [0, 0, 0, 1], [0, 0, -w * w, -2 * z * w]], float)
    T = np.linalg.qr(np.random.default_rng(3).standard_normal((4, 4)))[0]
    return pc.StateSpaceModel(T.T @ A @ T, T.T @ np.array([[0.0], [1.0], [0.0], [1.0]]),
                              np.array([[1.0, 0.0, 1.0, 0.0]]) @ T)


@pytest.fixture(scope="module")
def rigid_contents():
    return collect_report(_rotated_rigid_body(), progress=False)


def _section_html(text, sid):
    start = text.index(f'<section id="{sid}">')
    return text[start:text.index("</section>", start)]


def test_rounding_level_values_are_shown_as_zero(rigid_contents):
    # the raw values are at rounding level (about 1e-15) and stay so in the results
    raw = [m.value for m in rigid_contents.analysis.modes if m.marginal]
    assert len(raw) == 2 and all(0 < abs(v) < 1e-12 for v in raw)
    modes = _section_html(render_html(rigid_contents, progress=False), "modes")
    first_cells = re.findall(r'<tr><td class="n">\d+</td><td class="n">([^<]*)</td>', modes)
    assert first_cells[:2] == ["0", "0"]
    assert "10<sup>&minus;1" not in modes          # no 1e-15 or 1e-16 anywhere in the table
    text = rigid_contents.analysis.to_text()
    assert "e-16" not in text.split("Modes (margin")[1].split("Hankel")[0]
    assert "not available: Hankel singular values not available" not in text


def test_mode_table_names_the_subsystem_of_each_margin_and_the_nearest_zero(rigid_contents):
    modes = _section_html(render_html(rigid_contents, progress=False), "modes")
    assert "on the controllable part of the model for a controllable mode" in modes
    assert "Nearest transmission zero" in modes
    # the zeros of this model are a lightly damped pair near -0.12 +- 8.48j (antiresonance)
    assert "8.484j" in modes


def test_a_long_mode_table_opens_with_a_summary_and_collapses_the_rest():
    n = 42                                   # just past FULL_MODE_TABLE_LIMIT (40)
    rng = np.random.default_rng(5)
    model = (np.diag(-np.geomspace(0.1, 100.0, n)), rng.standard_normal((n, 2)),
             rng.standard_normal((2, n)))
    text = render_html(collect_report(model, progress=False), progress=False)
    modes = _section_html(text, "modes")
    summary_at, details_at = modes.index("deserve a look"), modes.index('<details class="all-modes">')
    assert summary_at < details_at
    assert '<details class="all-modes" open' not in modes
    full = modes[details_at:]
    assert len(re.findall(r"<tr><td class=\"n\">\d+</td>", full)) == n
    assert len(re.findall(r"<tr><td class=\"n\">\d+</td>", modes[:details_at])) == 12


def test_fragment_is_one_scoped_div():
    contents = collect_report(MODEL_FOR_FRAGMENT, progress=False)
    fragment = render_html(contents, progress=False, fragment=True)
    assert fragment.startswith('<div class="plantcore-report">')
    assert "<html" not in fragment and "<body" not in fragment
    css = re.search(r"<style>(.*?)</style>", fragment, re.DOTALL).group(1)
    css = re.sub(r"@media[^{]*\{", "", css)
    selectors = [sel.strip() for block in re.findall(r"([^{}]+)\{[^{}]*\}", css)
                 for sel in block.split(",") if sel.strip()]
    assert selectors and all(sel.startswith(".plantcore-report") for sel in selectors), \
        [s for s in selectors if not s.startswith(".plantcore-report")]


MODEL_FOR_FRAGMENT = ([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [1.0]], [[1.0, 0.0]])


def test_contents_bar_can_wrap():
    text = render_html(collect_report(MODEL_FOR_FRAGMENT, progress=False), progress=False)
    nav = re.search(r'<nav class="contents"[^>]*>(.*?)</nav>', text, re.DOTALL).group(1)
    assert nav.count("</a> <a") == len(SECTION_IDS) - 1        # whitespace between the links
    assert "nowrap" not in re.search(r"nav\.contents[^{]*\{[^}]*\}", text).group(0)


def _label_boxes(fig, axis):
    renderer = fig.canvas.get_renderer()
    lo, hi = sorted(axis.get_view_interval())
    return [t.label1.get_window_extent(renderer) for t in axis.get_major_ticks()
            if t.label1.get_visible() and t.label1.get_text() and lo <= t.get_loc() <= hi]


@pytest.mark.filterwarnings("ignore::plantcore.AccuracyWarning")  # such a spread is ill-conditioned
def test_eigenvalue_map_is_readable_over_twelve_decades():
    # lightly damped modes from 1e-5 to 1e7 rad/s in the imaginary part, with real parts
    # from 1e-7 to 1e5: one model, twelve decades
    from scipy.linalg import block_diag

    from plantcore.reports.plots import eigenvalue_figure

    blocks = [np.array([[-0.01 * w, w], [-w, -0.01 * w]]) for w in 10.0 ** np.arange(-5, 8, 2)]
    A = block_diag(*blocks)
    n = A.shape[0]
    contents = collect_report((A, np.ones((n, 1)), np.ones((1, n))), progress=False)
    fig, note = eigenvalue_figure(contents)
    ax = fig.axes[0]
    assert ax.get_yscale() == "symlog" and "logarithmic" in note
    fig.canvas.draw()
    for axis in (ax.xaxis, ax.yaxis):
        boxes = _label_boxes(fig, axis)
        assert len(boxes) >= 3
        assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])


def test_integrators_are_drawn_at_zero(rigid_contents):
    from plantcore.reports.plots import eigenvalue_figure, plotted_eigenvalues

    drawn = plotted_eigenvalues(rigid_contents.model, rigid_contents.analysis.modes)
    assert np.count_nonzero(drawn == 0) == 2
    fig, _ = eigenvalue_figure(rigid_contents)
    assert fig.axes[0].get_xscale() == "linear"       # no scale set by 1e-15


def test_every_public_result_has_a_short_repr_and_a_rich_display():
    import dataclasses

    analysis = pc.analyze(MODEL_FOR_FRAGMENT)
    assert len(repr(analysis)) <= 320 and repr(analysis).startswith("Analysis(")
    page = analysis._repr_html_()
    assert page.startswith('<div class="plantcore-report">') and "<details>" in page
    for name in pc.__all__:
        obj = getattr(pc, name)
        if isinstance(obj, type) and dataclasses.is_dataclass(obj):
            assert callable(getattr(obj, "_repr_html_", None)), name
    assert len(repr(pc.minimal_realization(MODEL_FOR_FRAGMENT))) <= 320


def test_plotting_functions_return_figures(rigid_contents):
    from matplotlib.figure import Figure

    figures = [pc.plot_frequency_response(MODEL_FOR_FRAGMENT),
               pc.plot_hankel_singular_values(MODEL_FOR_FRAGMENT),
               pc.plot_eigenvalue_map(rigid_contents)]
    assert all(isinstance(f, Figure) for f in figures)
    labels = [line.get_label() for line in figures[0].axes[0].get_lines()]
    assert "original, 2 states" in labels and "minimal, 1 state" in labels
    with pytest.raises(ValueError, match="stability boundary"):
        pc.plot_hankel_singular_values(rigid_contents)
