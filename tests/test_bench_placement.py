"""A small seeded slice of benchmarks/bench_placement.py: the ranking's margins against the
plain method, a dense SVD of [A - lambda I, B, b] per candidate and mode (numpy's LAPACK
SVD as the reference routine), and the structural count on a sparse graph."""

from __future__ import annotations

import importlib.util
import pathlib

import numpy as np

import plantcore as pc

_PATH = pathlib.Path(__file__).resolve().parents[1] / "benchmarks" / "bench_placement.py"
_spec = importlib.util.spec_from_file_location("bench_placement", _PATH)
bench = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(bench)


def test_ranking_margins_match_dense_svds():
    A, B, C = bench.hidden_part_model(14, 3, seed=5)
    cands = bench.random_candidates(14, 4, seed=6)
    s = pc.suggest_actuators((A, B, C), cands)
    plain = bench.plain_margins(A, B, C, cands)
    for r in s.ranking:
        assert r.restored == 3
        np.testing.assert_allclose(r.margin, plain[r.name], rtol=1e-7)


def test_structural_slice_runs():
    out = bench.structural_benchmark(2000)
    assert out["states"] == 2000 and 1 <= out["minimum_count"] <= 2000
