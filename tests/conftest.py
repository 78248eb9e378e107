"""Shared test configuration: a deterministic hypothesis profile and a headless plot backend."""

import os

# One BLAS thread per test process: on the 2-core CI machine, multi-threaded BLAS on small
# matrices competes with itself and slows the suite many times over.  Set before numpy loads.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import matplotlib

matplotlib.use("Agg")
os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import HealthCheck, settings  # noqa: E402

settings.register_profile(
    "plantcore",
    derandomize=True,          # same examples on every run: CI never flakes on a new draw
    max_examples=40,
    deadline=None,             # no wall-clock limits inside tests
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    print_blob=True,
)
settings.load_profile(os.environ.get("PLANTCORE_HYPOTHESIS_PROFILE", "plantcore"))

import sys  # noqa: E402

# Make the shared test catalog importable (``import catalog``) under --import-mode=importlib.
sys.path.insert(0, os.path.dirname(__file__))

import pytest  # noqa: E402


@pytest.fixture
def this_interpreter_kernel(tmp_path_factory, monkeypatch):
    """Make the notebook kernel named "python3" run this very interpreter.

    A machine may carry a global "python3" kernel spec that starts another Python (which
    would then import another installed copy of plantcore); a spec written into a private
    folder at the head of JUPYTER_PATH takes precedence.
    """
    from ipykernel.kernelspec import install

    prefix = tmp_path_factory.mktemp("kernel")
    install(prefix=str(prefix), kernel_name="python3")
    share = prefix / "share" / "jupyter"
    old = os.environ.get("JUPYTER_PATH")
    monkeypatch.setenv("JUPYTER_PATH", str(share) + (os.pathsep + old if old else ""))
    return "python3"


@pytest.fixture
def run_notebook(tmp_path, monkeypatch, this_interpreter_kernel):
    """Execute a notebook top to bottom; return (executed notebook, outputs, stream text).

    The kernel picks its own inline plot backend (the session forces Agg, which it would
    inherit and which shows nothing); no time limit per cell (tests carry no wall-clock
    limits); the kernel runs in a scratch folder so nothing is written beside the notebook.
    A failing cell (its asserts included) raises CellExecutionError.
    """
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")

    def run(path):
        nb = nbformat.read(path, as_version=4)
        monkeypatch.delenv("MPLBACKEND", raising=False)
        client = nbclient.NotebookClient(nb, kernel_name=this_interpreter_kernel, timeout=None,
                                         resources={"metadata": {"path": str(tmp_path)}})
        client.execute()
        outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
        assert not [o for o in outputs if o.output_type == "error"]
        text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
        return nb, outputs, text

    return run
