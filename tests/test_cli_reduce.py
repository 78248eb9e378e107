"""Tests of the ``plantcore reduce`` command's guard against hidden unstable modes.

The model has three states, one input and one output; the mode 0.5 has a zero row of B, so
by the PBH test (M. L. J. Hautus, 1969) the input cannot move it, and it is unstable
(Re > 0).  Its minimal realization (two states) has the same transfer function, so the
certificate says equivalent; the command must still refuse to write it silently.
"""

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main
from plantcore.core.wording import SAFETY_CAUTION


@pytest.fixture
def model_files(tmp_path):
    B = [[1.0], [1.0], [0.0]]
    C = [[1.0, 1.0, 1.0]]
    paths = {}
    for key, hidden, dt in (("unstable", 0.5, None), ("stable", -0.5, None),
                            ("integrator", 0.0, None), ("discrete", 1.2, 0.1)):
        diagonal = [-1.0, -2.0, hidden] if dt is None else [0.5, 0.3, hidden]
        paths[key] = tmp_path / f"{key}.toml"
        pc.save_model(pc.StateSpaceModel(np.diag(diagonal), B, C, dt=dt), paths[key])
    return paths


@pytest.mark.parametrize("key, words", [("unstable", "0.5 (unstable"),
                                        ("discrete", "1.2 (unstable"),
                                        ("integrator", "0 (on the stability boundary")])
def test_hidden_mode_exits_1_and_writes_nothing(model_files, tmp_path, capsys, key, words):
    out = tmp_path / "reduced.toml"
    assert main(["reduce", str(model_files[key]), "-o", str(out)]) == 1
    stderr = capsys.readouterr().err
    warning = [line for line in stderr.splitlines() if line.startswith("WARNING: ")]
    assert len(warning) == 1 and words in warning[0]
    assert "--accept-hidden-unstable" in stderr
    assert not out.exists()


def test_acknowledged_hidden_mode_exits_0_and_still_warns(model_files, tmp_path, capsys):
    out = tmp_path / "reduced.toml"
    code = main(["reduce", str(model_files["unstable"]), "-o", str(out),
                 "--accept-hidden-unstable"])
    stdout, stderr = capsys.readouterr()
    assert code == 0
    assert stderr.startswith("WARNING: the minimal realization removed 1 mode that is not "
                             "stable: 0.5 (unstable")
    assert pc.load_model(out).n == 2
    assert "Verdict:               EQUIVALENT" in stdout
    assert stdout.rstrip().endswith(SAFETY_CAUTION)


def test_stable_hidden_mode_exits_0_without_warning(model_files, tmp_path, capsys):
    out = tmp_path / "reduced.toml"
    assert main(["reduce", str(model_files["stable"]), "-o", str(out)]) == 0
    stderr = capsys.readouterr().err
    assert "WARNING" not in stderr and pc.load_model(out).n == 2


def test_help_documents_the_exit_codes(capsys):
    with pytest.raises(SystemExit):
        main(["reduce", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "--accept-hidden-unstable" in text
    assert "exit codes: 0 the reduced model was written; 1 the minimal realization removed" in text


def test_report_command_prints_the_warning(model_files, tmp_path, capsys):
    out = tmp_path / "hidden.html"
    assert main(["report", str(model_files["unstable"]), "-o", str(out)]) == 0
    stderr = capsys.readouterr().err
    assert "WARNING: the minimal realization removed 1 mode" in stderr
    assert 'class="alert"' in out.read_text(encoding="utf-8")


def test_minimal_realization_not_equivalent_exits_1(model_files, tmp_path, capsys,
                                                     monkeypatch):
    # Should the written minimal realization ever be certified NOT EQUIVALENT (a defect),
    # reduce says so on stderr and exits 1 rather than 0.
    from plantcore.reduction import equivalence

    class NotEquivalent:
        verdict, equivalent = "not equivalent", False

        def to_text(self, labels=None):
            return "Verdict:               NOT EQUIVALENT"

    monkeypatch.setattr(equivalence, "check_equivalence", lambda a, b: NotEquivalent())
    out = tmp_path / "reduced.toml"
    assert main(["reduce", str(model_files["stable"]), "-o", str(out)]) == 1
    stderr = capsys.readouterr().err
    assert "NOT EQUIVALENT to the model" in stderr and out.exists()
