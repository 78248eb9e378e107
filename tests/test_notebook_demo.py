"""Execute the worked notebook(s) in notebooks/ top to bottom, so they never rot."""

from __future__ import annotations

import os
import re

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOKS = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "notebooks")
THERMAL = os.path.join(NOTEBOOKS, "thermal_process.ipynb")


def _code(nb):
    return "\n".join(c.source for c in nb.cells if c.cell_type == "code")


def test_notebook_uses_no_absolute_paths():
    nb = nbformat.read(THERMAL, as_version=4)
    nbformat.validate(nb)
    source = "\n".join(c.source for c in nb.cells)
    assert not re.search(r"""["'](/|[A-Za-z]:\\)""", source), "hard-coded absolute path"
    assert "load_example(" in _code(nb)  # reads a packaged model
    assert all(not c.get("outputs") for c in nb.cells if c.cell_type == "code")  # stored clean


def test_notebook_executes(tmp_path, monkeypatch, this_interpreter_kernel):
    nb = nbformat.read(THERMAL, as_version=4)
    # Let the kernel pick its own inline plot backend (the test session forces Agg, which the
    # kernel would inherit and which shows nothing), as it does for a user.
    monkeypatch.delenv("MPLBACKEND", raising=False)
    # No time limit per cell (tests carry no wall-clock limits); the kernel runs in a scratch
    # folder so nothing is written next to the notebook.
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=None,
                                     resources={"metadata": {"path": str(tmp_path)}})
    client.execute()  # raises CellExecutionError on the first failing cell (its asserts too)
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    assert "original 11 states -> minimal 7 -> reduced 3" in text
    assert "still closed-loop poles: True" in text
    assert any(o.output_type == "display_data" and "image/png" in o.get("data", {})
               for o in outputs)
    assert os.listdir(tmp_path) == []
