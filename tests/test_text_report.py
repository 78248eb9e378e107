"""Tests for the plain-text renderings (plantcore.reports.text) and the shared wording rules
(plantcore.core.wording) that issue 21 asks of them: consistent, non-contradicting messages."""

from __future__ import annotations

import numpy as np
import pytest

import plantcore as pc
from plantcore.core.wording import ROUNDING_LEVEL, describe_direction, shown_eigenvalue, shown_value
from plantcore.reports.text import decision_method


def test_exact_difference_below_floating_point_is_not_reported_as_a_plain_zero():
    # 1/(s+1) against (1 + 2**-52)/(s+1): different in exact arithmetic, identical in floats
    a = ([[-1.0]], [[1.0]], [[1.0]])
    b = ([[-1.0]], [[1.0]], [[1.0 + 2.0 ** -52]])
    text = pc.check_equivalence(a, b, exact=True).to_text(caution=False)
    assert "NOT EQUIVALENT (decided by exact rational arithmetic)" in text
    peak = next(line for line in text.splitlines() if "Peak error:" in line)
    assert "below what floating point resolves" in peak


def test_every_decision_line_says_which_method_decided():
    # two identical undamped oscillators driven by one force (common practice: repeated
    # eigenvalues that one input cannot separate): 2 uncontrollable states
    A = np.zeros((4, 4))
    A[0, 1] = A[2, 3] = 1.0
    A[1, 0] = A[3, 2] = -1.0
    model = (A, [[0.0], [1.0], [0.0], [1.0]], [[1.0, 0.0, 0.0, 0.0]])
    with pytest.warns(pc.HiddenModeWarning):
        analysis = pc.analyze(model)
    assert analysis.sizes.uncontrollable_unobservable == 2
    text = analysis.to_text()
    block = text.split("Rank decisions")[1].split("States in each part")[0]
    lines = [ln for ln in block.splitlines()[1:] if ln.strip().startswith(("controllability",
                                                                          "observability",
                                                                          "modal"))]
    assert lines and all("(staircase)" in ln or "(modal certificate" in ln for ln in lines)
    # the certificate's count agrees with the part sizes: 2 of 4 modes not uncontrollable
    modal = [d for d in analysis.decisions if d.label.endswith("not uncontrollable")]
    assert [(d.rank, d.size) for d in modal] == [(2, 4)]
    assert decision_method(modal[0]).startswith("modal certificate")


def test_rounding_rule_and_direction_order():
    assert ROUNDING_LEVEL == pytest.approx(5e-13)
    assert shown_value(4.34e-17) == 0.0 and shown_value(1e-12) == 1e-12
    assert shown_eigenvalue(2.7e-17 + 12j, 144.0) == 12j
    assert shown_eigenvalue(1 - 1e-16 + 0j, 1.0, discrete=True) == 1
    # equal printed weights keep the model's state order whatever the rounding of the vector
    assert describe_direction([0.7071067811865475, 0.7071067811865476], ["p1", "p2"]) == \
        "0.71 p1 + 0.71 p2"
    assert describe_direction([0.3, -0.9, 0.3], ["a", "b", "c"]) == "0.90 b - 0.30 a - 0.30 c"


def test_removed_integrators_are_named_0_in_every_message(tmp_path, capsys):
    # two free masses with one shared force and the sum of positions measured: the difference
    # mode (a double integrator) is removed; its computed eigenvalues lie at rounding level
    # of 0 (-5.6e-17 here) and every message must call them 0 (issue 21 item 2, by hand)
    from plantcore.analysis.report_contents import collect_report
    from plantcore.cli import main
    from plantcore.reports.html import render_html

    A = [[0, 1, 0, 0], [0, 0, 0, 0], [0, 0, 0, 1], [0, 0, 0, 0]]
    model = pc.StateSpaceModel(A, [[0], [1], [0], [1]], [[1, 0, 1, 0]])
    with pytest.warns(pc.HiddenModeWarning):
        a = pc.analyze(model)
    assert a.removed_unstable_modes and any(m.value != 0 for m in a.removed_unstable_modes)
    text = a.to_text()
    warning = next(line for line in text.splitlines() if line.startswith("WARNING"))
    verdict = next(line for line in text.splitlines() if "hidden modes" in line)
    for line in (warning, verdict):
        assert "removed 2 modes" in line or "removes 2 modes" in line
        assert ": 0 (on the stability boundary" in line and "e-1" not in line, line
    page = render_html(collect_report(model, analysis=a, progress=False), progress=False)
    alert = page.split('<div class="alert" role="alert">', 1)[1].split("</div>", 1)[0]
    assert ": 0 (on the stability boundary" in alert and "e-1" not in alert
    path = tmp_path / "masses.toml"
    pc.save_model(model, path)
    assert main(["reduce", str(path), "-o", str(tmp_path / "r.toml")]) == 1
    err = capsys.readouterr().err
    assert ": 0 (on the stability boundary" in err and "e-1" not in err.split("\n")[0]
