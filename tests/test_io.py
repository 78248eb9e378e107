"""Tests for plantcore.files: model files in TOML, JSON and NPZ, and safe writing.

External references used here:
* the TOML and JSON files written by ``save_model`` are read back with the standard-library
  parsers (``tomllib``, ``json``) and the NPZ files with ``numpy.load(allow_pickle=False)``,
  independently of plantcore's readers;
* python-control (``control.ss``) objects are saved and reloaded;
* the file layout is the one in DESIGN.md ("Model file layout"), written out by hand below.
"""

from __future__ import annotations

import json
import math
import os
import sys
import unicodedata

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import plantcore as pc
from plantcore import files as pio

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

FORMATS = (".toml", ".json", ".npz")

# Awkward doubles: repr() must reproduce each bit for bit (signed zero, subnormals, the
# largest double, values with no short decimal form).
AWKWARD = [0.1, -0.0, 5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, 1 / 3,
           -2.0 / 7.0, 1e-300, 123456789.12345679, 2.0 ** 53 + 2.0, math.pi]


def _assert_same_model(a: pc.StateSpaceModel, b: pc.StateSpaceModel) -> None:
    for key in "ABCD":
        x, y = getattr(a, key), getattr(b, key)
        assert x.shape == y.shape, key
        # Bit-for-bit: equal values and equal sign bits (so -0.0 stays -0.0).
        assert np.array_equal(x, y), key
        assert np.array_equal(np.signbit(x), np.signbit(y)), key
    assert (a.dt, a.states, a.inputs, a.outputs, a.name) == (b.dt, b.states, b.inputs, b.outputs, b.name)


def _awkward_model(dt=None) -> pc.StateSpaceModel:
    rng = np.random.default_rng(20240611)
    A = rng.standard_normal((3, 3))
    A.flat[: len(AWKWARD[:9])] = AWKWARD[:9]
    B = rng.standard_normal((3, 2))
    B[0, 0] = AWKWARD[9]
    C = rng.standard_normal((2, 3))
    C[1, 2] = AWKWARD[10]
    D = np.array([[0.0, -0.0], [0.25, 1e-17]])
    return pc.StateSpaceModel(A, B, C, D, dt=dt,
                              states=["bed temperature", "air \"humidity\"", "motor\\speed"],
                              inputs=["burner", "fan"], outputs=["exhaust °C", "moisture"],
                              name="grain dryer, line 2")


# --- round trips --------------------------------------------------------------------------

@pytest.mark.parametrize("suffix", FORMATS)
@pytest.mark.parametrize("dt", [None, 0.05, 1e-7])
def test_round_trip_is_exact(tmp_path, suffix, dt):
    model = _awkward_model(dt)
    written = pc.save_model(model, tmp_path / f"dryer{suffix}")
    assert written == (tmp_path / f"dryer{suffix}").resolve()
    _assert_same_model(pc.load_model(written), model)
    assert sorted(os.listdir(tmp_path)) == [f"dryer{suffix}"]  # no temporary files left


@pytest.mark.parametrize("suffix", FORMATS)
def test_static_gain_round_trip(tmp_path, suffix):
    gain = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 2)), np.zeros((3, 0)),
                              [[1.0, 2.0], [3.0, -0.5], [0.0, 7.0]], dt=0.2, name="mixing valve map")
    back = pc.load_model(pc.save_model(gain, tmp_path / f"gain{suffix}"))
    assert (back.n, back.n_inputs, back.n_outputs) == (0, 2, 3)
    _assert_same_model(back, gain)


@pytest.mark.parametrize("suffix", FORMATS)
def test_default_names_and_no_name_round_trip(tmp_path, suffix):
    model = pc.StateSpaceModel([[-1.0]], [[2.0]], [[3.0]])
    back = pc.load_model(pc.save_model(model, tmp_path / f"lag{suffix}"))
    _assert_same_model(back, model)
    assert back.name is None and back.dt is None and back.states == ("x1",)


@pytest.mark.parametrize("suffix", FORMATS)
def test_python_control_object_saved_and_reloaded(tmp_path, suffix):
    import control

    sys_ = control.ss([[-0.2, 1.0], [0.0, -3.0]], [[0.0], [1.5]], [[1.0, 0.0]], [[0.1]], 0.01,
                      states=["level", "valve_pos"], inputs=["command"], outputs=["level_meas"])
    back = pc.load_model(pc.save_model(sys_, tmp_path / f"tank{suffix}"))
    np.testing.assert_array_equal(back.A, sys_.A)
    np.testing.assert_array_equal(back.B, sys_.B)
    np.testing.assert_array_equal(back.C, sys_.C)
    np.testing.assert_array_equal(back.D, sys_.D)
    assert back.dt == 0.01
    assert back.states == ("level", "valve_pos") and back.outputs == ("level_meas",)
    # And back into python-control: the frequency response agrees (python-control evaluates it).
    again = back.to_control()
    z = np.exp(0.3j)
    np.testing.assert_allclose(again(z), sys_(z), rtol=1e-14)


# --- the layout of DESIGN.md, read by hand-written files and by independent parsers ---------

def test_design_layout_toml_is_read(tmp_path):
    text = """
name = "boiler drum"
sample_time = 0.01          # omit for continuous time
states  = ["drum_level", "steam_flow"]
inputs  = ["feedwater"]
outputs = ["level_sensor"]
A = [[0.9, 0.05], [0.0, 0.8]]
B = [[0.1], [0.2]]
C = [[1.0, 0.0]]
D = [[0.0]]
"""
    path = tmp_path / "drum.toml"
    path.write_text(text, encoding="utf-8")
    model = pc.load_model(path)
    assert model.name == "boiler drum" and model.dt == 0.01
    assert model.states == ("drum_level", "steam_flow")
    np.testing.assert_array_equal(model.A, [[0.9, 0.05], [0.0, 0.8]])
    np.testing.assert_array_equal(model.D, [[0.0]])


def test_D_omitted_gives_zeros_and_integers_are_accepted(tmp_path):
    path = tmp_path / "chain.json"
    path.write_text(json.dumps({"A": [[0, 1], [-2, -3]], "B": [[0], [1]], "C": [[1, 0], [0, 1]]}),
                    encoding="utf-8")
    model = pc.load_model(path)
    np.testing.assert_array_equal(model.D, np.zeros((2, 1)))
    assert model.A.dtype == float and model.dt is None
    assert model.inputs == ("u1",) and model.outputs == ("y1", "y2")


def test_utf8_byte_order_mark_and_upper_case_suffix_accepted(tmp_path):
    path = tmp_path / "PUMP.TOML"
    path.write_bytes(b"\xef\xbb\xbfA = [[-1.0]]\nB = [[1.0]]\nC = [[1.0]]\n")
    assert pc.load_model(path).n == 1


def test_written_toml_and_json_match_independent_parsers(tmp_path):
    model = _awkward_model(0.5)
    doc_toml = tomllib.loads(pc.save_model(model, tmp_path / "m.toml").read_text(encoding="utf-8"))
    doc_json = json.loads(pc.save_model(model, tmp_path / "m.json").read_text(encoding="utf-8"))
    for doc in (doc_toml, doc_json):
        assert list(doc) == list(pio.MODEL_FILE_KEYS)  # exactly the documented keys, in order
        assert doc["sample_time"] == 0.5 and doc["name"] == model.name
        assert doc["states"] == list(model.states)
        for key in "ABCD":
            assert np.array_equal(np.array(doc[key]), getattr(model, key))


def test_written_npz_matches_numpy_load(tmp_path):
    model = _awkward_model(0.5)
    path = pc.save_model(model, tmp_path / "m.npz")
    with np.load(path, allow_pickle=False) as data:  # would raise on any object array
        assert set(data.files) == set(pio.MODEL_FILE_KEYS)
        for key in "ABCD":
            assert np.array_equal(data[key], getattr(model, key))
        assert float(data["sample_time"]) == 0.5
        assert data["states"].tolist() == list(model.states)
        assert str(data["name"]) == model.name


def test_design_npz_without_optional_arrays(tmp_path):
    path = tmp_path / "plain.npz"
    np.savez(path, A=np.array([[-1.0, 0.0], [1.0, -2.0]]), B=np.eye(2)[:, :1], C=np.array([[0, 1]]))
    model = pc.load_model(path)
    assert model.n == 2 and model.dt is None and model.states == ("x1", "x2")
    np.testing.assert_array_equal(model.D, [[0.0]])


def test_continuous_model_writes_no_sample_time(tmp_path):
    model = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]])
    doc = tomllib.loads(pc.save_model(model, tmp_path / "c.toml").read_text(encoding="utf-8"))
    assert "sample_time" not in doc and "name" not in doc


# --- save_model refusals -------------------------------------------------------------------

def test_save_refuses_unknown_suffix_and_writes_nothing(tmp_path):
    with pytest.raises(pc.ModelFileError, match=r"unknown file type \('\.mat'\)"):
        pc.save_model(_awkward_model(), tmp_path / "m.mat")
    assert os.listdir(tmp_path) == []


def test_save_refuses_model_without_outputs(tmp_path):
    model = pc.StateSpaceModel(np.eye(2), np.ones((2, 1)), np.zeros((0, 2)))
    with pytest.raises(pc.ModelFileError, match=r"C: the model has no outputs"):
        pc.save_model(model, tmp_path / "m.toml")
    assert os.listdir(tmp_path) == []


def test_save_refuses_names_with_line_breaks(tmp_path):
    # The model object refuses such names itself now (plantcore.core.names), so a model file
    # can never be asked to hold one.
    with pytest.raises(ValueError, match=r"states: the name 'a\\nb' contains a control character"):
        pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]], states=["a\nb"])
    assert os.listdir(tmp_path) == []


# --- property-based round trip ---------------------------------------------------------------

_finite = st.floats(allow_nan=False, allow_infinity=False, width=64)
_NAME_ALPHABET = st.characters(blacklist_categories=("Cc", "Cf", "Cs", "Zl", "Zp"))
_name_text = st.text(alphabet=_NAME_ALPHABET, min_size=1, max_size=12)


@st.composite
def _models(draw):
    n = draw(st.integers(0, 4))
    m = draw(st.integers(1, 3))
    p = draw(st.integers(1, 3))

    def mat(r, c):
        return np.array(draw(st.lists(st.lists(_finite, min_size=c, max_size=c), min_size=r, max_size=r)),
                        dtype=float).reshape(r, c)

    def names(k):
        # unique as written and after NFKC normalization (plantcore.core.names refuses the rest)
        return draw(st.none() | st.lists(_name_text, min_size=k, max_size=k,
                                         unique_by=lambda text: unicodedata.normalize("NFKC", text)))

    dt = draw(st.none() | st.floats(min_value=1e-300, max_value=1e300))
    name = draw(st.none() | st.text(alphabet=_NAME_ALPHABET, max_size=20))
    return pc.StateSpaceModel(mat(n, n), mat(n, m), mat(p, n), mat(p, m), dt=dt, states=names(n),
                              inputs=names(m), outputs=names(p), name=name)


@settings(max_examples=30)
@given(model=_models(), suffix=st.sampled_from(FORMATS))
def test_round_trip_property(tmp_path_factory, model, suffix):
    folder = tmp_path_factory.mktemp("roundtrip")
    back = pc.load_model(pc.save_model(model, folder / f"model{suffix}"))
    _assert_same_model(back, model)
