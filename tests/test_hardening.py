"""Hardening: bad model files, safe writing, and fuzzing of the file readers.

* A corpus of bad files (tests/data/bad/, index in expected.json) plus cases generated here;
  each must give a ``ModelFileError`` naming the file and the field, and exit code 2 with
  one line on stderr (no traceback) from ``plantcore inspect``, in process and through
  ``python -m plantcore``.
* Safe writing: an output equal to an input is refused and the input untouched; a missing
  or read-only folder gives a clear error and leaves nothing behind; failures in the middle
  of a write leave no temporary file and the old contents intact.
* Fuzzing (hypothesis) of the TOML, JSON and NPZ readers: a generated document, random
  bytes, or a damaged archive gives either a valid model or a ``ModelFileError``, never any
  other exception.
"""

from __future__ import annotations

import io
import json
import os
import pickle
import stat
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import plantcore as pc
from plantcore import cli
from plantcore import files as pio

BAD = Path(__file__).parent / "data" / "bad"
EXPECTED = json.loads((BAD / "expected.json").read_text(encoding="utf-8"))
VALID_TOML = 'A = [[-2.0, 0.0], [1.5, -0.4]]\nB = [[1.0], [0.0]]\nC = [[0.0, 1.0]]\n'


def _refusal(path) -> pc.ModelFileError:
    """The error load_model raises for a bad file, with its one-line form checked."""
    with pytest.raises(pc.ModelFileError) as info:
        pc.load_model(path)
    exc = info.value
    message = str(exc)
    assert isinstance(exc, ValueError)
    assert "\n" not in message and "\r" not in message
    assert exc.path == os.fspath(path) and exc.field  # names the file and a field
    assert message.startswith(f"{os.fspath(path)}: {exc.field}: ")
    return exc


def _assert_cli_refuses(path, capsys, exc: pc.ModelFileError) -> None:
    """`plantcore inspect FILE` in process: exit 2, one line on stderr, the same message."""
    code = cli.main(["inspect", os.fspath(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    assert len(err.strip().splitlines()) == 1, err
    assert str(exc) in err
    assert "Traceback" not in err


# --- the committed corpus --------------------------------------------------------------------

def test_corpus_is_large_and_fully_indexed():
    files = {p.name for p in BAD.iterdir()} - {"expected.json", "README.md"}
    assert files == set(EXPECTED), "every bad file needs an entry in expected.json and vice versa"
    assert len(files) >= 25
    kinds = {Path(name).suffix for name in files}
    assert {".toml", ".json", ".npz"} <= kinds


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_corpus_file_is_refused_with_its_message(name, capsys):
    path = BAD / name
    exc = _refusal(path)
    for fragment in EXPECTED[name]:
        assert fragment in str(exc), (name, str(exc))
    _assert_cli_refuses(path, capsys, exc)


@pytest.mark.parametrize("name", ["ragged_rows.toml", "nan_literal.json", "npz_object_array.npz"])
def test_corpus_through_a_separate_process(name, tmp_path):
    exc = _refusal(BAD / name)
    result = subprocess.run([sys.executable, "-m", "plantcore", "inspect", str(BAD / name)],
                            capture_output=True, text=True, cwd=tmp_path, timeout=300)
    assert result.returncode == 2, result.stderr
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and str(exc) in lines[0], result.stderr
    assert "Traceback" not in result.stderr
    assert os.listdir(tmp_path) == []  # nothing written


# --- cases generated on the test machine -----------------------------------------------------

def test_bytes_that_are_not_utf8(tmp_path, capsys):
    for name, data in [("oven.toml", VALID_TOML.encode() + b"# caf\xe9 recipe\n"),
                       ("oven.json", b'{"A": [[-1.0]],\n "name": "\xff\xfe",\n "B": [[1.0]], "C": [[1.0]]}')]:
        path = tmp_path / name
        path.write_bytes(data)
        exc = _refusal(path)
        assert exc.field == ("line 4" if name.endswith(".toml") else "line 2")
        assert "not valid UTF-8" in str(exc)
        _assert_cli_refuses(path, capsys, exc)


def test_file_larger_than_the_cap(tmp_path, monkeypatch, capsys):
    assert pio.MAX_MODEL_FILE_BYTES == 64 * 1024 * 1024  # the documented cap
    monkeypatch.setattr(pio.layout, "MAX_MODEL_FILE_BYTES", 10_000)   # where readers look it up
    path = tmp_path / "oven.toml"
    path.write_text(VALID_TOML + "# padding\n" * 2_000, encoding="utf-8")
    exc = _refusal(path)
    assert f"has {path.stat().st_size} bytes, more than the limit of 10000 bytes" in str(exc)
    _assert_cli_refuses(path, capsys, exc)
    # A small archive that unpacks to more than the cap (a "zip bomb" in miniature).
    bomb = tmp_path / "bomb.npz"
    np.savez_compressed(bomb, A=np.zeros((100, 100)), B=np.zeros((100, 1)), C=np.zeros((1, 100)))
    assert bomb.stat().st_size < 10_000
    exc = _refusal(bomb)
    assert "unpacks to" in str(exc) and exc.field == "file"
    _assert_cli_refuses(bomb, capsys, exc)


def test_folder_missing_file_and_path_through_a_file(tmp_path, capsys):
    folder = tmp_path / "plant.toml"
    folder.mkdir()
    missing = tmp_path / "nowhere.toml"
    regular = tmp_path / "notes.txt"
    regular.write_text("x", encoding="utf-8")
    through = regular / "plant.toml"
    for path, fragment in [(folder, "file: is a folder"), (missing, "file: not found"),
                           (through, "file: not found (a part of the path is not a folder)")]:
        exc = _refusal(path)
        assert fragment in str(exc)
        _assert_cli_refuses(path, capsys, exc)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes need a POSIX system")
def test_a_named_pipe_is_refused_without_blocking(tmp_path, capsys):
    pipe = tmp_path / "plant.toml"
    os.mkfifo(pipe)
    exc = _refusal(pipe)  # opening a pipe for reading would block forever
    assert "is not a regular file" in str(exc)
    _assert_cli_refuses(pipe, capsys, exc)


class _Trap:
    """Unpickling this object creates a file: proof that something was unpickled."""

    def __init__(self, marker):
        self.marker = str(marker)

    def __reduce__(self):
        return (open, (self.marker, "w"))


def test_object_array_is_refused_without_unpickling(tmp_path, capsys):
    marker = tmp_path / "unpickled.txt"
    path = tmp_path / "trap.npz"
    trap = np.empty((1, 1), dtype=object)
    trap[0, 0] = _Trap(marker)
    np.savez(path, A=trap, B=np.ones((1, 1)), C=np.ones((1, 1)))
    exc = _refusal(path)
    assert "A: holds Python objects" in str(exc)
    _assert_cli_refuses(path, capsys, exc)
    assert not marker.exists()
    # Control: the trap is live, so the check above could fail.
    with np.load(path, allow_pickle=True) as data:
        data["A"].item().close()
    assert marker.exists()


def test_member_declaring_an_enormous_shape_is_refused_before_reading(tmp_path, capsys):
    path = tmp_path / "huge.npz"
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(
        header, {"descr": "<f8", "fortran_order": False, "shape": (10**6, 10**6)})
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("A.npy", header.getvalue() + b"\0" * 64)
        for key, arr in [("B", np.ones((1, 1))), ("C", np.ones((1, 1)))]:
            buf = io.BytesIO()
            np.save(buf, arr)
            zf.writestr(f"{key}.npy", buf.getvalue())
    exc = _refusal(path)
    assert "A: declares shape (1000000, 1000000)" in str(exc)
    _assert_cli_refuses(path, capsys, exc)


def test_deep_nesting_and_enormous_integers(tmp_path):
    cases = {
        "deep.json": '{"A": ' + "[" * 50_000 + "]" * 50_000 + "}",
        "deep.toml": "A = " + "[" * 50_000 + "]" * 50_000 + "\n",
        "digits.json": '{"A": [[' + "9" * 5_000 + ']], "B": [[1]], "C": [[1]]}',
        "big.toml": "A = [[" + "9" * 400 + "]]\nB = [[1]]\nC = [[1]]\n",
    }
    messages = {}
    for name, text in cases.items():
        (tmp_path / name).write_text(text, encoding="utf-8")
        messages[name] = str(_refusal(tmp_path / name))
    assert "nested too deeply" in messages["deep.json"] and "nested too deeply" in messages["deep.toml"]
    assert "more digits than Python converts" in messages["digits.json"]
    assert "A: row 1, column 1 is too large for a floating-point number" in messages["big.toml"]


# --- safe writing ----------------------------------------------------------------------------

def _model():
    return pc.StateSpaceModel([[-2.0, 0.0], [1.5, -0.4]], [[1.0], [0.0]], [[0.0, 1.0]],
                              states=["heater", "chamber"], name="drying oven")


def _snapshot(path):
    info = os.stat(path)
    return Path(path).read_bytes(), info.st_mtime_ns, stat.S_IMODE(info.st_mode)


def _temporaries(folder):
    return [name for name in os.listdir(folder) if name.endswith(".tmp")]


@pytest.mark.parametrize("spelling", ["same", "relative", "symlink", "hardlink"])
def test_output_equal_to_input_is_refused_and_input_untouched(tmp_path, spelling, monkeypatch):
    source = tmp_path / "oven.toml"
    source.write_text(VALID_TOML, encoding="utf-8")
    before = _snapshot(source)
    if spelling == "same":
        output = source
    elif spelling == "relative":
        (tmp_path / "sub").mkdir()
        monkeypatch.chdir(tmp_path / "sub")
        output = Path("..") / "sub" / ".." / "oven.toml"
    elif spelling == "symlink":
        output = tmp_path / "link.toml"
        output.symlink_to(source)
    else:
        output = tmp_path / "hard.toml"
        os.link(source, output)
    with pytest.raises(pc.ModelFileError, match=r"output: is the same file as the input"):
        pc.save_model(_model(), output, inputs=(source,))
    assert _snapshot(source) == before
    assert _temporaries(tmp_path) == []


def test_cli_reduce_refuses_to_overwrite_its_input(tmp_path, capsys):
    source = tmp_path / "oven.toml"
    source.write_text(VALID_TOML, encoding="utf-8")
    before = _snapshot(source)
    code = cli.main(["reduce", str(source), "-o", str(source)])
    _, err = capsys.readouterr()
    assert code == 2 and len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert "same file as the input" in err
    assert _snapshot(source) == before


def test_missing_output_folder(tmp_path):
    target = tmp_path / "results" / "oven.json"
    with pytest.raises(pc.ModelFileError, match=r"output: the folder .*results does not exist"):
        pc.save_model(_model(), target)
    assert os.listdir(tmp_path) == []


def test_output_folder_that_is_a_regular_file(tmp_path):
    (tmp_path / "results").write_text("not a folder", encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match=r"output: .*results is not a folder"):
        pio.atomic_write_text(tmp_path / "results" / "report.md", "# report\n")
    assert sorted(os.listdir(tmp_path)) == ["results"]


def test_output_that_is_a_folder(tmp_path):
    (tmp_path / "oven.npz").mkdir()
    with pytest.raises(pc.ModelFileError, match=r"output: is a folder"):
        pc.save_model(_model(), tmp_path / "oven.npz")


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="root ignores folder permissions; the simulated failure below covers it")
def test_read_only_output_folder(tmp_path):
    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        with pytest.raises(pc.ModelFileError, match=r"cannot write in the folder .*permission denied"):
            pc.save_model(_model(), folder / "oven.toml")
        assert os.listdir(folder) == []
    finally:
        folder.chmod(0o755)


def test_failed_move_leaves_old_contents_and_no_temporary(tmp_path, monkeypatch):
    target = tmp_path / "oven.toml"
    target.write_text("old contents\n", encoding="utf-8")

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(pio.safe_write.os, "replace", refuse)
    with pytest.raises(pc.ModelFileError, match=r"output: could not be written \(Permission denied\); "
                                                r"nothing was changed"):
        pc.save_model(_model(), target)
    monkeypatch.undo()
    assert target.read_text(encoding="utf-8") == "old contents\n"
    assert _temporaries(tmp_path) == []


@pytest.mark.parametrize("failure", [ValueError("renderer failed"), KeyboardInterrupt()])
def test_writer_failing_half_way_leaves_nothing_half_written(tmp_path, failure):
    target = tmp_path / "report.html"
    target.write_text("previous report\n", encoding="utf-8")

    def writer(f):
        f.write(b"<html><body>half a rep")
        raise failure

    with pytest.raises(type(failure)):
        pio.atomic_write(target, writer)
    assert target.read_text(encoding="utf-8") == "previous report\n"
    assert _temporaries(tmp_path) == []
    assert sorted(os.listdir(tmp_path)) == ["report.html"]


def test_file_permissions_follow_umask_or_the_replaced_file(tmp_path):
    umask = os.umask(0)
    os.umask(umask)
    fresh = pio.atomic_write_text(tmp_path / "new.md", "x\n")
    assert stat.S_IMODE(os.stat(fresh).st_mode) == 0o666 & ~umask
    kept = tmp_path / "private.md"
    kept.write_text("old\n", encoding="utf-8")
    kept.chmod(0o600)
    pio.atomic_write_text(kept, "new\n")
    assert stat.S_IMODE(os.stat(kept).st_mode) == 0o600 and kept.read_text() == "new\n"


def test_writing_through_a_symbolic_link_keeps_the_link(tmp_path):
    real = tmp_path / "real.json"
    real.write_text("{}", encoding="utf-8")
    link = tmp_path / "link.json"
    link.symlink_to(real)
    pc.save_model(_model(), link)
    assert link.is_symlink() and pc.load_model(real).name == "drying oven"


def test_atomic_write_refuses_every_listed_input(tmp_path):
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text(VALID_TOML, encoding="utf-8")
    b.write_text(VALID_TOML, encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match="same file as the input"):
        pio.atomic_write_text(b, "x", inputs=[a, b])
    assert b.read_text(encoding="utf-8") == VALID_TOML
    out = pio.atomic_write_text(tmp_path / "c.toml", "x", inputs=[a, b])  # a new name is fine
    assert out.read_text(encoding="utf-8") == "x"


# --- fuzzing the readers -----------------------------------------------------------------------

def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if value != value:
            return "nan"
        if value in (float("inf"), float("-inf")):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)  # JSON escapes are TOML basic-string escapes (mostly)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {_toml_value(v)}" for k, v in value.items()) + "}"
    return '"null"'  # TOML has no null


def _toml_document(doc: dict) -> str:
    return "".join(f"{json.dumps(k)} = {_toml_value(v)}\n" for k, v in doc.items())


_numbers = (st.integers(min_value=-2**80, max_value=2**80)
            | st.floats(allow_nan=True, allow_infinity=True))
_scalars = st.none() | st.booleans() | _numbers | st.text(max_size=6)
_values = st.recursive(
    _scalars,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=4), inner, max_size=3),
    max_leaves=16)
_keys = st.sampled_from(pio.MODEL_FILE_KEYS) | st.text(max_size=6)


@st.composite
def _documents(draw):
    """Mostly well-formed model documents with one or two things changed, or random ones."""
    if draw(st.booleans()):
        return draw(st.dictionaries(_keys, _values, max_size=9))
    n, m, p = draw(st.integers(0, 3)), draw(st.integers(0, 2)), draw(st.integers(0, 2))

    def mat(r, c):
        return [[draw(st.floats(-1e3, 1e3)) for _ in range(c)] for _ in range(r)]

    doc = {"A": mat(n, n), "B": mat(n, m), "C": mat(p, n)}
    if draw(st.booleans()):
        doc["D"] = mat(p, m)
    if draw(st.booleans()):
        doc["sample_time"] = draw(_numbers)
    if draw(st.booleans()):
        doc["states"] = draw(st.lists(st.text(max_size=4), min_size=n, max_size=n))
    for _ in range(draw(st.integers(0, 2))):
        key = draw(_keys)
        if draw(st.booleans()):
            doc.pop(key, None)
        else:
            doc[key] = draw(_values)
    return doc


def _load_or_refuse(path):
    """The only outcomes allowed: a model, or a ModelFileError (any other exception fails)."""
    try:
        model = pc.load_model(path)
    except pc.ModelFileError as exc:
        assert "\n" not in str(exc) and str(exc).startswith(f"{path}: ")
        return None
    assert isinstance(model, pc.StateSpaceModel)
    assert model.n_inputs >= 1 and model.n_outputs >= 1
    return model


@settings(max_examples=100)
@given(doc=_documents())
def test_fuzz_json_and_toml_documents(tmp_path_factory, doc):
    folder = tmp_path_factory.mktemp("fuzz_docs")
    (folder / "m.json").write_text(json.dumps(doc, allow_nan=True), encoding="utf-8")
    (folder / "m.toml").write_text(_toml_document(doc), encoding="utf-8")
    _load_or_refuse(folder / "m.json")
    _load_or_refuse(folder / "m.toml")


@settings(max_examples=60)
@given(data=st.binary(max_size=300), suffix=st.sampled_from([".toml", ".json", ".npz"]))
def test_fuzz_random_bytes(tmp_path_factory, data, suffix):
    path = tmp_path_factory.mktemp("fuzz_bytes") / f"m{suffix}"
    path.write_bytes(data)
    _load_or_refuse(path)


def _valid_npz_bytes() -> bytes:
    buf = io.BytesIO()
    np.savez(buf, A=np.array([[-2.0, 0.0], [1.5, -0.4]]), B=np.array([[1.0], [0.0]]),
             C=np.array([[0.0, 1.0]]), sample_time=np.array(0.1), states=np.array(["h", "c"]))
    return buf.getvalue()


_NPZ = _valid_npz_bytes()


@settings(max_examples=100)
@given(edits=st.lists(st.tuples(st.integers(0, len(_NPZ) - 1), st.integers(0, 255)),
                      min_size=1, max_size=4),
       cut=st.none() | st.integers(0, len(_NPZ)))
def test_fuzz_damaged_npz_archives(tmp_path_factory, edits, cut):
    data = bytearray(_NPZ)
    for position, value in edits:
        data[position] = value
    if cut is not None:
        data = data[:cut]
    path = tmp_path_factory.mktemp("fuzz_npz") / "m.npz"
    path.write_bytes(bytes(data))
    _load_or_refuse(path)


def test_fuzz_helpers_write_loadable_files(tmp_path):
    # The fuzzing above is only meaningful if the test's own TOML writer and base archive
    # produce files that load when nothing is wrong with them:
    path = tmp_path / "m.toml"
    path.write_text(_toml_document({"A": [[0.5]], "B": [[1.0]], "C": [[2.0]], "sample_time": 3}),
                    encoding="utf-8")
    model = _load_or_refuse(path)
    assert model is not None and model.dt == 3.0
    path = tmp_path / "m.npz"
    path.write_bytes(_NPZ)
    assert _load_or_refuse(path).states == ("h", "c")


def test_check_output_path_refuses_like_atomic_write_without_writing(tmp_path):
    source = tmp_path / "oven.toml"
    source.write_text(VALID_TOML, encoding="utf-8")
    before = _snapshot(source)
    with pytest.raises(pc.ModelFileError, match="same file as the input"):
        pio.check_output_path(source, inputs=[source])
    with pytest.raises(pc.ModelFileError, match="does not exist"):
        pio.check_output_path(tmp_path / "missing" / "out.toml")
    assert pio.check_output_path(tmp_path / "out.toml", inputs=[source]) == tmp_path.resolve() / "out.toml"
    assert sorted(os.listdir(tmp_path)) == ["oven.toml"] and _snapshot(source) == before
