"""The command line's one progress convention (plantcore.commands.progress_option): every
command that can run long has ``--progress``; its line names the stage, goes to standard
error only, and is silent when standard error is not a terminal unless asked (issue 21
item 5; the terminal convention is common practice for command-line tools)."""

from __future__ import annotations

import io
import textwrap

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.commands import progress_option
from plantcore.commands.progress_option import StageProgress, _elapsed


class _Terminal(io.StringIO):
    def isatty(self):
        return True


class _Clock:
    def __init__(self):
        self.now = 100.0

    def __call__(self):
        return self.now


def test_the_line_names_the_stage_and_the_time_spent_in_it(monkeypatch):
    clock = _Clock()
    monkeypatch.setattr(progress_option.time, "monotonic", clock)
    stream = _Terminal()
    bar = StageProgress("reduce", 2, stream=stream, min_interval=0.0)
    try:
        bar.step("minimal realization")
        assert bar.text() == "reduce: 1/2 (50%) minimal realization"   # under a second
        clock.now += 75.4
        assert bar.text() == "reduce: 1/2 (50%) minimal realization (1 min 15 s)"
        bar.step("certificate")                        # a new stage starts its own clock
        assert bar.text() == "reduce: 2/2 (100%) certificate"
    finally:
        bar.close()
    assert not bar._ticker.is_alive()                  # closing stops the redrawing thread
    frames = stream.getvalue().split("\r")[1:]
    assert frames[0].strip() == "reduce: 1/2 (50%) minimal realization"
    assert frames[-1].strip() == "reduce: 2/2 (100%) done"


def test_elapsed_time_wording():
    assert [_elapsed(t) for t in (0.4, 59.9, 60.0, 3599.0, 7322.0)] == [
        "0 s", "59 s", "1 min 0 s", "59 min 59 s", "2 h 2 min"]


def test_off_when_not_a_terminal_and_no_thread_is_started():
    stream = io.StringIO()
    with StageProgress("inspect", 2, stream=stream) as bar:
        bar.step("analysis")
    assert stream.getvalue() == "" and bar._ticker is None


# --- every long-running command -------------------------------------------------------------
def _model(tmp_path):
    path = tmp_path / "m.toml"
    pc.save_model(pc.StateSpaceModel(np.diag([-1.0, -2.0, -3.0]), [[1.0], [1.0], [0.0]],
                                     [[1.0, 1.0, 1.0]]), path)
    return path


def _jacobians(tmp_path):
    path = tmp_path / "jacobians.npz"
    np.savez(path, transition_jacobians=np.repeat(np.eye(2)[None], 4, axis=0),
             measurement_jacobians=np.repeat(np.array([[[-1.0, 1.0]]]), 4, axis=0),
             expected_unobservable=np.array([[1.0], [1.0]]))
    return path


def _sweep_spec(tmp_path):
    path = tmp_path / "spec.toml"
    path.write_text(textwrap.dedent("""\
        A = [["-rate"]]
        B = [[1.0]]
        C = [[1.0]]

        [parameter_grid]
        rate = { values = [1.0, 2.0] }
        """), encoding="utf-8")
    return path


def _impulse(tmp_path):
    path = tmp_path / "pulse.npz"
    np.savez(path, impulse_response=np.r_[0.0, 0.5 ** np.arange(15)], sample_time=0.1)
    return path


#: command -> (arguments after the command, label of the line, a stage it must name)
CASES = {
    "inspect": (lambda t: [str(_model(t))], "inspect", "Hankel singular values"),
    "reduce": (lambda t: [str(_model(t)), "-o", str(t / "r.toml")], "reduce",
               "certificate of the written model"),
    "reduce --order": (lambda t: [str(_model(t)), "-o", str(t / "r.toml"), "--order", "1"],
                       "reduce", "balanced truncation"),
    "compare": (lambda t: [str(_model(t)), str(_model(t))], "compare", "certificate"),
    "report": (lambda t: [str(_model(t)), "-o", str(t / "r.html")], "report",
               "analysing the model"),
    "audit": (lambda t: [str(_jacobians(t)), "-o", str(t / "a.html")], "audit",
              "report plots"),
    "suggest": (lambda t: [str(_model(t))], "suggest", "greedy search"),
    "realize": (lambda t: [str(_impulse(t)), "-o", str(t / "r.toml")], "realize",
                "singular values"),
    "sweep": (lambda t: [str(_sweep_spec(t)), "-o", str(t / "out"), "--executor", "serial"],
              "sweep", "points"),
}


@pytest.mark.parametrize("case", list(CASES))
def test_progress_on_request_and_quiet_otherwise(case, tmp_path, capsys, monkeypatch):
    # every stage drawn, however quick (the line is otherwise redrawn at most every 0.1 s)
    plain = progress_option.stages
    monkeypatch.setattr(progress_option, "stages",
                        lambda *a, **k: plain(*a, **{"min_interval": 0.0, **k}))
    arguments, label, stage = CASES[case]
    command = case.split()[0]
    quiet, loud = tmp_path / "quiet", tmp_path / "loud"
    quiet.mkdir()
    loud.mkdir()
    main([command, *arguments(quiet)])
    captured = capsys.readouterr()
    assert "\r" not in captured.err and "\r" not in captured.out      # not a terminal: quiet
    main([command, *arguments(loud), "--progress"])
    captured = capsys.readouterr()
    assert "\r" not in captured.out                                    # stdout stays clean
    frames = [frame.strip() for frame in captured.err.split("\r") if frame.strip()]
    assert any(frame.startswith(f"{label}:") and stage in frame for frame in frames), frames
    assert frames[-1].endswith("done")


def test_every_command_that_computes_has_the_option(capsys):
    from plantcore.cli import _build_parser

    parser = _build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    with_option = {name for name, p in sub.choices.items()
                   if any("--progress" in a.option_strings for a in p._actions)}
    # plate only builds and writes a generated model (under 2 s at 100,000 states)
    assert with_option == set(sub.choices) - {"plate"}
    helps = {next(a.help for a in p._actions if "--progress" in a.option_strings)
             for name, p in sub.choices.items() if name in with_option}
    assert helps == {progress_option.PROGRESS_HELP}          # one convention, one wording


def test_a_stage_with_a_line_of_its_own_is_not_redrawn():
    # compare --exact: the exact comparison draws its own line, which redraws would overwrite
    with StageProgress("compare", 1, stream=_Terminal(), ticking=False) as bar:
        bar.step("certificate")
        assert bar.enabled and bar._ticker is None
