"""The ``plantcore suggest`` command: ranked table, exit codes, bad candidate files."""

from __future__ import annotations

import json

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION


@pytest.fixture
def carts(tmp_path):
    """Two identical carts pushed by one shared force (the difference is uncontrollable)."""
    A = np.kron(np.eye(2), [[0.0, 1.0], [0.0, 0.0]])
    model = pc.StateSpaceModel(A, [[0.0], [1.0], [0.0], [1.0]], [[1.0, 0.0, 1.0, 0.0]],
                               states=["p1", "v1", "p2", "v2"], name="two carts")
    path = tmp_path / "carts.toml"
    pc.save_model(model, path)
    return path


def _candidates(tmp_path, text):
    path = tmp_path / "candidates.toml"
    path.write_text(text)
    return str(path)


def test_text_table_and_exit_0(carts, tmp_path, capsys):
    cands = _candidates(tmp_path, '[[actuator]]\nname = "push cart 1"\nentries = { v1 = 1.0 }\n'
                                  '[[actuator]]\nname = "push both"\ncolumn = [0, 1, 0, 1]\n')
    assert main(["suggest", str(carts), "--candidates", cands]) == 0
    out = capsys.readouterr().out
    assert "recommended: push cart 1" in out
    rows = [line.split() for line in out.splitlines() if line.startswith("  1 ")]
    assert rows and rows[0][1:4] == ["push", "cart", "1"]
    assert SAFETY_CAUTION in out


def test_json_and_markdown(carts, capsys):
    assert main(["suggest", str(carts), "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    # one unit input at each state by default; only the velocities restore the difference
    assert sorted(r["name"] for r in data["ranking"] if r["restored"] == 2) == ["v1", "v2"]
    assert data["reaches_goal"] and len(data["recommended"]) == 1
    assert main(["suggest", str(carts), "--format", "markdown"]) == 0
    assert "| rank | candidate |" in capsys.readouterr().out


def test_sensors_and_unreachable_goal_exit_1(carts, tmp_path, capsys):
    # the output is p1 + p2; a sensor of v1 + v2 sees only the sum again: not observable
    cands = _candidates(tmp_path, '[[sensor]]\nname = "sum of speeds"\nrow = [0, 1, 0, 1]\n')
    assert main(["suggest", str(carts), "--sensors", "--candidates", cands]) == 1
    out = capsys.readouterr().out
    assert "achievable: NO" in out


def test_target_margin_option(carts, tmp_path, capsys):
    cands = _candidates(tmp_path, '[[actuator]]\nname = "push cart 1"\nentries = { v1 = 1.0 }\n')
    # the margin reachable with it is about 0.5 (test_placement derives 0.54 for a gain of
    # sqrt 2); 0.9 is out of reach
    assert main(["suggest", str(carts), "--candidates", cands, "--target-margin", "0.9"]) == 1
    assert "achievable: NO" in capsys.readouterr().out


@pytest.mark.parametrize("text, field", [
    ('[[actuator]]\nname = "a"\ncolumn = [1, 2]\n', "actuator[1].column: has 2 entries"),
    ('[[actuator]]\nname = "a"\ncolumn = [0, "x", 0, 0]\n', "actuator[1].column[1]: must be a number"),
    ('[[actuator]]\nname = "a"\nentries = { speed = 1 }\n', "actuator[1].entries.speed: is not a state"),
    ('[[actuator]]\nname = "a"\ncolumn = [0, 0, 0, 0]\n', "actuator[1]: is all zeros"),
    (('[[actuator]]\nname = "a"\ncolumn = [0, 1, 0, 0]\n[[actuator]]\nname = "a"\n'
      'column = [0, 0, 0, 1]\n'), "actuator[2].name: 'a' is used twice"),
    ('[[actuator]]\nname = "a"\ncolumn = [0, 1, 0, 0]\ngain = 2\n', "actuator[1].gain: is not a key"),
    ('[[sensor]]\nname = "a"\nrow = [0, 1, 0, 0]\n', "actuator: the file has no [[actuator]]"),
    ('heater = 1\n', "heater: is not a candidate-file key"),
    ('[[actuator]\n', "TOML syntax error"),
    ('[[actuator]]\nname = "a"\ncolumn = [0, nan, 0, 0]\n', "must be a finite number"),
])
def test_bad_candidate_file_exits_2_with_one_line(carts, tmp_path, capsys, text, field):
    cands = _candidates(tmp_path, text)
    before = (tmp_path / "candidates.toml").read_bytes()
    assert main(["suggest", str(carts), "--candidates", cands]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and cands in lines[0] and field in lines[0]
    assert "Traceback" not in captured.err
    assert (tmp_path / "candidates.toml").read_bytes() == before    # never written


def test_missing_candidate_file_and_bad_goal_exit_2(carts, tmp_path, capsys):
    assert main(["suggest", str(carts), "--candidates", str(tmp_path / "none.toml")]) == 2
    assert "none.toml: file: not found" in capsys.readouterr().err
    assert main(["suggest", str(carts), "--goal", "observable"]) == 2
    assert "goal for actuators" in capsys.readouterr().err
