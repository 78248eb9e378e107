"""The placement section of reports (plantcore.reports.placement_section)."""

from __future__ import annotations

import numpy as np

import plantcore as pc
from plantcore.analysis import collect_report
from plantcore.core.wording import SAFETY_CAUTION
from plantcore.reports.html import render_html


def test_report_shows_the_section_when_a_mode_cannot_be_moved():
    # thermal example: zones 2 and 3 share one heater (difference uncontrollable, by
    # construction of the example) and two identical sensor filters (difference hidden)
    contents = collect_report(pc.load_example("thermal_process"), progress=False)
    kinds = [s.kind for s in contents.placement]
    assert kinds == ["actuator", "sensor"]
    html = render_html(contents, progress=False)
    section = html[html.index('id="placement"'):html.index('id="caution"')]
    assert "Where to add an actuator or sensor" in section
    assert section.count("<h3>") == 2
    assert "zone2_air_temp_degC" in section


def test_no_section_when_every_mode_passes_clearly():
    A = np.diag([-1.0, -2.0]) + np.diag([1.0], 1)
    contents = collect_report((A, np.array([[0.0], [1.0]]), np.array([[1.0, 0.0]])),
                              progress=False)
    assert contents.placement == ()
    assert 'id="placement"' not in render_html(contents, progress=False)


def test_text_and_markdown_carry_the_caution_and_every_candidate():
    s = pc.suggest_actuators(pc.load_example("thermal_process"))
    text, markdown = s.to_text(), s.to_markdown()
    assert SAFETY_CAUTION in text and SAFETY_CAUTION in markdown
    for name in s.candidate_names:
        assert f"| {name} |" in markdown and name in text
