"""Tests of plantcore.files.output_folder: the overwrite policy of the folder commands."""

from __future__ import annotations

import os
import signal

import pytest
from folder_snapshot import snapshot

from plantcore.files.output_folder import check_output_folder_policy, write_output_folder

OWN = ("a.txt", "b.txt")


def old_output(tmp_path, names=OWN):
    folder = tmp_path / "out"
    folder.mkdir()
    for name in names:
        (folder / name).write_bytes(f"old {name}".encode())
    return folder


def write_a(staging):
    (staging / "a.txt").write_text("new a", encoding="utf-8")
    return ["a.txt"]


def test_a_new_or_empty_folder_is_written_and_no_hidden_folder_is_left(tmp_path):
    assert write_output_folder(tmp_path / "new", write_a, OWN) == ["a.txt"]
    (tmp_path / "empty").mkdir()
    write_output_folder(tmp_path / "empty", write_a, OWN)
    assert sorted(os.listdir(tmp_path)) == ["empty", "new"]
    assert os.listdir(tmp_path / "empty") == ["a.txt"]


def test_without_force_a_non_empty_folder_is_refused_before_fill(tmp_path):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)
    calls = []
    with pytest.raises(ValueError, match=r"out: the folder exists and is not empty; the tool "
                                         r"keeps an existing folder \(give --force"):
        write_output_folder(folder, calls.append, OWN, owner="the tool")
    assert calls == [] and snapshot(tmp_path) == before


def test_force_replaces_the_folder_whole_and_drops_stale_files(tmp_path):
    folder = old_output(tmp_path)            # a.txt and b.txt; the new run writes a.txt only
    write_output_folder(folder, write_a, OWN, force=True)
    assert os.listdir(folder) == ["a.txt"]
    assert (folder / "a.txt").read_text(encoding="utf-8") == "new a"
    assert sorted(os.listdir(tmp_path)) == ["out"]   # no staging or backup left


@pytest.mark.parametrize("make, named", [
    (lambda f: (f / "notes.txt").write_text("mine", encoding="utf-8"), "the file 'notes.txt'"),
    (lambda f: (f / "a.txt.d").mkdir(), "the folder 'a.txt.d'"),
    (lambda f: os.symlink(f / "a.txt", f / "b.txt"), "the symbolic link 'b.txt'"),
    (lambda f: os.mkfifo(f / "b.txt"), "'b.txt', which is not a regular file"),
])
def test_force_refuses_a_folder_holding_anything_else(tmp_path, make, named):
    folder = old_output(tmp_path, names=("a.txt",))
    make(folder)
    before = snapshot(tmp_path)
    calls = []
    with pytest.raises(ValueError, match=f"out: the folder holds {named}, which the tool does "
                                         "not write; --force only replaces a folder holding "
                                         "the tool's own output"):
        write_output_folder(folder, calls.append, OWN, force=True, owner="the tool")
    assert calls == [] and snapshot(tmp_path) == before


def test_the_first_foreign_entry_by_name_is_named(tmp_path):
    folder = old_output(tmp_path)
    (folder / "z.txt").write_text("z", encoding="utf-8")
    (folder / "c.txt").mkdir()
    with pytest.raises(ValueError, match="holds the folder 'c.txt'"):
        check_output_folder_policy(folder, OWN, force=True)


def test_force_refuses_a_folder_holding_an_input(tmp_path):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)
    with pytest.raises(ValueError, match=r"holds the input .*a\.txt; --force never replaces"):
        write_output_folder(folder, write_a, OWN, force=True, inputs=(folder / "a.txt",))
    # also through a link to the input from outside the folder
    os.symlink(folder / "b.txt", tmp_path / "spec_link")
    with pytest.raises(ValueError, match="holds the input"):
        check_output_folder_policy(folder, OWN, force=True, inputs=(None, tmp_path / "spec_link"))
    os.remove(tmp_path / "spec_link")
    assert snapshot(tmp_path) == before
    # an input next to the folder is no reason to refuse
    (tmp_path / "spec.toml").write_text("x", encoding="utf-8")
    check_output_folder_policy(folder, OWN, force=True, inputs=(tmp_path / "spec.toml",))


def test_a_file_a_dangling_link_and_a_missing_parent_are_refused(tmp_path):
    (tmp_path / "afile").write_text("x", encoding="utf-8")
    with pytest.raises(ValueError, match="afile: exists and is not a folder"):
        check_output_folder_policy(tmp_path / "afile", OWN, force=True)
    os.symlink(tmp_path / "nowhere", tmp_path / "dangling")
    with pytest.raises(ValueError, match="dangling: is a symbolic link to nothing"):
        check_output_folder_policy(tmp_path / "dangling", OWN, force=True)
    with pytest.raises(ValueError, match="does not exist; create it first"):
        check_output_folder_policy(tmp_path / "no" / "such", OWN)
    write_output_folder(tmp_path / "made" / "out", write_a, OWN, make_parents=True)
    assert os.listdir(tmp_path / "made" / "out") == ["a.txt"]


def test_a_link_to_a_folder_replaces_the_folder_and_keeps_the_link(tmp_path):
    folder = old_output(tmp_path)
    os.symlink(folder, tmp_path / "link")
    write_output_folder(tmp_path / "link", write_a, OWN, force=True)
    assert os.path.islink(tmp_path / "link") and os.listdir(tmp_path / "link") == ["a.txt"]
    assert sorted(os.listdir(tmp_path)) == ["link", "out"]


def test_a_failing_rename_into_place_puts_the_old_folder_back(tmp_path, monkeypatch):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)
    real_rename = os.rename
    seen = []

    def rename(src, dst):
        seen.append((os.path.basename(src), os.path.basename(dst)))
        if os.path.basename(dst) == "out" and ".partial-" in os.path.basename(src):
            raise PermissionError(13, "Permission denied")
        real_rename(src, dst)

    monkeypatch.setattr(os, "rename", rename)
    with pytest.raises(PermissionError):
        write_output_folder(folder, write_a, OWN, force=True)
    # old folder moved aside, the swap failed, the old folder renamed back
    backup = seen[0][1]
    assert seen[0][0] == "out" and backup.startswith(".out.previous-")
    assert len(seen) == 3 and seen[2] == (backup, "out")
    assert snapshot(tmp_path) == before


@pytest.mark.parametrize("stop", [KeyboardInterrupt(), RuntimeError("disk full")])
def test_an_interrupted_fill_leaves_the_old_folder_and_no_staging(tmp_path, stop):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)

    def fill(staging):
        write_a(staging)
        raise stop

    with pytest.raises(type(stop)):
        write_output_folder(folder, fill, OWN, force=True)
    assert snapshot(tmp_path) == before


def test_sigterm_during_fill_unwinds_and_leaves_the_old_folder(tmp_path):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)

    def fill(staging):
        write_a(staging)
        os.kill(os.getpid(), signal.SIGTERM)  # turned into SystemExit(143) by the writer

    with pytest.raises(SystemExit) as stop:
        write_output_folder(folder, fill, OWN, force=True)
    assert stop.value.code == 143
    assert snapshot(tmp_path) == before
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL


def test_an_interruption_after_the_old_folder_is_moved_aside_restores_it(tmp_path,
                                                                          monkeypatch):
    folder = old_output(tmp_path)
    before = snapshot(tmp_path)
    real_rename = os.rename

    def rename(src, dst):
        real_rename(src, dst)
        if ".previous-" in os.path.basename(dst):
            raise KeyboardInterrupt  # right after the old folder went to the backup name

    monkeypatch.setattr(os, "rename", rename)
    with pytest.raises(KeyboardInterrupt):
        write_output_folder(folder, write_a, OWN, force=True)
    monkeypatch.undo()
    assert snapshot(tmp_path) == before


def test_a_foreign_entry_that_appears_while_fill_runs_is_kept(tmp_path):
    folder = old_output(tmp_path)

    def fill(staging):
        write_a(staging)
        (folder / "late.txt").write_text("someone else's", encoding="utf-8")

    with pytest.raises(ValueError, match="holds the file 'late.txt'"):
        write_output_folder(folder, fill, OWN, force=True)
    assert sorted(os.listdir(folder)) == ["a.txt", "b.txt", "late.txt"]
    assert sorted(os.listdir(tmp_path)) == ["out"]


def test_without_force_a_file_written_meanwhile_is_not_replaced(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()

    def fill(staging):
        write_a(staging)
        (folder / "late.txt").write_text("someone else's", encoding="utf-8")

    with pytest.raises(ValueError, match="not empty"):
        write_output_folder(folder, fill, OWN)
    assert os.listdir(folder) == ["late.txt"] and sorted(os.listdir(tmp_path)) == ["out"]


def test_an_entry_that_appears_in_the_last_moment_is_seen_in_the_backup(tmp_path, monkeypatch):
    folder = old_output(tmp_path)
    real_rename = os.rename

    def rename(src, dst):
        real_rename(src, dst)
        if ".previous-" in os.path.basename(dst):  # as if written just before the rename
            (tmp_path / os.path.basename(dst) / "late").mkdir()

    monkeypatch.setattr(os, "rename", rename)
    with pytest.raises(ValueError, match="holds the folder 'late'"):
        write_output_folder(folder, write_a, OWN, force=True)
    monkeypatch.undo()
    assert sorted(os.listdir(folder)) == ["a.txt", "b.txt", "late"]
    assert (folder / "a.txt").read_bytes() == b"old a.txt"
    assert sorted(os.listdir(tmp_path)) == ["out"]
