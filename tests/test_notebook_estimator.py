"""Execute notebooks/estimator_audit.ipynb top to bottom (nbclient, kernel python3)."""

from __future__ import annotations

import os
import re

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOK = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "notebooks",
                        "estimator_audit.ipynb")


def test_estimator_notebook_is_stored_clean():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(nb)
    source = "\n".join(c.source for c in nb.cells)
    assert not re.search(r"""["'](/|[A-Za-z]:\\)""", source), "hard-coded absolute path"
    assert all(not c.get("outputs") for c in nb.cells if c.cell_type == "code")
    assert "validated against the real plant" in nb.cells[-1].source   # the safety caution


def test_estimator_notebook_executes(tmp_path, monkeypatch, this_interpreter_kernel):
    nb = nbformat.read(NOTEBOOK, as_version=4)
    # The kernel picks its own inline backend (the test session forces Agg, which it would
    # inherit); no time limit per cell (tests carry no wall-clock limits); the kernel runs in
    # a scratch folder so nothing is written next to the notebook.
    monkeypatch.delenv("MPLBACKEND", raising=False)
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=None,
                                     resources={"metadata": {"path": str(tmp_path)}})
    client.execute()  # raises CellExecutionError on the first failing cell (its asserts too)
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    assert "rank 4 of 7 -> unobservable directions: 3" in text
    assert "SPURIOUS OBSERVABILITY" in text
    assert "unobservable directions kept: 3" in text
    assert "one step: expected directions seen = 0" in text
    assert "measured inputs  directions seen: 1" in text
    pngs = [o for o in outputs
            if o.output_type == "display_data" and "image/png" in o.get("data", {})]
    assert len(pngs) == 2
    assert os.listdir(tmp_path) == []
