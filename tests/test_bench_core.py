"""Smoke test of benchmarks/bench_core.py: the script runs end to end on small models,
its answer checks pass, and its summary names every target.

The timings themselves are not checked (never a wall-clock limit in a test); this keeps
the script that produces the README's performance figures from rotting.
"""

import importlib.util
import pathlib

import pytest

pytest.importorskip("slycot")

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _load():
    spec = importlib.util.spec_from_file_location("bench_core", ROOT / "benchmarks" / "bench_core.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_bench_core_runs_on_small_models(capsys):
    bench = _load()
    bench.main(["--sizes", "40", "80", "--io", "4x4", "--repeats", "5"])
    out = capsys.readouterr().out
    assert "WRONG ANSWERS" not in out
    assert "time without the modal certificate" in out
    for target in ("minimal_realization <= 0.5 x tb01pd", "kalman_decomposition <= 1.0 x tb01pd",
                   "controllability_staircase <= 1.0 x ab01nd", "peak memory <= 12 n^2 doubles",
                   "backward error <= 100 n eps", "growth exponent <= 3.1"):
        assert target in out
    assert "All answers" in out


def test_certificate_switch_is_restored():
    # The benchmark times the calls with the modal certificate off; the switch must be put
    # back afterwards, also when the call fails.
    bench = _load()
    import plantcore.structure.kalman as kalman_module

    before = kalman_module.modal_certificate
    seen = []

    def boom():
        seen.append(kalman_module.modal_certificate(None, None, None, scale=1.0, tol=1e-10))
        raise RuntimeError("x")

    with pytest.raises(RuntimeError):
        bench.without_certificate(boom)()
    assert seen == [None]
    assert kalman_module.modal_certificate is before
