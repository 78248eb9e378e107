"""Tests for ``plantcore demo`` (plantcore.demo)."""

from __future__ import annotations

import json
import os
import re

import numpy as np
import pytest
from folder_snapshot import hidden_entries, snapshot

import plantcore as pc
from plantcore.cli import main
from plantcore.demo import DEMO_FILES, default_demo_folder, run_demo


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    import contextlib
    import io

    folder = tmp_path_factory.mktemp("demo") / "out"
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["demo", "-o", str(folder)])
    return code, folder, out.getvalue(), err.getvalue()


def test_demo_writes_every_promised_file(demo_run):
    code, folder, out, err = demo_run
    assert code == 0
    assert sorted(os.listdir(folder)) == sorted(DEMO_FILES)  # and nothing else (no temporaries)
    assert err == ""  # stderr is not a terminal here: no progress
    for name in DEMO_FILES:
        assert name in out
        assert os.path.getsize(folder / name) > 0


def test_demo_models_and_certificate(demo_run):
    _, folder, out, _ = demo_run
    original = pc.load_model(folder / "original_model.toml")
    minimal = pc.load_model(folder / "minimal_model.toml")
    reduced = pc.load_model(folder / "reduced_model.toml")
    packaged = pc.load_example("thermal_process")
    np.testing.assert_array_equal(original.A, packaged.A)
    assert (original.n, minimal.n, reduced.n) == (11, 7, 3)
    assert reduced.inputs == packaged.inputs and reduced.outputs == packaged.outputs
    # The written files tell the same story when read back (an independent recomputation).
    assert pc.check_equivalence(original, minimal).equivalent
    cert = json.loads((folder / "certificate.json").read_text(encoding="utf-8"))
    assert cert["equivalent"] is True and cert["difference_order"] == 0
    text = (folder / "certificate.txt").read_text(encoding="utf-8")
    assert "EQUIVALENT" in text and pc.core.wording.SAFETY_CAUTION in text
    check = (folder / "reduced_model_check.txt").read_text(encoding="utf-8")
    assert "NOT EQUIVALENT" in check
    inspection = (folder / "inspection.txt").read_text(encoding="utf-8")
    assert inspection == pc.analyze(packaged).to_text() + "\n"
    # the summary names the sizes and the verdict
    assert "11 -> 7 states" in out and "7 -> 3 states" in out and "EQUIVALENT" in out


def test_demo_report_is_complete_and_offline(demo_run):
    _, folder, _, _ = demo_run
    text = (folder / "report.html").read_text(encoding="utf-8")
    for sid in ("model", "verdicts", "part-sizes", "rank-decisions", "modes", "eigenvalues",
                "frequency-response", "hankel-singular-values", "certificate", "caution"):
        assert f'<section id="{sid}">' in text
    lowered = text.lower()
    assert "http://" not in lowered and "https://" not in lowered
    assert "<script" not in lowered and "<link" not in lowered
    assert "thermal_process.toml" in text  # the packaged source is named, without its path


def test_demo_refuses_a_non_empty_folder(tmp_path, capsys):
    (tmp_path / "keep.txt").write_text("mine", encoding="utf-8")
    code = main(["demo", "-o", str(tmp_path)])
    said = capsys.readouterr()
    assert code == 2 and said.out == ""
    assert len(said.err.strip().splitlines()) == 1 and "not empty" in said.err
    assert os.listdir(tmp_path) == ["keep.txt"]
    assert (tmp_path / "keep.txt").read_text(encoding="utf-8") == "mine"


def test_demo_refusal_without_force_points_to_force(tmp_path, capsys):
    (tmp_path / "report.html").write_text("an earlier demo", encoding="utf-8")
    assert main(["demo", "-o", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "not empty" in err and "give --force to replace one that holds only the demo's" in err
    assert os.listdir(tmp_path) == ["report.html"]


def _earlier_demo(demo_run, tmp_path):
    """A copy of the module's demo folder, every file marked as coming from the old run."""
    import shutil

    folder = tmp_path / "out"
    shutil.copytree(demo_run[1], folder)
    for name in os.listdir(folder):
        with open(folder / name, "ab") as f:
            f.write(b"\nfrom the earlier run\n")
    return folder


def test_demo_force_replaces_its_own_earlier_output(demo_run, tmp_path, capsys):
    folder = _earlier_demo(demo_run, tmp_path)
    # an earlier run of the other example counts as the demo's own output as well
    assert main(["demo", "-o", str(folder), "--force", "--example", "motion_axis"]) == 0
    assert "14 -> 6 states" in capsys.readouterr().out
    assert sorted(os.listdir(folder)) == sorted(DEMO_FILES)
    for name in DEMO_FILES:
        assert b"from the earlier run" not in (folder / name).read_bytes(), name
    assert pc.load_model(folder / "original_model.toml").n == 14
    assert sorted(os.listdir(tmp_path)) == ["out"]           # no staging or backup left


@pytest.mark.parametrize("foreign", ["file", "subfolder", "symlink"])
def test_demo_force_refuses_a_folder_with_anything_else(demo_run, tmp_path, capsys,
                                                        monkeypatch, foreign):
    import plantcore.analysis

    folder = _earlier_demo(demo_run, tmp_path)
    if foreign == "file":
        (folder / "notes.txt").write_text("mine", encoding="utf-8")
        named = "the file 'notes.txt'"
    elif foreign == "subfolder":
        (folder / "plots").mkdir()
        named = "the folder 'plots'"
    else:
        os.remove(folder / "placement.txt")
        os.symlink(tmp_path / "elsewhere.txt", folder / "placement.txt")
        named = "the symbolic link 'placement.txt'"
    before = snapshot(tmp_path)

    def no_work(*args, **kwargs):
        raise AssertionError("the folder must be refused before any work")

    monkeypatch.setattr(plantcore.analysis, "collect_report", no_work)
    assert main(["demo", "-o", str(folder), "--force"]) == 2
    said = capsys.readouterr()
    assert said.out == "" and len(said.err.strip().splitlines()) == 1
    assert f"holds {named}, which the demo does not write" in said.err
    assert "--force only replaces a folder holding the demo's own output" in said.err
    assert snapshot(tmp_path) == before


def test_an_interrupted_forced_demo_keeps_the_earlier_folder(demo_run, tmp_path, monkeypatch):
    from plantcore import files

    folder = _earlier_demo(demo_run, tmp_path)
    before = snapshot(tmp_path)
    calls = []
    original = files.atomic_write_text

    def fail_on_second(*args, **kwargs):
        calls.append(args[0])
        if len(calls) == 2:
            raise SystemExit(143)  # as SIGTERM arrives (cleanup_on_terminate)
        return original(*args, **kwargs)

    monkeypatch.setattr(files, "atomic_write_text", fail_on_second)  # the demo imports it late
    with pytest.raises(SystemExit):
        run_demo(folder, echo=None, progress=False, force=True)
    assert len(calls) == 2
    assert snapshot(tmp_path) == before and hidden_entries(tmp_path) == []


def test_demo_refuses_a_file_and_a_missing_parent(tmp_path):
    target = tmp_path / "afile"
    target.write_text("x", encoding="utf-8")
    with pytest.raises(ValueError, match="not a folder"):
        run_demo(target, echo=None, progress=False)
    with pytest.raises(ValueError, match="does not exist"):
        run_demo(tmp_path / "no" / "such", echo=None, progress=False)
    with pytest.raises(ValueError, match="no packaged example called 'kettle'"):
        run_demo(tmp_path / "new", example="kettle", echo=None, progress=False)
    assert sorted(os.listdir(tmp_path)) == ["afile"]


def test_demo_default_folder_in_the_working_directory(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / default_demo_folder().name).mkdir()  # a clash is avoided, not overwritten
    code = main(["demo", "--example", "motion_axis"])
    assert code == 0
    made = sorted(p for p in os.listdir(tmp_path) if os.listdir(tmp_path / p))
    assert len(made) == 1 and re.fullmatch(r"plantcore-demo-\d{8}-\d{6}(-\d+)?", made[0])
    assert sorted(os.listdir(tmp_path / made[0])) == sorted(DEMO_FILES)
    out = capsys.readouterr().out
    assert "14 -> 6 states" in out and "near cancellations: 2" in out


def test_default_folder_name():
    import datetime

    when = datetime.datetime(2031, 2, 3, 4, 5, 6)
    assert default_demo_folder("base", when).as_posix() == "base/plantcore-demo-20310203-040506"


def test_demo_suggests_the_heater_that_separates_zones_2_and_3(demo_run):
    # By construction of the example, zones 2 and 3 are identical and share heater23: the
    # difference of their temperatures (two modes) is uncontrollable, and a heater of either
    # zone on its own command restores it; the symmetric booster restores nothing.
    _, folder, out, _ = demo_run
    text = (folder / "placement.txt").read_text()
    cells = [re.split(r"\s{2,}", line.strip()) for line in text.splitlines()
             if re.match(r"  \d+ ", line)]
    restores = {row[1]: row[2] for row in cells}
    assert restores["zone 2 heater on its own command"] == "2"
    assert restores["zone 3 heater on its own command"] == "2"
    assert restores["booster for zones 2 and 3 on the shared command"] == "0"
    # the difference of the two identical sensor filters stays out of reach of heaters
    assert "out of reach of every candidate: -3" in text
    assert "placement   3 modes the inputs cannot move" in out
