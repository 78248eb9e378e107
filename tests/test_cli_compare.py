"""Tests of the ``plantcore compare`` command and of the certificate printed by ``reduce``.

Exit codes are the contract of DESIGN.md (0 equivalent, 1 not, 2 bad input), so that the
command can gate a build script.  The models compared have transfer functions worked out by
hand: (s + 3)/((s + 1)(s + 3)) = 1/(s + 1), against 1/(s + 1.001).
"""

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION


@pytest.fixture
def files(tmp_path):
    g = pc.from_transfer_function([1.0, 3.0], [1.0, 4.0, 3.0])           # = 1/(s + 1)
    paths = {
        "original": tmp_path / "original.toml",
        "minimal": tmp_path / "minimal.json",
        "different": tmp_path / "different.npz",
        "discrete": tmp_path / "discrete.toml",
        "two_inputs": tmp_path / "two_inputs.toml",
    }
    pc.save_model(g, paths["original"])
    pc.save_model(pc.minimal_realization(g).model, paths["minimal"])
    pc.save_model(pc.from_transfer_function([1.0], [1.0, 1.001]), paths["different"])
    pc.save_model(g.replace(dt=0.1), paths["discrete"])
    pc.save_model(pc.StateSpaceModel([[-1.0]], [[1.0, 0.0]], [[1.0]]), paths["two_inputs"])
    return {k: str(v) for k, v in paths.items()}


def test_equivalent_models_exit_0(files, capsys):
    code = main(["compare", files["original"], files["minimal"]])
    out, err = capsys.readouterr()
    assert code == 0
    assert "Verdict:               EQUIVALENT" in out
    assert out.rstrip().endswith(SAFETY_CAUTION)
    assert "original.toml" in out and "minimal.json" in out      # files named in the report
    assert err == ""


def test_different_models_exit_1(files, capsys):
    code = main(["compare", files["original"], files["different"]])
    out, _ = capsys.readouterr()
    assert code == 1
    assert "NOT EQUIVALENT" in out and "differ most at" in out
    # A loose tolerance accepts the 1e-3 difference.
    assert main(["compare", files["original"], files["different"], "--tol", "1e-2"]) == 0


def test_incomparable_models_exit_1_with_reason(files, capsys):
    assert main(["compare", files["original"], files["discrete"]]) == 1
    assert "discrete-time" in capsys.readouterr().out
    assert main(["compare", files["original"], files["two_inputs"]]) == 1
    assert "inputs" in capsys.readouterr().out


def test_exact_flag(files, capsys):
    assert main(["compare", files["original"], files["different"], "--exact"]) == 1
    out = capsys.readouterr().out
    assert "Exact comparison:      different" in out
    assert main(["compare", files["original"], files["original"], "--exact"]) == 0
    assert "Exact comparison:      identical" in capsys.readouterr().out


def test_bad_input_exit_2(files, tmp_path, capsys):
    missing = str(tmp_path / "missing.toml")
    assert main(["compare", files["original"], missing]) == 2
    err = capsys.readouterr().err
    assert "missing.toml" in err and len(err.strip().splitlines()) == 1
    broken = tmp_path / "broken.toml"
    broken.write_text('A = [[-1.0]]\nB = [[1.0], [2.0]]\nC = [[1.0]]\n', encoding="utf-8")
    assert main(["compare", str(broken), files["original"]]) == 2
    err = capsys.readouterr().err
    assert "broken.toml" in err and "B" in err and "Traceback" not in err
    assert main(["compare", files["original"], files["minimal"], "--tol", "-1"]) == 2
    assert "tol" in capsys.readouterr().err
    assert main(["compare", files["original"]]) == 2                  # MODEL_B missing


def test_reduce_prints_the_certificate(files, tmp_path, capsys):
    out_file = tmp_path / "reduced.toml"
    code = main(["reduce", files["original"], "-o", str(out_file)])
    out, _ = capsys.readouterr()
    assert code == 0 and out_file.exists()
    assert "equivalence certificate" in out and "EQUIVALENT" in out
    assert SAFETY_CAUTION in out
    reduced = pc.load_model(out_file)
    assert np.allclose(reduced.transfer_at(2j), pc.load_model(files["original"]).transfer_at(2j))


def _undecided_pair():
    """A stiff model (poles over 12 decades) against a similarity transform of itself with a
    badly conditioned T, drawn by the certificate study: the copy's rounding makes a
    difference above the tolerance and the first-order rounding bound, but within the margin."""
    import importlib.util
    import pathlib
    import warnings

    path = pathlib.Path(__file__).resolve().parents[1] / "benchmarks" / "certificate_study.py"
    spec = importlib.util.spec_from_file_location("certificate_study", path)
    study = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pc.AccuracyWarning)
        kind, _, a, b = study.pairs(0, 12, False)[1]
    assert kind == "similarity"
    return a, b


def test_undecided_exits_4_and_is_never_called_not_equivalent(tmp_path, capsys):
    a, b = _undecided_pair()
    pa, pb = tmp_path / "stiff.toml", tmp_path / "stiff_copy.toml"
    pc.save_model(a, pa)
    pc.save_model(b, pb)
    code = main(["compare", str(pa), str(pb)])
    out = capsys.readouterr().out
    assert code == 4
    assert "Verdict:               UNDECIDED" in out and "NOT EQUIVALENT" not in out
    assert "Attainable accuracy:" in out
    assert out.rstrip().endswith(SAFETY_CAUTION)


def test_help_documents_the_compare_exit_codes(capsys):
    with pytest.raises(SystemExit):
        main(["compare", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "4 UNDECIDED" in text and "0 EQUIVALENT" in text and "1 NOT EQUIVALENT" in text


def test_stiff_model_compared_with_itself_exits_0(tmp_path, capsys):
    # Issue 20: eigenvalues -1e-4 .. -1e4, orthogonally hidden, compared with itself.
    rng = np.random.default_rng(1)
    Q, _ = np.linalg.qr(rng.standard_normal((5, 5)))
    model = pc.StateSpaceModel(Q @ np.diag(-np.geomspace(1e-4, 1e4, 5)) @ Q.T,
                               rng.standard_normal((5, 1)), rng.standard_normal((1, 5)))
    path = tmp_path / "stiff.toml"
    pc.save_model(model, path)
    assert main(["compare", str(path), str(path)]) == 0
    assert "Verdict:               EQUIVALENT" in capsys.readouterr().out
