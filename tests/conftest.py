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
