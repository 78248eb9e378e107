"""`plantcore compare --exact`: the verdict and its reasons cannot contradict each other
(issue 21).  Models by hand: first-order lags 1/(s+1) with output gains 1, 1 + 1e-12, 2, and
a non-minimal copy of 1/(s+1) with an extra uncontrollable state."""

from __future__ import annotations

import pytest

import plantcore as pc
from plantcore.cli import main

LAG = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]])
MODELS = {
    "tiny difference": pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0 + 1e-12]]),
    "padded copy": pc.StateSpaceModel([[-2.0, 0.0], [0.0, -1.0]], [[0.0], [1.0]],
                                      [[1.0, 1.0]]),
    "double gain": pc.StateSpaceModel([[-1.0]], [[1.0]], [[2.0]]),
}
EXPECTED = {"tiny difference": (1, "NOT EQUIVALENT"), "padded copy": (0, "EQUIVALENT"),
            "double gain": (1, "NOT EQUIVALENT")}
VERDICT_STARTS = ("Equivalent", "Not equivalent", "Undecided")


def _reasons(out):
    block = out.split("Reasons:\n", 1)[1].split("\n\n", 1)[0]
    return [line[4:] for line in block.splitlines() if line.startswith("  - ")]


@pytest.mark.parametrize("case", sorted(MODELS))
def test_exact_verdict_and_reasons_agree(case, tmp_path, capsys):
    first, second = tmp_path / "a.toml", tmp_path / "b.toml"
    pc.save_model(LAG, first)
    pc.save_model(MODELS[case], second)
    code, verdict = EXPECTED[case]
    assert main(["compare", str(first), str(second), "--exact"]) == code
    out = capsys.readouterr().out
    assert f"Verdict:               {verdict} (decided by exact rational arithmetic)" in out
    reasons = _reasons(out)
    verdict_lines = [r for r in reasons if r.startswith(VERDICT_STARTS)]
    # exactly one verdict sentence, and it is the exact one
    wanted = "Equivalent" if code == 0 else "Not equivalent"
    assert verdict_lines == [f"{wanted}: decided by exact rational arithmetic."]
    superseded = [r for r in reasons if r.startswith("Superseded by the exact comparison")]
    assert len(superseded) == 1 and "floating point alone would say" in superseded[0]
    if case == "tiny difference":     # floating point alone says equivalent here
        assert "would say equivalent, since the relative peak error 1e-12" in superseded[0]
        assert not any(r.endswith("the dynamics agree.") for r in reasons)
        assert "at the rank tolerance; the exact comparison finds a difference" in out


def test_without_exact_the_floating_point_verdict_stands(tmp_path, capsys):
    first, second = tmp_path / "a.toml", tmp_path / "b.toml"
    pc.save_model(LAG, first)
    pc.save_model(MODELS["tiny difference"], second)
    assert main(["compare", str(first), str(second)]) == 0
    reasons = _reasons(capsys.readouterr().out)
    assert next(r for r in reasons if r.startswith(VERDICT_STARTS)).startswith("Equivalent:")
    assert not any(r.startswith("Superseded") for r in reasons)
