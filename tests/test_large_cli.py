"""Command line on sparse models: inspect, reduce, report and plate (issue 18 item 5)."""

from __future__ import annotations

import json

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.examples.heated_plate import heated_plate


@pytest.fixture(scope="module")
def plate_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("plate")
    assert main(["plate", "-o", str(folder / "plate.toml"), "--size", "144"]) == 0
    return folder / "plate.toml"


def test_plate_writes_the_generated_example(plate_file, capsys, tmp_path):
    model = pc.load_model(plate_file)
    assert model.is_sparse and model.n == 144
    assert (model.A != heated_plate(144).A).nnz == 0
    assert main(["plate", "-o", str(plate_file)]) == 2          # never replaced silently
    assert "already exists" in capsys.readouterr().err
    assert main(["plate", "-o", str(tmp_path / "p.json")]) == 2
    assert not (tmp_path / "p.json").exists()


def test_inspect_prints_structure_and_hankel_values(plate_file, capsys):
    assert main(["inspect", str(plate_file)]) == 0
    out = capsys.readouterr().out
    assert "144 -> 144 states" in out and "structurally controllable: yes" in out
    assert "Leading Hankel singular values" in out and "Caution" in out
    assert main(["inspect", str(plate_file), "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    hsv = pc.hankel_singular_values(pc.load_model(plate_file).to_dense())
    np.testing.assert_allclose(data["hankel_singular_values"][:5], hsv[:5], rtol=1e-6)
    assert data["structural"]["kept"] == 144 and data["gramians"]["controllability"]["converged"]


def test_reduce_writes_a_dense_model_with_bound_and_measured_error(plate_file, capsys, tmp_path):
    out_file = tmp_path / "small.toml"
    assert main(["reduce", str(plate_file), "-o", str(out_file), "--order", "6"]) == 0
    out = capsys.readouterr().out
    assert "-> 6 states" in out and "error bound" in out and "measured error" in out
    reduced = pc.load_model(out_file)
    assert not reduced.is_sparse and reduced.n == 6
    bound = float(out.split("Hankel singular values): ")[1].split()[0])
    err = pc.peak_gain((np.block([[heated_plate(144).A.toarray(), np.zeros((144, 6))],
                                  [np.zeros((6, 144)), reduced.A]]),
                        np.vstack([heated_plate(144).B, reduced.B]),
                        np.hstack([heated_plate(144).C, -reduced.C]))).value
    assert err <= bound * (1 + 1e-6)
    assert main(["reduce", str(plate_file), "-o", str(tmp_path / "b.npz"),
                 "--max-error", "1e-3"]) == 0
    assert "error bound" in capsys.readouterr().out


def test_report_on_a_sparse_model(plate_file, capsys, tmp_path):
    page = tmp_path / "plate.html"
    assert main(["report", str(plate_file), "-o", str(page)]) == 0
    text = page.read_text(encoding="utf-8")
    assert "Poles of the reduced model (not of the plant)" in text
    assert "No modes table of the plant" in text and "Caution" in text
    assert "report written to" in capsys.readouterr().out


def test_an_unstable_sparse_model_is_refused_by_reduce(tmp_path, capsys):
    import scipy.sparse

    A = scipy.sparse.diags(np.r_[-np.ones(9), 0.3]).tocsr()
    pc.save_model(pc.StateSpaceModel(A, np.ones((10, 1)), np.ones((1, 10))), tmp_path / "u.npz")
    code = main(["reduce", str(tmp_path / "u.npz"), "-o", str(tmp_path / "r.npz"), "--order",
                 "2"])
    err = capsys.readouterr().err
    assert code == 3 and "may be unstable" in err and err.count("\n") == 1
    assert not (tmp_path / "r.npz").exists()
    assert main(["inspect", str(tmp_path / "u.npz")]) == 0
    assert "Low-rank Gramians: not computed" in capsys.readouterr().out
