"""Candidate files (plantcore.files.candidate_files); the command-line refusals are in
tests/test_cli_suggest.py."""

from __future__ import annotations

import pytest

import plantcore as pc
from plantcore.core.errors import ModelFileError

TEXT = """
[[actuator]]
name = "heater"
column = [0.0, 1.0, 0.0]

[[actuator]]
name = "fan"
entries = { b = -2.0 }

[[sensor]]
name = "probe"
row = [1, 0, 0]
"""


def test_both_kinds_in_one_file(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(TEXT)
    actuators = pc.load_candidates(path, "actuator", states=["a", "b", "c"])
    assert actuators == {"heater": [0.0, 1.0, 0.0], "fan": [0.0, -2.0, 0.0]}
    assert pc.load_candidates(path, "sensor", n_states=3) == {"probe": [1.0, 0.0, 0.0]}


def test_entries_need_state_names(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(TEXT)
    with pytest.raises(ModelFileError, match=r"actuator\[2\].entries: needs the model's state"):
        pc.load_candidates(path, "actuator", n_states=3)


def test_empty_array_and_unknown_kind(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text("actuator = []\n")
    with pytest.raises(ModelFileError, match="must be an array of tables"):
        pc.load_candidates(path)
    with pytest.raises(ValueError, match="kind must be"):
        pc.load_candidates(path, "motor")


def test_a_folder_is_refused(tmp_path):
    with pytest.raises(ModelFileError, match="file"):
        pc.load_candidates(tmp_path)
