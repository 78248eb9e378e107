"""``plantcore realize``: impulse-response files in, a model file out; bad input exits 2."""

import json

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.files.response_files import load_impulse_response, save_impulse_response
from plantcore.reduction.markov import markov_parameters


def _drive(dt=0.01):
    # A two-input, two-output drive of our own invention (speed, current from voltage, load).
    A = np.array([[0.9, 0.05, 0.0], [0.0, 0.5, 0.1], [0.0, 0.0, -0.3]])
    B = np.array([[1.0, 0.0], [0.5, 1.0], [1.0, -1.0]])
    C = np.array([[1.0, 2.0, 3.0], [0.0, 1.0, 1.0]])
    return pc.StateSpaceModel(A, B, C, [[0.1, 0.0], [0.0, 0.2]], dt=dt,
                              inputs=["voltage", "load"], outputs=["speed", "current"])


def _one_line_error(capsys, *names):
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "Traceback" not in err
    for name in names:
        assert name in err
    return err


@pytest.mark.parametrize("suffix", [".npz", ".csv"])
def test_realize_round_trip(tmp_path, capsys, suffix):
    model = _drive()
    data = tmp_path / f"pulse{suffix}"
    save_impulse_response(data, markov_parameters(model, 30).values, sample_time=0.01,
                          inputs=model.inputs, outputs=model.outputs)
    out = tmp_path / "drive.toml"
    assert main(["realize", str(data), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "order: 3" in text and "Caution" in text and "warning" not in text
    realized = pc.load_model(out)
    assert realized.dt == 0.01 and realized.inputs == model.inputs
    assert realized.outputs == model.outputs
    assert pc.check_equivalence(model, realized).equivalent


def test_csv_samples_with_sample_time_option_and_json(tmp_path, capsys):
    model = _drive()
    data = tmp_path / "pulse.csv"
    save_impulse_response(data, markov_parameters(model, 24).values)
    assert "sample," in data.read_text().splitlines()[0] + ","
    out = tmp_path / "drive.json"
    assert main(["realize", str(data), "-o", str(out), "--sample-time", "0.01",
                 "--format", "json", "--order", "2"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["order"] == 2 and report["automatic_order"] == 3
    assert report["decision"]["rank"] == 3 and report["time_domain"] == "discrete"
    assert pc.load_model(out).n == 2


def test_continuous_coefficients_and_noisy_file(tmp_path, capsys):
    cont = pc.StateSpaceModel([[-1.0, 2.0], [0.0, -3.0]], [[1.0], [1.0]], [[1.0, 0.0]])
    data = tmp_path / "moments.npz"
    save_impulse_response(data, markov_parameters(cont, 12).values)
    out = tmp_path / "cont.toml"
    assert main(["realize", str(data), "-o", str(out), "--noise-level", "0"]) == 0
    assert "continuous time" in capsys.readouterr().out
    assert pc.check_equivalence(cont, pc.load_model(out)).equivalent
    # Noisy data with its noise level in the file: the order is found and marked fragile.
    rng = np.random.default_rng(21)
    h = markov_parameters(_drive(), 60).values
    sigma = 1e-3
    save_impulse_response(tmp_path / "noisy.npz", h + sigma * rng.standard_normal(h.shape),
                          sample_time=0.01, noise_level=sigma)
    assert main(["realize", str(tmp_path / "noisy.npz"), "-o", str(tmp_path / "n.toml"),
                 "--format", "json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["order"] == 3 and report["noise_level_source"] == "given"
    assert report["fragile"]
    # The residual search ran and added nothing: its one step is recorded, below threshold.
    assert report["hankel_order"] == 3 and len(report["residual_search"]) == 1
    step = report["residual_search"][0]
    assert step["states"] == 3 and step["statistic"] < step["threshold"]


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.mark.parametrize("content, field", [
    ("time, y <- u\n0, 0\n0.1, 1\n0.3, 0.5\n0.4, 0.2\n", "line 4"),
    ("sample, y <- u\n0, 0\n1, 1\n2, x\n3, 0.2\n", "line 4"),
    ("sample, y <- u\n0, 0\n1, 1\n3, 0.5\n4, 0.2\n", "line 4"),
    ("sample, y\n0, 0\n1, 1\n2, 0.5\n3, 0.2\n", "header"),
    ("k, y <- u\n0, 0\n", "header"),
    ("sample, y <- u, y <- v, z <- u\n0, 0, 0, 0\n", "header"),
    ("sample, y <- u\n0, 0\n1, 1, 2\n", "line 3"),
    ("sample, y <- u\n0, 0\n1, nan\n", "line 3"),
])
def test_bad_csv_files(tmp_path, capsys, content, field):
    data = _write(tmp_path / "bad.csv", content)
    out = tmp_path / "out.toml"
    assert main(["realize", data, "-o", str(out)]) == 2
    _one_line_error(capsys, "bad.csv", field)
    assert not out.exists()


def test_bad_npz_files_and_paths(tmp_path, capsys):
    out = tmp_path / "out.toml"
    cases = {
        "missing.npz": ({"sample_time": np.array(0.1)}, "impulse_response"),
        "unknown.npz": ({"impulse_response": np.ones(6), "gain": np.ones(1)}, "gain"),
        "nan.npz": ({"impulse_response": np.array([0, 1, np.nan, 1, 1.0])}, "impulse_response"),
        "dt.npz": ({"impulse_response": np.ones(6), "sample_time": np.array(-1.0)},
                   "sample_time"),
        "names.npz": ({"impulse_response": np.ones((6, 2, 1)), "outputs": np.array(["a"])},
                      "outputs"),
        "short.npz": ({"impulse_response": np.ones(3)}, "at least 4"),
    }
    for name, (arrays, field) in cases.items():
        np.savez(tmp_path / name, **arrays)
        assert main(["realize", str(tmp_path / name), "-o", str(out)]) == 2, name
        _one_line_error(capsys, field)
        assert not out.exists()
    assert main(["realize", str(tmp_path / "absent.npz"), "-o", str(out)]) == 2
    _one_line_error(capsys, "absent.npz", "not found")
    np.savez(tmp_path / "ok.npz", impulse_response=np.r_[0.0, 0.5 ** np.arange(9)])
    before = (tmp_path / "ok.npz").read_bytes()
    assert main(["realize", str(tmp_path / "ok.npz"), "-o", str(tmp_path / "ok.npz")]) == 2
    _one_line_error(capsys, "ok.npz", "input")
    assert (tmp_path / "ok.npz").read_bytes() == before
    assert main(["realize", str(tmp_path / "ok.npz"), "-o", str(out), "--order", "99"]) == 2
    _one_line_error(capsys, "order 99")
    assert not out.exists()
    _write(tmp_path / "pulse.txt", "0, 1\n")
    assert main(["realize", str(tmp_path / "pulse.txt"), "-o", str(out)]) == 2
    _one_line_error(capsys, "pulse.txt", ".npz or .csv")


def test_loader_reads_time_column(tmp_path):
    path = _write(tmp_path / "t.csv", "# bench test 3\ntime, y <- u\n0, 0\n0.5, 1\n1.0, 0.5\n")
    data = load_impulse_response(path)
    assert data.sample_time == 0.5 and data.values.shape == (3, 1, 1)
    assert data.outputs == ("y",) and data.inputs == ("u",)


def test_existing_output_kept_unless_force(tmp_path, capsys):
    data = tmp_path / "pulse.npz"
    save_impulse_response(data, np.r_[0.0, 0.5 ** np.arange(9)], sample_time=0.1)
    out = tmp_path / "model.toml"
    out.write_text("kept\n")
    assert main(["realize", str(data), "-o", str(out)]) == 2
    _one_line_error(capsys, "model.toml", "already exists", "--force")
    assert out.read_text() == "kept\n"
    assert main(["realize", str(data), "-o", str(out), "--force"]) == 0
    assert pc.load_model(out).n == 1
    assert main(["realize", str(data), "-o", str(tmp_path / "model.txt")]) == 2
    _one_line_error(capsys, "model.txt", "suffix")
    assert main(["realize", str(data), "-o", str(data), "--force"]) == 2
    _one_line_error(capsys, "pulse.npz")


@pytest.mark.parametrize("noise, confident", [(1e-5, True), (1e-2, False)])
def test_noisy_data_confident_only_with_a_large_gap(tmp_path, capsys, noise, confident):
    # The drive's pulse response (largest sample about 4) with white noise of 1e-5 (weakest
    # Hankel value some 1e4 x the floor: confident) or 1e-2 (within a factor 100: a warning
    # that says why).
    model = _drive()
    exact = markov_parameters(model, 120).values
    rng = np.random.default_rng(31)
    values = exact + noise * rng.standard_normal(exact.shape) * (np.arange(120) > 0)[:, None, None]
    data = tmp_path / "pulse.npz"
    save_impulse_response(data, values, sample_time=0.01)
    out = tmp_path / "drive.toml"
    assert main(["realize", str(data), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "order: 3" in text
    if confident:
        assert "warning" not in text and "confident" in text
    else:
        assert "warning: the order depends on the floor (the weakest kept value" in text
    assert main(["realize", str(data), "-o", str(tmp_path / "again.toml"), "--format",
                 "json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["fragile"] is (not confident) and report["window_orders"][0][0] == 120
    assert 0.5 < report["plateau_ratio"] < 2.0
