"""Tests of plantcore.analysis (analyze, Analysis and its renderings) and ``plantcore inspect``.

External references:
- Known-structure systems (catalog): part sizes fixed by construction (R. E. Kalman, 1963).
- python-control's hsvd (Hankel singular values via slycot) for the stable case.
- JSON safety checked with the standard library's json.dumps(allow_nan=False).
"""

import json
import math

import catalog
import control
import numpy as np
import pytest
import scipy.linalg
from numpy.testing import assert_allclose

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION
from plantcore.structure.kalman import PART_NAMES


def _walk(obj, path="root"):
    """Assert that a structure holds only JSON-native Python types."""
    if obj is None or isinstance(obj, (bool, str)):
        return
    if isinstance(obj, int):
        assert type(obj) is int, path
        return
    if isinstance(obj, float):
        assert type(obj) is float and math.isfinite(obj), path
        return
    if isinstance(obj, list):
        for i, v in enumerate(obj):
            _walk(v, f"{path}[{i}]")
        return
    if isinstance(obj, dict):
        for k, v in obj.items():
            assert isinstance(k, str), path
            _walk(v, f"{path}.{k}")
        return
    raise AssertionError(f"{path}: {type(obj).__name__} is not JSON-native")


ZONES = ["zone1", "zone2", "zone3", "zone4", "zone5"]


def zoned_model():
    """Five heating zones: zone4 is not driven, zone5 is driven but not measured, zone2 and
    zone3 are measured together; the unstable zone1 is both driven and measured."""
    A = np.diag([0.2, -1.0, -2.0, -3.0, -4.0])
    A[1, 0] = 0.5
    B = np.array([[1.0], [1.0], [1.0], [0.0], [1.0]])
    C = np.array([[1.0, 1.0, -1.0, 1.0, 0.0]])
    return pc.StateSpaceModel(A, B, C, states=ZONES, name="drying kiln")


def test_analyze_assembles_the_parts_consistently():
    for case in catalog.catalog()[::4]:
        a = pc.analyze(case.model)
        kd = pc.kalman_decomposition(case.model)
        assert tuple(a.sizes) == case.sizes == tuple(kd.sizes)
        assert a.minimal_order == case.minimal_order == a.minimal.order
        assert a.is_minimal == (case.sizes[1:] == (0, 0, 0))
        modes = pc.classify_modes(case.model)
        assert [m.value for m in a.modes] == [m.value for m in modes]
        assert [m.part for m in a.modes] == [m.part for m in modes]
        assert a.stabilizable and a.detectable                 # the catalog is stable
        assert_allclose(a.hankel_singular_values, pc.hankel_singular_values(case.model),
                        rtol=1e-12, atol=1e-15)
        assert a.decisions == kd.decisions and a.fragile == kd.fragile
        for name, size in zip(PART_NAMES, kd.sizes):
            assert len(a.part_directions[name]) == size


def test_hankel_values_agree_with_python_control():
    model = catalog.known_structure((3, 0, 0, 0), inputs=2, outputs=2, seed=4).model
    a = pc.analyze(model)
    assert_allclose(a.hankel_singular_values, control.hankel_singular_values(model.to_control()),
                    rtol=1e-9)


def test_zoned_model_verdicts_and_directions():
    """By hand: zone4 has no input and nothing drives it, so it is not controllable but it is
    measured (part 3); zone5 is driven but neither measured nor coupled to a measured zone
    (part 2); zones 1-3 have distinct eigenvalues, nonzero input and output weights (zone2 is
    also driven through zone1), so they form part 1; part 4 is empty."""
    a = pc.analyze(zoned_model())
    assert tuple(a.sizes) == (3, 1, 1, 0)
    assert a.stabilizable and a.detectable and not a.is_minimal
    dirs = a.part_directions
    assert dirs["controllable_observable"] == ("1.00 zone1", "1.00 zone2", "1.00 zone3")
    assert dirs["controllable_unobservable"] == ("1.00 zone5",)
    assert dirs["uncontrollable_observable"] == ("1.00 zone4",)
    assert dirs["uncontrollable_unobservable"] == ()


def test_text_report_shows_every_required_piece():
    a = pc.analyze(zoned_model())
    text = a.to_text()
    assert "drying kiln" in text and "5 states, 1 input, 1 output; continuous time" in text
    for i, (name, size) in enumerate(zip(PART_NAMES, a.sizes)):
        assert f"part {i + 1}" in text
    for d in a.decisions:
        assert d.label in text
    assert text.count("margin ") >= len(a.decisions)
    assert "1.00 zone5" in text and "1.00 zone4" in text
    assert "stabilizable  yes" in text and "detectable    yes" in text
    assert "minimal       no" in text
    assert "distance to uncontrollability" in text and "upper bound" in text
    for k in range(1, a.model.n + 1):
        assert f"\n  {k:>3d}  " in text                    # one mode row each
    assert "UNSTABLE" in text                              # zone1 at 0.2
    assert "Hankel singular values" in text
    assert text.rstrip().endswith(SAFETY_CAUTION)
    assert "FRAGILE" not in text and "WARNING" not in text


def test_text_report_warns_when_a_decision_is_fragile():
    # a coupling of 1e-9 relative is within a factor 100 of the default tolerance 5e-11
    A = np.diag([-1.0, -2.0])
    model = pc.StateSpaceModel(A, [[1.0], [1e-9]], [[1.0, 1.0]])
    a = pc.analyze(model)
    assert a.fragile
    text = a.to_text()
    assert "WARNING" in text and "FRAGILE" in text
    assert "depend on the tolerance" in text
    assert "**yes**" in a.to_markdown()


def test_text_report_names_the_failing_verdicts():
    A = np.diag([0.5, -1.0])
    with pytest.warns(pc.HiddenModeWarning, match="0.5 .unstable"):   # the 0.5 mode is hidden
        a = pc.analyze((A, [[0.0], [1.0]], [[0.0, 1.0]]))
    assert not a.stabilizable and not a.detectable
    text = a.to_text()
    assert "stabilizable  NO   the inputs cannot move the mode 0.5, which is not stable" in text
    assert "detectable    NO   the outputs cannot see the mode 0.5, which is not stable" in text


def test_markdown_report():
    md = pc.analyze(zoned_model()).to_markdown()
    assert md.startswith("# Analysis of model 'drying kiln'")
    for heading in ["## Kalman parts", "## Rank decisions", "## States in each part",
                    "## Verdicts", "## Modes", "## Hankel singular values of the stable part"]:
        assert heading in md
    assert "| # | eigenvalue | stability |" in md
    assert md.rstrip().endswith(f"*{SAFETY_CAUTION}*")


@pytest.mark.parametrize("model", [
    zoned_model(),
    pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 2)), np.zeros((1, 0)), [[1.0, 2.0]]),
    pc.StateSpaceModel([[0.0, 1.0], [-1.0, 0.0]], [[0.0], [1.0]], [[1.0, 0.0]], dt=None),
    pc.StateSpaceModel([[0.5, 0.1], [0.0, 1.0]], [[1.0], [0.0]], [[1.0, 1.0]], dt=0.2),
], ids=["zones", "static", "oscillator", "discrete-boundary"])
@pytest.mark.filterwarnings("ignore::plantcore.HiddenModeWarning")  # discrete-boundary hides z = 1
def test_dict_is_json_safe(model):
    a = pc.analyze(model)
    d = a.to_dict()
    _walk(d)
    json.dumps(d, allow_nan=False)
    assert d["caution"] == SAFETY_CAUTION
    assert len(d["modes"]) == model.n
    for mode in d["modes"]:
        assert isinstance(mode["value"], list) and len(mode["value"]) == 2
    if model.n == 0:
        assert d["distance_to_uncontrollability"]["value"] is None
        assert d["hankel_singular_values"] == []
    if model.n and any(m.marginal for m in a.modes):
        assert d["hankel_singular_values"] is None and d["hankel_note"]


def test_analysis_of_a_model_with_only_unstable_modes():
    a = pc.analyze(pc.StateSpaceModel([[1.0]], [[1.0]], [[1.0]]))
    assert a.hankel_singular_values.size == 0
    assert "no mode is stable" in a.hankel_note
    assert "no mode is stable" in a.to_text()


def test_tolerance_is_passed_through():
    model = pc.StateSpaceModel(np.diag([-1.0, -2.0]), [[1.0], [1e-7]], [[1.0, 1.0]])
    assert pc.analyze(model).minimal_order == 2
    assert pc.analyze(model, tol=1e-5).minimal_order == 1
    assert pc.analyze(model, tol=1e-5).tolerance == 1e-5
    with pytest.raises(ValueError, match="tol"):
        pc.analyze(model, tol=-1.0)


# --- plantcore inspect ------------------------------------------------------------------------

KILN_TOML = """name = "drying kiln"
states = ["zone1", "zone2", "zone3", "zone4", "zone5"]
A = [[0.2, 0.0, 0.0, 0.0, 0.0], [0.5, -1.0, 0.0, 0.0, 0.0], [0.0, 0.0, -2.0, 0.0, 0.0],
     [0.0, 0.0, 0.0, -3.0, 0.0], [0.0, 0.0, 0.0, 0.0, -4.0]]
B = [[1.0], [1.0], [1.0], [0.0], [1.0]]
C = [[1.0, 1.0, -1.0, 1.0, 0.0]]
"""


@pytest.mark.parametrize("fmt", ["text", "markdown", "json"])
def test_cli_inspect_formats(tmp_path, capsys, fmt):
    path = tmp_path / "kiln.toml"
    path.write_text(KILN_TOML)
    assert main(["inspect", str(path), "--format", fmt]) == 0
    out = capsys.readouterr().out
    expected = pc.analyze(zoned_model())
    if fmt == "json":
        d = json.loads(out)
        assert d["part_sizes"] == expected.to_dict()["part_sizes"]
        assert d["verdicts"] == {"stabilizable": True, "detectable": True, "is_minimal": False}
    elif fmt == "markdown":
        assert out == expected.to_markdown()
    else:
        assert out == expected.to_text()


def test_cli_inspect_bad_tolerance_exits_2(tmp_path, capsys):
    path = tmp_path / "kiln.toml"
    path.write_text(KILN_TOML)
    assert main(["inspect", str(path), "--tol", "2"]) == 2
    assert "tol" in capsys.readouterr().err


def test_html_rendering_is_delegated_to_the_report_module():
    html = pc.analyze(zoned_model()).to_html()
    assert html.lstrip().lower().startswith("<!doctype html")
    assert "drying kiln" in html and "Caution" in html


def test_to_html_fragment_embeds_without_page_or_body_styles():
    import re

    analysis = pc.analyze(zoned_model())
    page, fragment = analysis.to_html(), analysis.to_html(fragment=True)
    assert fragment.startswith('<div class="plantcore-report">')
    assert not re.search(r"<(html|head|body)\b", fragment) and "<!DOCTYPE" not in fragment
    assert re.search(r"<body\b", page)       # the default stays a whole page
    css = re.search(r"<style>(.*?)</style>", fragment, re.DOTALL).group(1)
    assert not re.search(r"(^|[},\s])body\s*\{", css)     # no global body rule
    ids = re.findall(r'<section id="([^"]+)"', page)
    assert ids and re.findall(r'<section id="([^"]+)"', fragment) == ids


@pytest.mark.parametrize("case", catalog.catalog()[::4], ids=lambda c: f"{c.sizes}-{'-'.join(c.tags)}")
def test_minimal_read_off_the_decomposition_matches_minimal_realization(case):
    # analyze() reads the minimal realization off its Kalman decomposition instead of running
    # the staircases again; it must be the one minimal_realization computes (same basis,
    # hence the same matrices up to rounding) and satisfy the contract W^T V = I.
    a = pc.analyze(case.model)
    ref = pc.minimal_realization(case.model)
    got = a.minimal
    assert (got.order, got.removed_uncontrollable, got.removed_unobservable) == \
        (ref.order, ref.removed_uncontrollable, ref.removed_unobservable)
    scale = max(np.linalg.norm(case.model.A), 1.0)
    assert_allclose(got.model.A, ref.model.A, atol=1e-10 * scale)
    assert_allclose(got.model.B, ref.model.B, atol=1e-10 * max(np.linalg.norm(case.model.B), 1.0))
    assert_allclose(got.model.C, ref.model.C, atol=1e-10 * max(np.linalg.norm(case.model.C), 1.0))
    assert_allclose(got.W.T @ got.V, np.eye(got.order), atol=1e-12)
    assert_allclose(got.V, ref.V, atol=1e-10)


# --- removed modes that are not stable (issue 20, item 2) -----------------------------------
# By construction (diagonal A, PBH test, M. L. J. Hautus 1969): the mode 0.5 has a zero row
# of B, so the inputs cannot move it; the outputs see it.

HIDDEN = (np.diag([-1.0, -2.0, 0.5]), [[1.0], [1.0], [0.0]], [[1.0, 1.0, 1.0]])


def test_analysis_carries_and_warns_about_the_hidden_unstable_mode():
    with pytest.warns(pc.HiddenModeWarning, match=r"0\.5 \(unstable, in the uncontrollable"):
        a = pc.analyze(HIDDEN)
    (mode,) = a.removed_unstable_modes
    assert mode.part == "uncontrollable_observable" and mode.unstable
    assert a.minimal.removed_unstable_modes == a.removed_unstable_modes
    d = a.to_dict()
    assert d["removed_unstable_modes"] == [{"value": [0.5, 0.0], "part": "uncontrollable_observable",
                                            "unstable": True, "marginal": False}]
    json.dumps(d, allow_nan=False)


def test_text_and_markdown_put_the_hidden_mode_first():
    with pytest.warns(pc.HiddenModeWarning):
        a = pc.analyze(HIDDEN)
    text = a.to_text()
    warning = text.index("WARNING: the minimal realization removed 1 mode that is not stable")
    assert warning < text.index("Kalman parts")
    assert "hidden modes  YES" in text
    md = a.to_markdown()
    assert md.index("**WARNING: the minimal realization removed") < md.index("## Kalman parts")


def test_stable_hidden_mode_gives_a_quiet_analysis():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", pc.HiddenModeWarning)
        a = pc.analyze((np.diag([-1.0, -2.0, -0.5]), HIDDEN[1], HIDDEN[2]))
    assert a.removed_unstable_modes == () and a.minimal_order == 2
    text = a.to_text()
    assert "WARNING" not in text and "hidden modes  no   every mode outside part 1" in text


def test_inspect_shows_the_hidden_mode_without_a_python_warning(tmp_path, capsys, recwarn):
    path = tmp_path / "hidden.toml"
    pc.save_model(pc.StateSpaceModel(*HIDDEN), path)
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "WARNING: the minimal realization removed 1 mode" in out
    assert not [w for w in recwarn if issubclass(w.category, pc.HiddenModeWarning)]


@pytest.mark.parametrize("unstable", [False, True])
def test_analyze_takes_one_schur_form_of_the_model_for_its_sections(unstable, monkeypatch):
    """The mode table, the boundary test, the distance starts and the Hankel values share one
    real Schur form of the equilibrated A (issue 17): besides the one the rank certificate
    may take, analyze computes no other Schur form of an n x n matrix, and its Hankel values
    are those of the public call (which takes its own), to rounding (common practice)."""
    rng = np.random.default_rng(17)
    n = 24
    A = rng.standard_normal((n, n)) / np.sqrt(n) - 1.5 * np.eye(n)
    if unstable:
        A[0, 0] += 4.0
    model = pc.StateSpaceModel(A, rng.standard_normal((n, 2)), rng.standard_normal((2, n)))
    expected = pc.hankel_singular_values(model)
    calls = []
    real_schur = scipy.linalg.schur

    def counting(a, *args, **kwargs):
        calls.append(np.shape(a))
        return real_schur(a, *args, **kwargs)

    monkeypatch.setattr(scipy.linalg, "schur", counting)
    monkeypatch.setattr(pc.structure.kalman, "_RECENT_CERTIFICATES", type(
        pc.structure.kalman._RECENT_CERTIFICATES)())
    result = pc.analyze(model)
    assert 1 <= sum(shape == (n, n) for shape in calls) <= 2
    assert_allclose(result.hankel_singular_values, expected, rtol=1e-9, atol=1e-14 * expected[0])


def test_analyze_announces_its_stages_in_order():
    from plantcore.analysis.analyze import ANALYSIS_STAGES

    seen = []
    A = np.diag([-1.0, -2.0, -3.0])
    pc.analyze((A, np.ones((3, 1)), np.ones((1, 3))), progress=seen.append)
    assert tuple(seen) == ANALYSIS_STAGES
