"""State names of minimal realizations and Kalman decompositions (core.derived_names)."""

from __future__ import annotations

import numpy as np

import plantcore as pc
from plantcore.cli import main
from plantcore.core.derived_names import derived_state_names
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
