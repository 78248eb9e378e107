"""State names of minimal realizations and Kalman decompositions (core.derived_names)."""

from __future__ import annotations

import numpy as np

import plantcore as pc
from plantcore.cli import main
from plantcore.core.derived_names import balanced_state_names, derived_state_names
from plantcore.examples import example_path


def test_a_state_kept_unchanged_keeps_its_name():
    # the heater state alone is moved by the input; the ambient state is only seen (by hand)
    m = pc.StateSpaceModel([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [0.0]], [[1.0, 1.0]],
                           states=["heater", "ambient"])
    mr = pc.minimal_realization(m)
    assert mr.model.states == ("heater",)
    np.testing.assert_array_equal(mr.V[:, 0], [1.0, 0.0])
    kd = pc.kalman_decomposition(m)
    assert kd.model.states == ("heater", "ambient")
    assert kd.part("uncontrollable_observable").states == ("ambient",)
    a = pc.analyze(m)
    assert a.minimal.model.states == ("heater",)


def test_mixed_states_are_numbered_combinations():
    # B = [1, 0, 1]: the reduction rotates a and c into one controllable direction (by hand)
    m = pc.StateSpaceModel(np.diag([-1.0, -2.0, -3.0]), [[1.0], [0.0], [1.0]],
                           [[1.0, 1.0, 1.0]], states=["a", "b", "c"])
    mr = pc.minimal_realization(m)
    assert mr.model.states == ("combination 1", "combination 2")
    assert np.count_nonzero(np.abs(mr.V[:, 0]) > 0.1) == 2


def test_oven_minimal_states_name_the_zones_it_keeps():
    m = pc.load_model(example_path("thermal_process"))
    for mr in (pc.minimal_realization(m), pc.analyze(m).minimal):
        names = mr.model.states
        kept = [(k, name) for k, name in enumerate(names) if name in m.states]
        assert {name for _, name in kept} == {"zone1_air_temp_degC", "zone1_wall_temp_degC",
                                               "zone4_air_temp_degC", "zone4_wall_temp_degC"}
        for k, name in kept:                        # z_k is x_i itself
            i = m.states.index(name)
            np.testing.assert_allclose(mr.V[:, k], np.eye(m.n)[:, i], atol=1e-13)
            np.testing.assert_allclose(mr.W[:, k], np.eye(m.n)[:, i], atol=1e-13)
        others = [name for name in names if name not in m.states]
        assert others == [f"combination {k + 1}" for k, name in enumerate(names)
                          if name not in m.states]


def test_scaled_or_flipped_states_are_combinations_and_names_stay_unique():
    V = np.array([[1.0, 0.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 2.0]])
    W = np.array([[1.0, 0.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 0.5]])
    assert derived_state_names(["p", "combination 2", "q"], V, W) == (
        "p", "combination 2'", "combination 3")


def test_reduce_writes_the_derived_names(tmp_path, capsys):
    out = tmp_path / "minimal.json"
    assert main(["reduce", example_path("thermal_process"), "-o", str(out)]) == 0
    capsys.readouterr()
    assert "zone1_air_temp_degC" in pc.load_model(out).states


# --- balanced reductions: every state is a balanced combination (core.derived_names) --------
def _stable_and_unstable():
    """Three stable modes and one unstable one, each driven and seen (diagonal, by hand)."""
    return pc.StateSpaceModel(np.diag([-1.0, -2.0, -5.0, 0.5]), np.ones((4, 1)),
                              np.ones((1, 4)), states=["p", "q", "r", "s"])


def test_balanced_truncation_states_are_balanced_then_unstable_combinations():
    m = _stable_and_unstable()
    red = pc.balanced_truncation(m, order=3)
    assert (red.stable_order, red.unstable_order) == (2, 1)
    assert red.model.states == ("balanced 1", "balanced 2", "unstable 3")
    # "balanced k" carries sigma_k: the reduced model's own Hankel values are the first two
    np.testing.assert_allclose(pc.hankel_singular_values(red.model), red.hankel_singular_values[:2],
                               rtol=1e-10)
    res = pc.balanced_residualization(m, order=2)
    assert res.model.states == ("balanced 1", "unstable 2")


def test_balanced_names_stay_unique_against_the_original_names():
    m = pc.StateSpaceModel(np.diag([-1.0, -3.0]), [[1.0], [1.0]], [[1.0, 1.0]],
                           states=["balanced 1", "heater"])
    assert pc.balanced_truncation(m, order=2).model.states == ("balanced 1'", "balanced 2")
    assert balanced_state_names(["balanced 1", "balanced 1'"], 1) == ("balanced 1''",)


def test_low_rank_balanced_truncation_names_its_states(tmp_path, capsys):
    from plantcore.examples.heated_plate import heated_plate
    from plantcore.large.low_rank_balanced import low_rank_balanced_truncation

    plate = heated_plate(64)
    red = low_rank_balanced_truncation(plate, order=3, check_error=False)
    assert red.model.states == ("balanced 1", "balanced 2", "balanced 3")
    pc.save_model(plate, tmp_path / "plate.npz")
    assert main(["reduce", str(tmp_path / "plate.npz"), "-o", str(tmp_path / "r.toml"),
                 "--order", "3"]) == 0
    assert pc.load_model(tmp_path / "r.toml").states == red.model.states


def test_dense_reduce_with_order_writes_balanced_names(tmp_path, capsys):
    path = tmp_path / "m.toml"
    pc.save_model(_stable_and_unstable(), path)
    assert main(["reduce", str(path), "-o", str(tmp_path / "r.toml"), "--order", "2",
                 "--accept-hidden-unstable"]) == 0
    assert pc.load_model(tmp_path / "r.toml").states == ("balanced 1", "unstable 2")
