"""Output files (plantcore/files/safe_write.py): issue 20, item 4, the file-level part.

A device or named pipe is written into, never renamed over; an existing read-only file is
never replaced; ``overwrite=False`` keeps an existing file; SIGTERM removes the temporary file
as Ctrl-C does; a temporary left by a killed process is removed by the next write.
"""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys

import pytest

import plantcore as pc
from plantcore import files as pio
from plantcore.files.safe_write import cleanup_on_terminate

posix_only = pytest.mark.skipif(os.name != "posix", reason="needs POSIX devices, pipes or signals")


def _model():
    return pc.StateSpaceModel([[-2.0]], [[1.0]], [[1.0]], states=["chamber"], name="oven")


def _temporaries(folder):
    return [name for name in os.listdir(folder) if name.endswith(".tmp")]


@posix_only
def test_dev_null_is_written_into_not_replaced(tmp_path):
    if not os.path.exists("/dev/null"):
        pytest.skip("no /dev/null")
    before = os.stat("/dev/null")
    pio.check_output_path("/dev/null", overwrite=False)   # a device is not a file to keep
    pio.atomic_write("/dev/null", lambda f: f.write(b"discarded"))
    after = os.stat("/dev/null")
    assert stat.S_ISCHR(after.st_mode) and after.st_ino == before.st_ino
    assert after.st_rdev == before.st_rdev


@pytest.mark.skipif(not sys.platform.startswith("linux"),
                    reason="the reader below opens the pipe read-write, which Linux defines")
def test_named_pipe_is_written_into_and_refused_without_a_reader(tmp_path):
    pipe = tmp_path / "report.md"
    os.mkfifo(pipe)
    with pytest.raises(pc.ModelFileError, match="output: is a named pipe that nobody reads"):
        pio.atomic_write_text(pipe, "# report\n")
    # A reader that holds the pipe open (read-write on Linux: it never sees end-of-file
    # early and never blocks in open) receives exactly what was written.
    reader = os.open(pipe, os.O_RDWR)
    try:
        pio.atomic_write_text(pipe, "# report\n")
        received = b""
        while len(received) < len(b"# report\n"):
            received += os.read(reader, 64)
    finally:
        os.close(reader)
    assert received == b"# report\n"
    assert stat.S_ISFIFO(os.stat(pipe).st_mode)          # still the pipe, not a regular file
    assert sorted(os.listdir(tmp_path)) == ["report.md"]


def test_read_only_output_is_not_replaced(tmp_path):
    target = tmp_path / "oven.toml"
    target.write_text("kept\n", encoding="utf-8")
    target.chmod(0o444)
    try:
        for call in (lambda: pc.save_model(_model(), target),
                     lambda: pio.check_output_path(target)):
            with pytest.raises(pc.ModelFileError, match="output: is read-only"):
                call()
        assert target.read_text(encoding="utf-8") == "kept\n"
        assert _temporaries(tmp_path) == []
    finally:
        target.chmod(0o644)


def test_overwrite_false_keeps_an_existing_file(tmp_path):
    target = tmp_path / "oven.json"
    target.write_text("kept\n", encoding="utf-8")
    for call in (lambda: pc.save_model(_model(), target, overwrite=False),
                 lambda: pio.atomic_write_text(target, "new", overwrite=False),
                 lambda: pio.check_output_path(target, overwrite=False)):
        with pytest.raises(pc.ModelFileError, match="output: already exists; refusing to replace"):
            call()
    assert target.read_text(encoding="utf-8") == "kept\n"
    fresh = pc.save_model(_model(), tmp_path / "new.json", overwrite=False)
    assert pc.load_model(fresh).name == "oven"
    assert _temporaries(tmp_path) == []


def test_overwrite_false_does_not_replace_a_file_created_meanwhile(tmp_path):
    target = tmp_path / "late.md"

    def writer(f):
        f.write(b"ours")
        target.write_text("someone else's\n", encoding="utf-8")   # appears while we write

    with pytest.raises(pc.ModelFileError, match="already exists"):
        pio.atomic_write(target, writer, overwrite=False)
    assert target.read_text(encoding="utf-8") == "someone else's\n"
    assert _temporaries(tmp_path) == []


@posix_only
def test_block_devices_and_sockets_are_refused(tmp_path):
    import socket

    path = tmp_path / "s.sock"
    server = socket.socket(socket.AF_UNIX)
    try:
        server.bind(str(path))
        with pytest.raises(pc.ModelFileError, match="output: is a socket"):
            pio.check_output_path(path)
    finally:
        server.close()


def test_stale_temporary_of_a_dead_process_is_removed_and_never_shadows(tmp_path):
    target = tmp_path / "oven.toml"
    child = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                           capture_output=True, text=True, check=True)
    dead = int(child.stdout)          # that process has exited
    stale = tmp_path / f".oven.toml.{dead}-0123456789ab.tmp"
    stale.write_text("half a model", encoding="utf-8")
    alive = tmp_path / f".oven.toml.{os.getppid()}-0123456789ab.tmp"   # a running writer
    alive.write_text("in progress", encoding="utf-8")
    other = tmp_path / ".notes.txt.1-0123456789ab.tmp"                   # another target
    other.write_text("x", encoding="utf-8")
    pc.save_model(_model(), target)
    assert pc.load_model(target).name == "oven"
    names = set(os.listdir(tmp_path))
    if os.name == "posix":   # elsewhere processes cannot be asked safely; the file stays
        assert stale.name not in names
    assert {alive.name, other.name, "oven.toml"} <= names


@posix_only
def test_sigterm_removes_the_temporary_file_as_ctrl_c_does(tmp_path):
    target = tmp_path / "report.html"
    target.write_text("previous report\n", encoding="utf-8")
    script = (
        "import sys, time\n"
        "from plantcore.files import atomic_write\n"
        "def writer(f):\n"
        "    f.write(b'x' * 100000)\n"
        "    print('writing', flush=True)\n"
        "    while True:\n"
        "        time.sleep(0.05)\n"
        f"atomic_write({str(target)!r}, writer)\n"
    )
    process = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    assert process.stdout.readline().strip() == "writing"
    assert len(_temporaries(tmp_path)) == 1          # the temporary exists while writing
    process.send_signal(signal.SIGTERM)
    process.wait()
    process.stdout.close()
    assert process.returncode == 128 + signal.SIGTERM
    assert _temporaries(tmp_path) == []
    assert target.read_text(encoding="utf-8") == "previous report\n"


@posix_only
def test_cleanup_on_terminate_respects_another_handler_and_restores_the_default():
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL
    with pytest.raises(SystemExit) as info, cleanup_on_terminate():
        os.kill(os.getpid(), signal.SIGTERM)   # delivered before the next bytecode
    assert info.value.code == 128 + signal.SIGTERM
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL

    def own(signum, frame):
        pass

    signal.signal(signal.SIGTERM, own)
    try:
        with cleanup_on_terminate():
            assert signal.getsignal(signal.SIGTERM) is own
    finally:
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
