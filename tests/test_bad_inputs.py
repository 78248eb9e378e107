"""Bad sweep specifications, audit archives and ``.npy`` files: exit 2, one line, every time.

The model-file corpus lives in ``tests/data/bad`` (``tests/test_hardening.py``); the cases
here need files made on the test machine (archives with flags set in their headers, headers
that declare enormous shapes, named pipes, files that cannot be opened).  Each case is
checked twice: the library raises :class:`plantcore.ModelFileError` naming the file and the
field on one line, and ``plantcore sweep|audit`` exits with 2 and prints that line alone.
Cases from issue 20, item 5.
"""

from __future__ import annotations

import io
import os
import zipfile
from pathlib import Path

import numpy as np
import pytest

import plantcore as pc
from plantcore import cli
from plantcore.estimation.jacobian_files import MAX_ARRAY_FILE_BYTES, MAX_AUDIT_FILE_BYTES
from plantcore.files import safe_read
from plantcore.sweeps.spec import MAX_SPEC_FILE_BYTES, load_sweep_spec

GRID_SPEC = """\
name = "hoist drum on a flexible cable"
A = [[0, 1], [0, "-stiffness / mass"]]
B = [[0], ["1 / mass"]]
C = [[1, 0]]
[parameter_grid]
mass = { values = [1.0, 2.0] }
stiffness = { values = [3.0] }
"""

needs_fifo = pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes need POSIX")


def _write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def _one_line_refusal(call, path, field=None) -> pc.ModelFileError:
    with pytest.raises(pc.ModelFileError) as info:
        call()
    exc = info.value
    text = str(exc)
    assert "\n" not in text and text.startswith(f"{os.fspath(path)}: ")
    if field is not None:
        assert exc.field == field, text
    return exc


def _cli_exit_2(argv, capsys, fragment: str) -> None:
    code = cli.main(argv)
    _, err = capsys.readouterr()
    assert code == 2, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    assert fragment in err, err


def _audit_archive(path: Path) -> Path:
    F = np.repeat(np.eye(2)[None], 3, axis=0)
    H = np.repeat(np.array([[[-1.0, 1.0]]]), 3, axis=0)
    np.savez(path, transition_jacobians=F, measurement_jacobians=H,
             expected_unobservable=np.ones((2, 1)))
    return path


def _patch_zip_headers(data: bytes, *, flag: int | None = None, method: int | None = None) -> bytes:
    """Set the general-purpose flag bit or the compression method in every zip header."""
    out = bytearray(data)
    for signature, flag_at, method_at in ((b"PK\x03\x04", 6, 8), (b"PK\x01\x02", 8, 10)):
        start = 0
        while (at := out.find(signature, start)) >= 0:
            if flag is not None:
                out[at + flag_at] |= flag
            if method is not None:
                out[at + method_at:at + method_at + 2] = method.to_bytes(2, "little")
            start = at + 4
    return bytes(out)


# --- sweep specifications ----------------------------------------------------------------

SPEC_CASES = {
    "integer_400_digits": (GRID_SPEC.replace("[3.0]", "[" + "9" * 400 + "]"),
                           "parameter_grid.stiffness.values", "integer of 400 digits"),
    "matrix_entry_400_digits": (GRID_SPEC.replace("C = [[1, 0]]", "C = [[1, " + "7" * 400 + "]]"),
                                "C[1][2]", "integer of 400 digits"),
    "nested_50000_deep": (GRID_SPEC + "[analysis]\ntolerance = " + "[" * 50_000 + "]" * 50_000
                          + "\n", "file", "nested too deeply"),
    "uniform_over_the_whole_range": (
        GRID_SPEC.split("[parameter_grid]")[0] + "[random_draws]\nseed = 1\ncount = 3\n"
        "[random_draws.parameters]\nmass = { distribution = \"uniform\", low = -1.7e308, "
        "high = 1.7e308 }\nstiffness = { distribution = \"choice\", values = [3.0] }\n",
        "random_draws.parameters", "beyond the floating-point range"),
    "normal_beyond_the_range": (
        GRID_SPEC.split("[parameter_grid]")[0] + "[random_draws]\nseed = 1\ncount = 3\n"
        "[random_draws.parameters]\nmass = { distribution = \"normal\", mean = 1e308, "
        "standard_deviation = 1e307 }\nstiffness = { distribution = \"choice\", values = [3.0] }\n",
        "random_draws.parameters", "beyond the floating-point range"),
    "grid_span_beyond_the_range": (
        GRID_SPEC.replace("mass = { values = [1.0, 2.0] }",
                          "mass = { start = -1.7e308, stop = 1.7e308, count = 3 }"),
        "parameter_grid.mass", "beyond the floating-point range"),
    "division_by_zero_everywhere": (GRID_SPEC.replace('"-stiffness / mass"', '"stiffness/0"'),
                                    "A[2][2]", "'stiffness/0' divides by zero"),
    "zero_to_a_negative_power": (GRID_SPEC.replace('"1 / mass"', '"0**-1 * mass"'),
                                 "B[2][1]", "divides by zero"),
    "count_with_400_digits": (GRID_SPEC.replace("mass = { values = [1.0, 2.0] }",
                                                "mass = { start = 1.0, stop = 2.0, count = "
                                                + "9" * 400 + " }"),
                              "parameter_grid.mass.count", "is larger than"),
    "integer_beyond_python_conversion": (GRID_SPEC.replace("[3.0]", "[" + "9" * 5000 + "]"),
                                         "file", "more digits than Python converts"),
    "not_utf8": (None, "line 1", "not valid UTF-8"),
}


@pytest.mark.parametrize("case", sorted(SPEC_CASES))
def test_bad_sweep_spec_exits_2_with_one_line(tmp_path, capsys, case):
    text, field, fragment = SPEC_CASES[case]
    path = tmp_path / f"{case}.toml"
    if text is None:
        path.write_bytes(b"name = \"caf\xe9\"\n")
    else:
        path.write_text(text, encoding="utf-8")
    exc = _one_line_refusal(lambda: load_sweep_spec(path), path, field)
    assert fragment in str(exc)
    _cli_exit_2(["sweep", str(path), "-o", str(tmp_path / "out"), "--executor", "serial"], capsys,
                fragment)
    assert not (tmp_path / "out").exists()


def test_spec_size_cap_is_documented_and_enforced(tmp_path, monkeypatch, capsys):
    assert MAX_SPEC_FILE_BYTES == 16 * 1024 * 1024
    monkeypatch.setattr("plantcore.sweeps.spec.MAX_SPEC_FILE_BYTES", 1_000)
    path = _write(tmp_path, "long.toml", GRID_SPEC + "# note\n" * 500)
    exc = _one_line_refusal(lambda: load_sweep_spec(path), path, "file")
    assert "more than the limit of 1000 bytes" in str(exc)
    assert "MAX_SPEC_FILE_BYTES" in str(exc)


def test_a_file_that_grows_while_read_stops_at_the_cap():
    class Endless(io.RawIOBase):
        def readable(self):
            return True

        def readinto(self, buffer):
            buffer[:] = b"#" * len(buffer)
            return len(buffer)

    with pytest.raises(pc.ModelFileError, match="has more than 4096 bytes"):
        safe_read.read_capped(io.BufferedReader(Endless()), "spec.toml", "sweep specifications",
                              limit=4096)


def test_endless_device_is_refused_without_reading(capsys):
    if not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero on this system")
    exc = _one_line_refusal(lambda: load_sweep_spec("/dev/zero"), "/dev/zero", "file")
    assert "is not a regular file" in str(exc)


@needs_fifo
def test_named_pipes_are_refused_without_blocking(tmp_path, capsys):
    spec_pipe, audit_pipe, basis_pipe = (tmp_path / n for n in ("spec.toml", "run.npz", "basis.npy"))
    for pipe in (spec_pipe, audit_pipe, basis_pipe):
        os.mkfifo(pipe)
    archive = _audit_archive(tmp_path / "good.npz")
    exc = _one_line_refusal(lambda: load_sweep_spec(spec_pipe), spec_pipe, "file")
    assert "is not a regular file" in str(exc)
    exc = _one_line_refusal(lambda: pc.audit_from_file(audit_pipe), audit_pipe, "file")
    assert "is not a regular file" in str(exc)
    exc = _one_line_refusal(lambda: pc.audit_from_file(archive, expected_unobservable=basis_pipe),
                            basis_pipe, "file")
    assert "is not a regular file" in str(exc)
    _cli_exit_2(["sweep", str(spec_pipe), "-o", str(tmp_path / "out")], capsys, "not a regular file")
    _cli_exit_2(["audit", str(audit_pipe)], capsys, "not a regular file")
    _cli_exit_2(["audit", str(archive), "--expected", str(basis_pipe)], capsys, "not a regular file")


def test_unreadable_files_say_so_with_the_file_and_field(tmp_path, monkeypatch, capsys):
    # Simulated: the tests may run as root, who can read anything.
    spec = _write(tmp_path, "spec.toml", GRID_SPEC)
    archive = _audit_archive(tmp_path / "run.npz")
    model = _write(tmp_path, "plant.toml", "A = [[-1.0]]\nB = [[1.0]]\nC = [[1.0]]\n")
    locked = {os.fspath(spec), os.fspath(archive), os.fspath(model)}
    real_open = os.open

    def refusing_open(path, flags, *args):
        if os.fsdecode(path) in locked:
            raise PermissionError(13, "Permission denied", path)
        return real_open(path, flags, *args)

    monkeypatch.setattr(safe_read.os, "open", refusing_open)
    for path, call in ((spec, lambda: load_sweep_spec(spec)),
                       (archive, lambda: pc.audit_from_file(archive)),
                       (model, lambda: pc.load_model(model))):
        exc = _one_line_refusal(call, path, "file")
        assert str(exc).endswith("cannot be read (permission denied).")
        assert "Errno" not in str(exc) and "not an .npz" not in str(exc)
    _cli_exit_2(["audit", str(archive)], capsys, "run.npz: file: cannot be read (permission denied)")
    _cli_exit_2(["sweep", str(spec), "-o", str(tmp_path / "out")], capsys,
                "spec.toml: file: cannot be read (permission denied)")


# --- per-point arithmetic --------------------------------------------------------------------

def test_per_point_failure_names_the_expression_and_the_point(tmp_path):
    path = _write(tmp_path, "spec.toml", GRID_SPEC.replace('"1 / mass"', '"1 / (mass - 2)"'))
    spec = load_sweep_spec(path)
    result = pc.sweep(spec.build, spec.points, executor="serial")
    errors = [row["error"] for row in result.rows]
    assert errors[0] is None
    assert "B[2][1] = '1 / (mass - 2)' evaluates to inf at the point mass=2.0, stiffness=3.0" \
        in errors[1]
    assert "KeyError" not in errors[1]


# --- audit archives and .npy files -----------------------------------------------------------

@pytest.mark.parametrize("damage, fragment", [
    ({"flag": 0x1}, "transition_jacobians: is encrypted"),
    ({"method": 99}, "transition_jacobians: uses compression method 99"),
])
def test_damaged_audit_archive_exits_2(tmp_path, capsys, damage, fragment):
    good = _audit_archive(tmp_path / "good.npz").read_bytes()
    path = tmp_path / "damaged.npz"
    path.write_bytes(_patch_zip_headers(good, **damage))
    exc = _one_line_refusal(lambda: pc.audit_from_file(path), path, "transition_jacobians")
    assert fragment in str(exc)
    _cli_exit_2(["audit", str(path)], capsys, fragment)
    # The same damage in a model archive is refused the same way.
    model = tmp_path / "model.npz"
    np.savez(model, A=-np.eye(1), B=np.ones((1, 1)), C=np.ones((1, 1)))
    model.write_bytes(_patch_zip_headers(model.read_bytes(), **damage))
    exc = _one_line_refusal(lambda: pc.load_model(model), model, "A")
    assert ("encrypted" if "flag" in damage else "compression method 99") in str(exc)


def test_expected_basis_declaring_a_huge_shape_is_refused_from_its_header(tmp_path, capsys,
                                                                          monkeypatch):
    assert MAX_ARRAY_FILE_BYTES == MAX_AUDIT_FILE_BYTES == 256 * 1024 * 1024
    archive = _audit_archive(tmp_path / "run.npz")
    basis = tmp_path / "basis.npy"
    with open(basis, "wb") as f:
        np.lib.format.write_array_header_1_0(
            f, {"descr": "<f8", "fortran_order": False, "shape": (100_000, 100_000)})
        f.write(b"\0" * 64)
    allocations = []
    real_empty = np.empty
    monkeypatch.setattr(safe_read.np, "empty",
                        lambda *a, **k: allocations.append(a) or real_empty(*a, **k))
    exc = _one_line_refusal(lambda: pc.audit_from_file(archive, expected_unobservable=basis),
                            basis, "expected basis")
    assert "declares shape (100000, 100000)" in str(exc) and "MAX_ARRAY_FILE_BYTES" in str(exc)
    # refused from the header: only the small archive members were ever allocated
    assert allocations and max(shape[0] for shape in allocations) < 100
    _cli_exit_2(["audit", str(archive), "--expected", str(basis)], capsys,
                "expected basis: declares shape (100000, 100000)")


def test_truncated_and_headerless_npy_files(tmp_path, capsys):
    archive = _audit_archive(tmp_path / "run.npz")
    cut = tmp_path / "cut.npy"
    buffer = io.BytesIO()
    np.save(buffer, np.ones((2, 1)))
    cut.write_bytes(buffer.getvalue()[:-4])
    exc = _one_line_refusal(lambda: pc.audit_from_file(archive, expected_unobservable=cut), cut,
                            "expected basis")
    assert "is truncated" in str(exc)
    text = _write(tmp_path, "notes.npy", "a basis, written by hand")
    exc = _one_line_refusal(lambda: pc.audit_from_file(archive, expected_unobservable=text), text,
                            "expected basis")
    assert "is not a .npy array" in str(exc)
    _cli_exit_2(["audit", str(archive), "--expected", str(cut)], capsys, "is truncated")


def test_audit_member_with_a_negative_shape_is_refused(tmp_path):
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(header, {"descr": "<f8", "fortran_order": False,
                                                  "shape": (3, -2, 2)})
    path = tmp_path / "negative.npz"
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("transition_jacobians.npy", header.getvalue())
    exc = _one_line_refusal(lambda: pc.audit_from_file(path), path, "transition_jacobians")
    assert "impossible shape" in str(exc) or "damaged .npy header" in str(exc)
