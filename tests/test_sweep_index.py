"""The sweep folder's index.html and the summary's rounding-level rule (issue 21)."""

from __future__ import annotations

import csv
import os

import pytest
from folder_snapshot import hidden_entries, snapshot

import plantcore as pc
from plantcore.reports.sweep_folder import write_sweep_folder


def _two_tanks(point):
    # the coupling c moves the first tank; at c = 0 it cannot be moved (by hand): margin 0,
    # computed at rounding level or exactly
    c = point["coupling"]
    return ([[-point["leak"], c], [0.0, -2.0]], [[0.0], [1.0]], [[1.0, 0.0]])


def test_index_page_holds_the_summary_plots_and_files(tmp_path):
    result = pc.sweep(_two_tanks, pc.grid(leak=[0.5, 1.0], coupling=[0.0, 1.0]),
                      executor="serial")
    files = write_sweep_folder(result, tmp_path / "out")
    names = [f.name for f in files]
    assert names[-2:] == ["summary.md", "index.html"]
    page = (tmp_path / "out" / "index.html").read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and 'class="plantcore-report"' in page
    for section in ("findings", "where-the-structure-changes", "plots", "files", "caution"):
        assert f'<section id="{section}">' in page and f'href="#{section}"' in page
    assert '<img src="margins.png"' in page and '<img src="structure.png"' in page
    assert page.count("<figcaption>") == 2
    assert '<a href="table.csv">' in page and "Stabilizable at" in page


def test_margins_at_rounding_level_show_as_zero_and_the_table_keeps_them(tmp_path):
    result = pc.sweep(_two_tanks, pc.grid(leak=[0.5, 1.0], coupling=[0.0, 1.0]),
                      executor="serial")
    write_sweep_folder(result, tmp_path / "out")
    summary = (tmp_path / "out" / "summary.md").read_text(encoding="utf-8")
    line = next(x for x in summary.splitlines() if x.startswith("- Smallest controllability"))
    assert line.startswith("- Smallest controllability margin: 0 at leak = ") and "coupling = 0." in line
    with open(tmp_path / "out" / "table.csv", newline="", encoding="utf-8") as f:
        raw = [float(r["smallest_controllability_margin"]) for r in csv.DictReader(f)
               if float(r["coupling"]) == 0.0]
    assert raw and all(0.0 <= v < 1e-12 for v in raw)


def _failing(point):
    raise ValueError("no model at this point")


def test_write_sweep_folder_force_replaces_an_earlier_sweep_and_keeps_other_folders(tmp_path):
    good = pc.sweep(_two_tanks, pc.grid(leak=[0.5], coupling=[0.0, 1.0]), executor="serial")
    failed = pc.sweep(_failing, pc.grid(leak=[0.5]), executor="serial")
    out = tmp_path / "out"
    write_sweep_folder(good, out)
    with pytest.raises(ValueError, match="not empty"):
        write_sweep_folder(failed, out)
    files = write_sweep_folder(failed, out, force=True)   # no plots this time: none left over
    assert sorted(os.listdir(out)) == sorted(f.name for f in files) == [
        "index.html", "summary.md", "table.csv"]
    assert hidden_entries(tmp_path) == []
    (out / "notes.md").write_text("mine", encoding="utf-8")
    before = snapshot(tmp_path)
    with pytest.raises(ValueError, match="holds the file 'notes.md', which a sweep does not "
                                         "write; --force only replaces"):
        write_sweep_folder(good, out, force=True)
    assert snapshot(tmp_path) == before


def test_an_interrupted_forced_sweep_folder_keeps_the_earlier_one(tmp_path, monkeypatch):
    from plantcore.reports import sweep_folder

    result = pc.sweep(_two_tanks, pc.grid(leak=[0.5], coupling=[0.0, 1.0]), executor="serial")
    out = tmp_path / "out"
    write_sweep_folder(result, out)
    before = snapshot(tmp_path)

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(sweep_folder, "summary_html", interrupted)  # the last file written
    with pytest.raises(KeyboardInterrupt):
        write_sweep_folder(result, out, force=True)
    assert snapshot(tmp_path) == before and hidden_entries(tmp_path) == []


def test_check_output_folder_refuses_a_folder_holding_the_specification(tmp_path):
    from plantcore.reports.sweep_folder import check_output_folder

    out = tmp_path / "out"
    out.mkdir()
    (out / "table.csv").write_text("old", encoding="utf-8")
    assert check_output_folder(out, force=True) == out
    assert check_output_folder(out, force=True, inputs=(tmp_path / "spec.toml",)) == out
    with pytest.raises(ValueError, match=r"holds the input .*table\.csv"):
        check_output_folder(out, force=True, inputs=(out / "table.csv",))
