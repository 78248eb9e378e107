"""Tests for plantcore.core.progress: progress on stderr only when it is a terminal."""

from __future__ import annotations

import io
import sys

import pytest

from plantcore.core.progress import Progress, progress_enabled


class _Terminal(io.StringIO):
    """A text stream that claims to be a terminal."""

    def isatty(self):
        return True


class _Broken(_Terminal):
    def write(self, text):
        raise OSError("terminal gone")


def test_silent_when_stderr_is_not_a_terminal(monkeypatch):
    fake = io.StringIO()
    monkeypatch.setattr(sys, "stderr", fake)
    monkeypatch.setattr(fake, "isatty", lambda: False)
    with Progress("report", total=3, min_interval=0.0) as bar:
        for k in range(3):
            bar.step(f"step {k}")
    assert not bar.enabled
    assert fake.getvalue() == ""


def test_shown_when_stderr_is_a_terminal(monkeypatch):
    fake = io.StringIO()
    monkeypatch.setattr(sys, "stderr", fake)
    monkeypatch.setattr(fake, "isatty", lambda: True)
    with Progress("report", total=4, min_interval=0.0) as bar:
        bar.step("analysis")
        bar.step("plots", amount=2)
    out = fake.getvalue()
    assert bar.enabled
    frames = out.split("\r")[1:]
    assert frames[0].strip() == "report: 1/4 (25%) analysis"
    assert frames[1].strip() == "report: 3/4 (75%) plots"
    assert frames[-1].rstrip(" \n") == "report: 3/4 (75%) done"
    assert out.endswith("\n") and out.count("\n") == 1


def test_stdout_is_never_touched(monkeypatch, capsys):
    stream = _Terminal()
    with Progress("sweep", total=2, stream=stream, min_interval=0.0) as bar:
        bar.step("a")
        bar.step("b")
    assert capsys.readouterr().out == ""
    assert "sweep: 2/2 (100%)" in stream.getvalue()


def test_enabled_can_be_forced_either_way():
    quiet = _Terminal()
    with Progress("x", total=1, stream=quiet, enabled=False) as bar:
        bar.step()
    assert quiet.getvalue() == ""
    loud = io.StringIO()
    with Progress("x", stream=loud, enabled=True, min_interval=0.0) as bar:
        bar.step("one")
    assert loud.getvalue().split("\r")[1].strip() == "x: 1 one"  # no total: a plain count


def test_redraws_are_throttled_but_the_end_is_drawn():
    stream = _Terminal()
    with Progress("sweep", total=1000, stream=stream, min_interval=3600.0) as bar:
        for _ in range(1000):
            bar.step()
    frames = stream.getvalue().split("\r")[1:]
    # the first step, the last step (finished: always drawn) and the closing frame
    assert len(frames) == 3
    assert frames[0].strip() == "sweep: 1/1000 (0%)"
    assert frames[-1].strip() == "sweep: 1000/1000 (100%) done"


def test_shorter_line_wipes_the_longer_one():
    stream = _Terminal()
    bar = Progress("r", total=2, stream=stream, min_interval=0.0)
    bar.step("a very long description of the step")
    bar.step("short")
    frames = stream.getvalue().split("\r")[1:]
    assert len(frames[1]) >= len(frames[0])


def test_interrupted_work_says_stopped():
    stream = _Terminal()
    with pytest.raises(RuntimeError):
        with Progress("r", total=5, stream=stream, min_interval=0.0) as bar:
            bar.step("a")
            raise RuntimeError("boom")
    assert stream.getvalue().split("\r")[-1].strip() == "r: 1/5 (20%) stopped"


def test_a_broken_terminal_switches_progress_off():
    bar = Progress("r", total=2, stream=_Broken(), min_interval=0.0)
    bar.step("a")  # must not raise
    assert not bar.enabled
    bar.close()


def test_progress_enabled_handles_odd_streams():
    assert progress_enabled(_Terminal()) is True
    assert progress_enabled(io.StringIO()) is False
    assert progress_enabled(object()) is False
    closed = io.StringIO()
    closed.close()
    assert progress_enabled(closed) is False


@pytest.mark.parametrize("total", [-1, 2.5, True])
def test_bad_total_is_refused(total):
    with pytest.raises(ValueError, match="total must be"):
        Progress("x", total=total)


def test_bad_interval_is_refused():
    with pytest.raises(ValueError, match="min_interval"):
        Progress("x", min_interval=-1.0)
