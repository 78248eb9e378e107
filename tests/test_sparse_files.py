"""Sparse model files: manifest with Matrix Market files, sparse .npz archives, bad files."""

from __future__ import annotations

import io

import numpy as np
import pytest
import scipy.io
import scipy.sparse

import plantcore as pc
from plantcore.cli import main


def _rod(n=12, dt=None):
    A = scipy.sparse.diags([np.ones(n - 1), -2.0 * np.ones(n), np.ones(n - 1)], [-1, 0, 1]) / 3.0
    B = np.zeros((n, 1))
    B[0, 0] = 1.0
    C = np.zeros((2, n))
    C[0, -1] = 1.0
    C[1, n // 2] = 0.1
    return pc.StateSpaceModel(A, B, C, dt=dt, states=[f"T{i}" for i in range(n)],
                              outputs=["end", "middle"], name="rod")


@pytest.mark.parametrize("suffix", [".npz", ".toml"])
@pytest.mark.parametrize("dt", [None, 0.25])
def test_round_trip_is_exact_and_stays_sparse(tmp_path, suffix, dt):
    model = _rod(dt=dt)
    back = pc.load_model(pc.save_model(model, tmp_path / f"rod{suffix}"))
    assert back.is_sparse
    assert (back.A != model.A).nnz == 0          # bit for bit (17 significant digits)
    np.testing.assert_array_equal(back.B, model.B)
    np.testing.assert_array_equal(back.C, model.C)
    assert (back.states, back.outputs, back.name, back.dt) == \
        (model.states, model.outputs, "rod", dt)


def test_hand_written_manifest_with_inline_matrices_and_a_scipy_archive(tmp_path):
    model = _rod()
    scipy.io.mmwrite(tmp_path / "plant_A.mtx", scipy.sparse.coo_array(model.A))
    scipy.sparse.save_npz(tmp_path / "plant_B.npz", scipy.sparse.csc_array(model.B))
    rows = ", ".join("[" + ", ".join(repr(float(x)) for x in row) + "]" for row in model.C)
    (tmp_path / "plant.toml").write_text(
        f'name = "rod"\nA = "plant_A.mtx"\nB = "plant_B.npz"\nC = [{rows}]\n', encoding="utf-8")
    back = pc.load_model(tmp_path / "plant.toml")
    assert back.is_sparse and back.n == model.n
    np.testing.assert_allclose(back.A.toarray(), model.A.toarray(), rtol=1e-15)
    np.testing.assert_array_equal(back.B, model.B)
    np.testing.assert_array_equal(back.C, model.C)


def test_a_dense_file_still_reads_dense_and_json_refuses_a_sparse_model(tmp_path):
    dense = _rod().to_dense()
    assert not pc.load_model(pc.save_model(dense, tmp_path / "d.npz")).is_sparse
    with pytest.raises(pc.ModelFileError, match=r"r\.json: file: .*\.json holds dense models only"):
        pc.save_model(_rod(), tmp_path / "r.json")
    assert not (tmp_path / "r.json").exists()


def _manifest(tmp_path, text):
    path = tmp_path / "plant.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _write_mtx(path, header_kind="real"):
    path.write_text(f"%%MatrixMarket matrix coordinate {header_kind} general\n2 2 2\n"
                    "1 1 -1.0\n2 2 -2.0\n" if header_kind != "pattern" else
                    "%%MatrixMarket matrix coordinate pattern general\n2 2 2\n1 1\n2 2\n",
                    encoding="utf-8")


@pytest.mark.parametrize("case, field, fragment", [
    ("missing", "A", "gone.mtx: not found"),
    ("complex", "A", "holds complex values"),
    ("pattern", "A", "holds pattern values"),
    ("not_mtx", "A", "not a Matrix Market file"),
    ("suffix", "A", "unknown file type"),
    ("rows", "B", "B needs one row per state"),
    ("unknown", "Bee", "unknown key"),
])
def test_bad_manifests_give_one_line_naming_the_file_and_field(tmp_path, capsys, case, field,
                                                               fragment):
    good_b = 'B = [[1.0], [0.0]]\nC = [[0.0, 1.0]]\n'
    if case == "missing":
        path = _manifest(tmp_path, 'A = "gone.mtx"\n' + good_b)
    elif case in ("complex", "pattern"):
        kind = case
        (tmp_path / "a.mtx").write_text(
            f"%%MatrixMarket matrix coordinate {kind} general\n2 2 1\n1 1"
            + (" 1.0 2.0\n" if kind == "complex" else "\n"), encoding="utf-8")
        path = _manifest(tmp_path, 'A = "a.mtx"\n' + good_b)
    elif case == "not_mtx":
        (tmp_path / "a.mtx").write_text("1 2 3\n", encoding="utf-8")
        path = _manifest(tmp_path, 'A = "a.mtx"\n' + good_b)
    elif case == "suffix":
        path = _manifest(tmp_path, 'A = "a.csv"\n' + good_b)
    else:
        _write_mtx(tmp_path / "a.mtx")
        extra = 'Bee = 1\n' if case == "unknown" else ""
        b = 'B = [[1.0]]\nC = [[0.0, 1.0]]\n' if case == "rows" else good_b
        path = _manifest(tmp_path, 'A = "a.mtx"\n' + b + extra)
    with pytest.raises(pc.ModelFileError) as info:
        pc.load_model(path)
    exc = info.value
    assert exc.field == field and fragment in str(exc) and "\n" not in str(exc)
    assert str(exc).startswith(str(path))
    assert main(["inspect", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and fragment in err and "Traceback" not in err


def _archive(tmp_path, **changes):
    model = _rod(4)
    A = model.A.tocsr()
    members = {"A_data": A.data, "A_indices": A.indices, "A_indptr": A.indptr,
               "A_shape": np.array(A.shape), "A_format": np.array("csr"),
               "B": model.B, "C": model.C}
    members.update(changes)
    members = {k: v for k, v in members.items() if v is not None}
    path = tmp_path / "bad.npz"
    buffer = io.BytesIO()
    np.savez(buffer, **members)
    path.write_bytes(buffer.getvalue())
    return path


@pytest.mark.parametrize("changes, field, fragment", [
    ({"A_indices": np.array([0, 1, 0, 9, 1, 2, 2, 3, 3, 2])}, "A_indices", "outside the shape"),
    ({"A_indptr": np.array([0, 2, 1, 8, 10])}, "A_indptr", "not a valid csr index pointer"),
    ({"A_format": np.array("bsr")}, "A_format", "plantcore reads csr, csc and coo"),
    ({"A_data": np.array([1.0, np.nan] + [1.0] * 8)}, "A_data", "finite real number"),
    ({"A_shape": np.array([4, 5])}, "A", "must be square"),
    ({"A_extra": np.zeros(2)}, "A_extra", "unknown member"),
    ({"C": None}, "C", "missing"),
    ({"A_indptr": None}, "A", "A_indptr is missing"),
])
def test_bad_sparse_archives_are_refused_in_one_line(tmp_path, changes, field, fragment):
    path = _archive(tmp_path, **changes)
    with pytest.raises(pc.ModelFileError) as info:
        pc.load_model(path)
    assert info.value.field == field and fragment in str(info.value)


def test_a_good_hand_built_archive_reads(tmp_path):
    model = pc.load_model(_archive(tmp_path))
    assert model.is_sparse and model.n == 4
    np.testing.assert_array_equal(model.A.toarray(), _rod(4).A.toarray())
