"""The command line's one overwrite policy: an existing output file is kept unless ``--force``.

Every command that writes a file (``reduce``, ``report``, ``audit -o``) checks the output's
suffix, whether it exists, and whether it is an input, before it reads or computes anything;
a refusal is one line on stderr and exit 2, and the file's bytes are unchanged.
"""

import os
import stat

import numpy as np
import pytest

import plantcore as pc
from plantcore.cli import main


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "tank.toml"
    pc.save_model(pc.StateSpaceModel(np.diag([-1.0, -2.0]), [[1.0], [0.0]], [[1.0, 1.0]]), path)
    return path


def _one_error_line(capsys, *words):
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for word in words:
        assert word in lines[0], lines[0]
    return lines[0]


@pytest.mark.parametrize("command, name", [("reduce", "out.toml"), ("report", "out.html")])
def test_existing_output_is_kept_without_force(model_file, tmp_path, capsys, command, name):
    out = tmp_path / name
    out.write_bytes(b"earlier result")
    assert main([command, str(model_file), "-o", str(out)]) == 2
    _one_error_line(capsys, str(out), "output", "already exists", "--force")
    assert out.read_bytes() == b"earlier result"


@pytest.mark.parametrize("command, name", [("reduce", "out.toml"), ("report", "out.html")])
def test_force_replaces_an_existing_output(model_file, tmp_path, capsys, command, name):
    out = tmp_path / name
    out.write_bytes(b"earlier result")
    assert main([command, str(model_file), "-o", str(out), "--force"]) == 0
    assert out.read_bytes() != b"earlier result" and out.stat().st_size > 100


def test_force_never_replaces_the_input(model_file, capsys):
    before = model_file.read_bytes()
    assert main(["reduce", str(model_file), "-o", str(model_file), "--force"]) == 2
    _one_error_line(capsys, "same file as the input")
    assert model_file.read_bytes() == before


def test_force_never_replaces_a_read_only_file(model_file, tmp_path, capsys):
    out = tmp_path / "locked.toml"
    out.write_bytes(b"locked")
    out.chmod(stat.S_IRUSR)
    try:
        assert main(["reduce", str(model_file), "-o", str(out), "--force"]) == 2
        _one_error_line(capsys, "read-only")
        assert out.read_bytes() == b"locked"
    finally:
        out.chmod(stat.S_IRUSR | stat.S_IWUSR)


@pytest.mark.parametrize("command, name, allowed", [("reduce", "out.txt", ".toml"),
                                                    ("report", "out.pdf", ".html"),
                                                    ("reduce", "noext", ".npz")])
def test_suffix_is_checked_before_the_model_is_read(tmp_path, capsys, command, name, allowed):
    # the model file does not exist: the output's suffix is refused first, so a long
    # computation never runs only to fail at the end
    missing = tmp_path / "no_such_model.toml"
    assert main([command, str(missing), "-o", str(tmp_path / name)]) == 2
    _one_error_line(capsys, name, "output", allowed)
    assert not (tmp_path / name).exists()


def test_audit_output_follows_the_same_policy(tmp_path, capsys):
    F = np.repeat(np.eye(2)[None], 4, axis=0)
    H = np.repeat(np.array([[1.0, 0.0]])[None], 4, axis=0)
    archive = tmp_path / "jacobians.npz"
    np.savez(archive, transition_jacobians=F, measurement_jacobians=H,
             expected_unobservable=np.array([[0.0], [1.0]]))
    out = tmp_path / "audit.html"
    out.write_bytes(b"earlier audit")
    assert main(["audit", str(archive), "-o", str(out)]) == 2
    _one_error_line(capsys, "already exists", "--force")
    assert out.read_bytes() == b"earlier audit"
    assert main(["audit", str(archive), "-o", str(out), "--force"]) == 0
    assert b"earlier audit" not in out.read_bytes()
    assert main(["audit", str(archive), "-o", str(tmp_path / "audit.txt")]) == 2


def test_a_character_device_is_written_into_not_replaced(model_file, capsys):
    if not os.path.exists("/dev/null"):
        pytest.skip("no /dev/null on this system")
    before = os.stat("/dev/null")
    # a report needs no suffix on a device; a model file does (its suffix is its format)
    assert main(["report", str(model_file), "-o", "/dev/null"]) == 0
    assert main(["reduce", str(model_file), "-o", "/dev/null"]) == 2
    _one_error_line(capsys, "/dev/null", ".toml")
    after = os.stat("/dev/null")
    assert stat.S_ISCHR(after.st_mode) and after.st_ino == before.st_ino


def test_help_states_the_policy(capsys):
    with pytest.raises(SystemExit):
        main(["reduce", "--help"])
    out = " ".join(capsys.readouterr().out.split())
    assert "An existing output file is kept" in out and "--force" in out


def test_sigterm_during_a_command_unwinds_and_exits_143(model_file, tmp_path, capsys,
                                                        monkeypatch):
    import signal
    import time

    from plantcore.files import model_files

    out = tmp_path / "reduced.toml"

    def write_then_terminate(path, text, **kwargs):
        def writer_that_is_killed(f):
            f.write(text[:10].encode())
            os.kill(os.getpid(), signal.SIGTERM)  # arrives while the temporary exists
            time.sleep(5)  # the handler interrupts this
        return model_files.atomic_write(path, writer_that_is_killed, **kwargs)

    monkeypatch.setattr(model_files, "atomic_write_text", write_then_terminate)
    with pytest.raises(SystemExit) as stop:
        main(["reduce", str(model_file), "-o", str(out)])
    assert stop.value.code == 143
    assert "terminated" in capsys.readouterr().err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["tank.toml"]  # no temporary left
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL


def test_an_interrupted_demo_leaves_no_partial_folder(tmp_path, monkeypatch):
    from plantcore import demo, files

    calls = []

    def fail_on_second(*args, **kwargs):
        calls.append(args[0])
        if len(calls) == 2:
            raise SystemExit(143)
        return original(*args, **kwargs)

    original = files.atomic_write_text
    monkeypatch.setattr(files, "atomic_write_text", fail_on_second)  # the demo imports it late
    folder = tmp_path / "demo_out"
    with pytest.raises(SystemExit):
        demo.run_demo(folder, echo=None)
    assert len(calls) == 2 and not folder.exists()
