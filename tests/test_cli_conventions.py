"""Command-line conventions of issue 21 item 4 (plantcore.cli): --version, an exit-code
table in every command's help, the default of every option shown, and ``audit`` exiting 1
on a spurious-observability verdict so scripts can gate on it (common practice for
command-line tools: a verdict a script must act on is an exit code)."""

from __future__ import annotations

import numpy as np
import pytest

from plantcore.cli import main
from plantcore.core.version import __version__


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"plantcore {__version__}"


COMMANDS = ["inspect", "reduce", "compare", "report", "demo", "audit", "sweep", "suggest",
            "realize", "plate"]


def test_the_list_of_commands_is_complete():
    from plantcore.cli import _build_parser

    sub = next(a for a in _build_parser()._actions if a.dest == "command")
    assert sorted(sub.choices) == sorted(COMMANDS)


@pytest.mark.parametrize("command", COMMANDS)
def test_every_option_that_takes_a_value_says_its_default(command):
    from plantcore.cli import _build_parser

    sub = next(a for a in _build_parser()._actions if a.dest == "command")
    for action in sub.choices[command]._actions:
        if not action.option_strings or action.nargs == 0:     # positionals and flags
            continue
        text = action.help or ""
        assert "default" in text or "required" in text, (command, action.option_strings)


@pytest.mark.parametrize("command", COMMANDS)
def test_help_has_exit_codes_and_defaults(command, capsys):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "exit codes: 0" in text.lower() and "2 bad input" in text
    if "--tol" in text:
        assert "default" in text.split("--tol", 2)[-1].split("--", 1)[0]


def _jacobians(tmp_path, H):
    path = tmp_path / "jacobians.npz"
    K = 5
    np.savez(path, transition_jacobians=np.repeat(np.eye(2)[None], K, axis=0),
             measurement_jacobians=np.repeat(np.asarray(H, float)[None], K, axis=0),
             expected_unobservable=np.array([[1.0], [1.0]]))
    return path


def test_audit_exit_code_is_the_verdict(tmp_path, capsys):
    # the common shift of both states is unobservable by construction: H = [-1, 1] cannot see
    # it (exit 0); H = [1, 0] sees it, a spurious observability (exit 1)
    assert main(["audit", str(_jacobians(tmp_path, [[-1.0, 1.0]]))]) == 0
    assert "Consistent" in capsys.readouterr().out
    report = tmp_path / "spurious.html"
    assert main(["audit", str(_jacobians(tmp_path, [[1.0, 0.0]])), "-o", str(report),
                 "--force"]) == 1
    assert "SPURIOUS OBSERVABILITY" in capsys.readouterr().out
    assert report.stat().st_size > 0        # the report is still written


def test_inspect_progress_on_request_only(tmp_path, capsys):
    path = tmp_path / "m.toml"
    path.write_text("A = [[-1.0]]\nB = [[1.0]]\nC = [[1.0]]\n", encoding="utf-8")
    assert main(["inspect", str(path)]) == 0
    assert capsys.readouterr().err == ""                      # not a terminal: quiet
    assert main(["inspect", str(path), "--progress"]) == 0
    err = capsys.readouterr().err
    assert "inspect: 1/5 (20%) Kalman decomposition and certificate" in err
    assert err.rstrip().endswith("inspect: 5/5 (100%) done")
