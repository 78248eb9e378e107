"""Placement suggestions (plantcore.structure.placement): hand-derived cases, duality, the
measure of classify_modes, and a brute-force check of the recommended set."""

from __future__ import annotations

import itertools
import math
import warnings

import numpy as np
import pytest

import plantcore as pc
from plantcore.core.errors import HiddenModeWarning

SQRT2 = math.sqrt(2.0)


def _carts():
    """Two identical carts (position, velocity each), one force pushing both equally."""
    cart = np.array([[0.0, 1.0], [0.0, 0.0]])
    A = np.kron(np.eye(2), cart)
    B = np.array([[0.0], [1.0], [0.0], [1.0]])
    C = np.array([[1.0, 0.0, 1.0, 0.0]])
    return A, B, C


def _chain(n=5):
    """x_i' = -i x_i + x_{i+1}: state i is driven by state i+1 only."""
    A = np.diag(-np.arange(1.0, n + 1)) + np.diag(np.ones(n - 1), 1)
    return A


def _augmented_min_margin(A, B, C, columns):
    aug = (A, np.hstack([B] + [np.asarray(c, float)[:, None] for c in columns]), C)
    return min(m.controllability_margin for m in pc.classify_modes(aug))


def test_two_carts_margin_derived_by_hand():
    # Derivation (by hand).  All four eigenvalues are 0 (two double integrators), so the
    # margin is sigma_min([A, B, b]) / scale at lambda = 0.  The scale is ||A||_F = sqrt(2);
    # B's column has norm sqrt(2) and the candidate b = sqrt(2) e_v1 too, so the power-of-two
    # input scaling leaves both as they are.  The rows of [A, B, b] are
    #   p1: e_v1,  v1: (B=1, b=sqrt2),  p2: e_v2,  v2: (B=1, b=0),
    # so M M^T = diag(1, 1) (+) [[3, 1], [1, 1]], whose smallest eigenvalue is 2 - sqrt(2) < 1.
    # Margin = sqrt(2 - sqrt(2)) / sqrt(2) = sqrt(1 - 1/sqrt(2)).
    A, B, C = _carts()
    s = pc.suggest_actuators((A, B, C), {"push cart 1": [0, SQRT2, 0, 0],
                                         "push both": [0, 1, 0, 1]})
    expected = math.sqrt(1.0 - 1.0 / SQRT2)
    first, second = s.ranking
    assert first.name == "push cart 1" and first.restored == 2 and first.reaches_goal
    np.testing.assert_allclose(first.margin, expected, rtol=1e-8)
    np.testing.assert_allclose(s.margin, expected, rtol=1e-8)
    # the symmetric force moves only the sum: nothing restored, margin at rounding level
    assert second.name == "push both" and second.restored == 0 and not second.reaches_goal
    assert second.margin < 1e-12
    assert s.recommended == ("push cart 1",) and s.achievable and s.reaches_goal
    assert s.smallest_proven
    assert len(s.deficient_modes) == 2 and s.minimal_order == 2
    # controllable now; the output (sum of positions) still sees only the sum: order unchanged
    assert first.minimal_order_change == 0 and s.minimal_order_with_recommended == 2


def test_two_carts_target_margin_needs_both_single_forces():
    # With forces on each cart alone (b1 = sqrt2 e_v1, b2 = sqrt2 e_v2) the velocity block of
    # M M^T is [[3, 1], [1, 3]] (smallest eigenvalue 2) and the position rows keep 1, so the
    # margin is 1 / sqrt(2) (by hand, as above); no set can exceed it (the position rows of A
    # are fixed), so a target of 0.8 is out of reach.
    A, B, C = _carts()
    cands = {"push cart 1": [0, SQRT2, 0, 0], "push cart 2": [0, 0, 0, SQRT2]}
    s = pc.suggest_actuators((A, B, C), cands, target_margin=0.6)
    assert sorted(s.recommended) == ["push cart 1", "push cart 2"]
    np.testing.assert_allclose(s.margin, 1 / SQRT2, rtol=1e-8)
    assert s.achievable and s.reaches_goal and s.smallest_proven
    out = pc.suggest_actuators((A, B, C), cands, target_margin=0.8)
    assert not out.achievable and not out.reaches_goal
    assert any("target margin" in note for note in out.notes)


def test_chain_only_the_end_state_gives_controllability():
    n = 5
    A = _chain(n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", HiddenModeWarning)
        s = pc.suggest_actuators((A, np.zeros((n, 0)), np.eye(n)[[0]]))
    by_name = {r.name: r for r in s.ranking}
    # an input at state k reaches states 1..k (common practice: a chain is controllable from
    # its head only), so it restores k modes, the eigenvalues -1..-k
    for k in range(1, n + 1):
        entry = by_name[f"x{k}"]
        assert entry.restored == k
        assert sorted(round(z.real) for z in entry.restored_modes) == list(range(-k, 0))
        assert entry.reaches_goal == (k == n)
    assert [r.name for r in s.ranking] == [f"x{k}" for k in range(n, 0, -1)]
    assert s.recommended == (f"x{n}",) and s.smallest_proven
    # the output sees x1, which every state drives: the minimal order grows with what is reached
    assert by_name["x3"].minimal_order_change == 3


def test_sensor_chain_by_duality():
    n = 5
    A = _chain(n)
    s = pc.suggest_sensors((A, np.eye(n)[:, [n - 1]], np.zeros((0, n))))
    by_name = {r.name: r for r in s.ranking}
    # a sensor at state k sees states k..n (they drive it), so it restores n - k + 1 modes
    for k in range(1, n + 1):
        assert by_name[f"x{k}"].restored == n - k + 1
    assert s.recommended == ("x1",) and s.goal == "observable" and s.reaches_goal


def test_sensor_margins_are_the_actuator_margins_of_the_dual():
    rng = np.random.default_rng(11)
    n = 6
    Z = np.zeros((n, n))
    Z[:4, :4] = rng.standard_normal((4, 4))
    Z[4:, :] = rng.standard_normal((2, n))      # the last two states are not seen by C
    C = np.hstack([rng.standard_normal((2, 4)), np.zeros((2, 2))])
    A = Z.T.T
    A[:4, 4:] = 0.0
    B = rng.standard_normal((n, 2))
    rows = {f"s{j}": rng.standard_normal(n) for j in range(3)}
    sensors = pc.suggest_sensors((A, B, C), rows)
    dual = pc.suggest_actuators((A.T, C.T, B.T), rows)
    assert [r.name for r in sensors.ranking] == [r.name for r in dual.ranking]
    for a, b in zip(sensors.ranking, dual.ranking):
        assert a.restored == b.restored == 2
        np.testing.assert_allclose(a.margin, b.margin, rtol=1e-7)
    # and the observability margins of classify_modes on the model with the sensor added
    for r in sensors.ranking:
        aug = (A, B, np.vstack([C, rows[r.name]]))
        expected = min(m.observability_margin for m in pc.classify_modes(aug))
        np.testing.assert_allclose(r.margin, expected, rtol=1e-7)


def _random_case(rng, n_top=3):
    """A model with two uncontrollable modes (eigenvalues -1 and -2 by construction) and
    candidates that restore one, the other, both or none, in rotated coordinates."""
    n = n_top + 2
    Az = np.zeros((n, n))
    Az[:n_top, :n_top] = rng.standard_normal((n_top, n_top))
    Az[:n_top, n_top:] = rng.standard_normal((n_top, 2))
    Az[n_top:, n_top:] = np.diag([-1.0, -2.0])
    Bz = np.vstack([rng.standard_normal((n_top, 2)), np.zeros((2, 2))])
    Cz = rng.standard_normal((2, n))
    Q = np.linalg.qr(rng.standard_normal((n, n)))[0]
    kinds = {"first": [1.0, 0.0], "second": [0.0, 1.0], "both": [1.0, 1.0], "none": [0.0, 0.0]}
    cands = {}
    for j, kind in enumerate(rng.choice(list(kinds), size=4)):
        z = np.concatenate([rng.standard_normal(n_top), kinds[kind]])
        cands[f"c{j}_{kind}"] = Q @ z
    return Q @ Az @ Q.T, Q @ Bz, Cz @ Q.T, cands


@pytest.mark.parametrize("seed", range(6))
def test_recommended_set_against_brute_force(seed):
    rng = np.random.default_rng(seed)
    A, B, C, cands = _random_case(rng)
    s = pc.suggest_actuators((A, B, C), cands)
    names = list(cands)
    smallest = None
    for size in range(1, len(names) + 1):
        for subset in itertools.combinations(names, size):
            aug = (A, np.hstack([B] + [cands[c][:, None] for c in subset]), C)
            sizes = pc.kalman_decomposition(aug).sizes
            if sizes.uncontrollable_observable + sizes.uncontrollable_unobservable == 0:
                smallest = size
                break
        if smallest is not None:
            break
    assert s.achievable == (smallest is not None)
    if smallest is not None:
        assert len(s.recommended) <= smallest
        assert s.reaches_goal
        expected = _augmented_min_margin(A, B, C, [cands[c] for c in s.recommended])
        np.testing.assert_allclose(s.margin, expected, rtol=1e-9)


def test_stabilizable_goal_asks_only_the_unstable_mode():
    # uncontrollable modes +1 (unstable) and -3 (stable); "fix unstable" reaches only +1
    A = np.diag([-1.0, 1.0, -3.0])
    B = np.array([[1.0], [0.0], [0.0]])
    C = np.ones((1, 3))
    cands = {"fix unstable": [0.0, 1.0, 0.0], "fix stable": [0.0, 0.0, 1.0]}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", HiddenModeWarning)
        stab = pc.suggest_actuators((A, B, C), cands, goal="stabilizable")
        full = pc.suggest_actuators((A, B, C), cands)
    assert stab.recommended == ("fix unstable",) and stab.reaches_goal
    assert stab.ranking[0].name == "fix unstable" and stab.ranking[0].reaches_goal
    assert not next(r for r in stab.ranking if r.name == "fix stable").reaches_goal
    assert sorted(full.recommended) == ["fix stable", "fix unstable"]
    # the goal margin ignores the stable mode left uncontrollable
    assert stab.margin > 1e-3


def test_max_count_stops_the_choice():
    A = np.diag([-1.0, 1.0, -3.0])
    B = np.array([[1.0], [0.0], [0.0]])
    C = np.ones((1, 3))
    cands = {"a": [0.0, 1.0, 0.0], "b": [0.0, 0.0, 1.0]}
    s = pc.suggest_actuators((A, B, C), cands, max_count=1)
    assert len(s.recommended) == 1 and s.achievable and not s.reaches_goal


def test_already_controllable_needs_nothing():
    A = _chain(3)
    s = pc.suggest_actuators((A, np.eye(3)[:, [2]], np.eye(3)[[0]]))
    assert s.recommended == () and s.reaches_goal and s.achievable
    np.testing.assert_allclose(
        s.margin, min(m.controllability_margin for m in pc.classify_modes(
            (A, np.eye(3)[:, [2]], np.eye(3)[[0]]))), rtol=1e-12)


def test_candidates_from_a_file(tmp_path):
    A, B, C = _carts()
    path = tmp_path / "candidates.toml"
    path.write_text('[[actuator]]\nname = "push cart 1"\nentries = { x2 = 1.4142135623730951 }\n'
                    '[[actuator]]\nname = "push both"\ncolumn = [0, 1, 0, 1]\n')
    s = pc.suggest_actuators((A, B, C), path)
    assert s.recommended == ("push cart 1",)
    assert s.candidate_names == ("push cart 1", "push both")


@pytest.mark.parametrize("cands, match", [
    ({"short": [1.0, 0.0]}, "has shape"),
    ({"zero": [0.0, 0.0, 0.0, 0.0]}, "all zeros"),
    ({"nan": [0.0, math.nan, 0.0, 0.0]}, "NaN"),
    ({}, "no candidate"),
    ({"": [0, 1, 0, 0]}, "non-empty"),
])
def test_bad_candidates_are_refused(cands, match):
    with pytest.raises(ValueError, match=match):
        pc.suggest_actuators(_carts(), cands)


@pytest.mark.parametrize("options, match", [
    ({"goal": "observable"}, "goal for actuators"),
    ({"target_margin": 2.0}, "between 0 and 1"),
    ({"target_margin": math.nan}, "between 0 and 1"),
    ({"max_count": 0}, "max_count"),
])
def test_bad_options_are_refused(options, match):
    with pytest.raises(ValueError, match=match):
        pc.suggest_actuators(_carts(), **options)


def test_result_is_frozen_and_json_safe():
    import json

    s = pc.suggest_actuators(_carts())
    with pytest.raises(AttributeError):
        s.margin = 1.0
    text = json.dumps(s.to_dict(), allow_nan=False)
    assert '"recommended"' in text and s.structural.kind == "actuator"


@pytest.mark.parametrize("seed", [2, 4])
def test_sensor_recommendation_is_the_dual_of_the_actuator_one(seed):
    # by duality (Kalman 1963): (A, B, C) with sensor rows c is the transpose of
    # (A^T, C^T, B^T) with actuator columns c^T
    rng = np.random.default_rng(seed)
    A, B, C, cands = _random_case(rng)
    act = pc.suggest_actuators((A, B, C), cands)
    sen = pc.suggest_sensors((A.T, C.T, B.T), cands)
    assert sorted(act.recommended) == sorted(sen.recommended)
    assert act.achievable == sen.achievable
    np.testing.assert_allclose(sen.margin, act.margin, rtol=1e-7)


def test_exhaustive_search_beats_the_greedy_choice():
    # Six uncontrollable modes -1..-6 (distinct, decoupled): a candidate restores exactly the
    # modes its column touches, so choosing a set is a set cover.  The classic greedy trap
    # (common practice): "wide" touches modes 1, 2, 4, 5; "left" 1-3; "right" 4-6.  Greedy
    # takes "wide" first and then needs both others (3 picks); "left" + "right" do it in 2.
    n = 7
    A = np.diag([-7.0, -1.0, -2.0, -3.0, -4.0, -5.0, -6.0])
    B = np.eye(n)[:, [0]]
    C = np.ones((1, n))
    touch = {"wide": [1, 2, 4, 5], "left": [1, 2, 3], "right": [4, 5, 6]}
    cands = {name: np.isin(np.arange(n), idx).astype(float) for name, idx in touch.items()}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", HiddenModeWarning)
        s = pc.suggest_actuators((A, B, C), cands)
    assert sorted(s.recommended) == ["left", "right"]
    assert s.search.startswith("exhaustive") and s.smallest_proven and s.reaches_goal
    assert s.ranking[0].name == "wide" and s.ranking[0].restored == 4
