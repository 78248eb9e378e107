"""Tests of plantcore.core.model: validation, immutability, conversions, transfer evaluation."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

import control

import plantcore as pc


def test_defaults_and_attributes():
    m = pc.StateSpaceModel([[0.0, 1.0], [-2.0, -3.0]], [[0.0], [1.0]], [[1.0, 0.0]])
    assert (m.n, m.n_inputs, m.n_outputs) == (2, 1, 1)
    assert m.states == ("x1", "x2") and m.inputs == ("u1",) and m.outputs == ("y1",)
    assert m.D.shape == (1, 1) and m.D[0, 0] == 0.0
    assert not m.is_discrete and m.dt is None
    assert m.A.dtype == float


def test_immutable():
    m = pc.StateSpaceModel([[1.0]], [[1.0]], [[1.0]])
    with pytest.raises(ValueError):
        m.A[0, 0] = 2.0
    with pytest.raises(AttributeError):
        m.dt = 1.0


def test_input_arrays_are_copied():
    A = np.array([[1.0]])
    m = pc.StateSpaceModel(A, [[1.0]], [[1.0]])
    A[0, 0] = 5.0
    assert m.A[0, 0] == 1.0


@pytest.mark.parametrize("kwargs, message", [
    (dict(A=[[1.0, 2.0]], B=[[1.0]], C=[[1.0]]), "A is 1 x 2 but must be square"),
    (dict(A=np.eye(2), B=np.ones((3, 1)), C=np.ones((1, 2))), "B has 3 rows but A is 2 x 2"),
    (dict(A=np.eye(2), B=np.ones((2, 1)), C=np.ones((1, 3))), "C has 3 columns but A is 2 x 2"),
    (dict(A=np.eye(2), B=np.ones((2, 1)), C=np.ones((1, 2)), D=np.ones((2, 2))), "D is 2 x 2 but"),
    (dict(A=[[np.nan]], B=[[1.0]], C=[[1.0]]), "A has a non-finite entry"),
    (dict(A=[[1.0]], B=[[np.inf]], C=[[1.0]]), "B has a non-finite entry"),
    (dict(A=[[1j]], B=[[1.0]], C=[[1.0]]), "A holds complex numbers"),
    (dict(A=[[True]], B=[[1.0]], C=[[1.0]]), "A holds booleans"),
    (dict(A=[["a"]], B=[[1.0]], C=[[1.0]]), "A holds entries that are not real numbers"),
    (dict(A=[[1.0], [1.0, 2.0]], B=[[1.0]], C=[[1.0]]), "A is not a rectangular matrix"),
    (dict(A=[[1.0]], B=[[1.0]], C=[[1.0]], D=[1.0]), "D is a flat list"),
    (dict(A=np.eye(2), B=[1.0, 2.0, 3.0], C=[[1.0, 1.0]]), "B has 3 rows but A is 2 x 2"),
    (dict(A=[[1.0]], B=[[1.0]], C=[[1.0]], dt=0.0), "dt .sample time. must be positive"),
    (dict(A=[[1.0]], B=[[1.0]], C=[[1.0]], dt=-1.0), "dt .sample time. must be positive"),
    (dict(A=[[1.0]], B=[[1.0]], C=[[1.0]], dt=True), "dt .sample time. must be a positive number"),
    (dict(A=[[1.0]], B=[[1.0]], C=[[1.0]], states=["a", "b"]), "states has 2 names"),
    (dict(A=np.eye(2), B=np.ones((2, 1)), C=np.ones((1, 2)), states=["a", "a"]), "twice"),
])
def test_validation_messages(kwargs, message):
    with pytest.raises(ValueError, match=message):
        pc.StateSpaceModel(**kwargs)


def test_flat_B_is_one_column_and_flat_C_one_row():
    # B has one row and C one column per state, so a flat sequence of n numbers can only
    # be one input or one output (common practice in general-purpose control libraries).
    A = [[0.0, 1.0], [-2.0, -3.0]]
    flat = pc.StateSpaceModel(A, [0.0, 1.0], [1.0, 0.0])
    full = pc.StateSpaceModel(A, [[0.0], [1.0]], [[1.0, 0.0]])
    assert flat.B.shape == (2, 1) and flat.C.shape == (1, 2)
    assert_allclose(flat.transfer_at(1j), full.transfer_at(1j), rtol=0, atol=0)


def test_static_gain_model():
    m = pc.StateSpaceModel(np.zeros((0, 0)), [], [], [[1.0, 2.0], [3.0, 4.0]])
    assert (m.n, m.n_inputs, m.n_outputs) == (0, 2, 2)
    assert_allclose(m.transfer_at(1j), [[1.0, 2.0], [3.0, 4.0]])


def test_transfer_at_matches_python_control():
    # Reference: python-control's frequency-response evaluation of the same matrices.
    rng = np.random.default_rng(3)
    A, B, C, D = (rng.standard_normal(s) for s in [(4, 4), (4, 2), (3, 4), (3, 2)])
    m = pc.StateSpaceModel(A, B, C, D)
    s = 0.4 + 1.3j
    ref = control.ss(A, B, C, D)(s)
    assert_allclose(m.transfer_at(s), ref, rtol=1e-12, atol=1e-12)


def test_transfer_at_eigenvalue_is_an_error():
    m = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]])
    with pytest.raises(ValueError, match="eigenvalue"):
        m.transfer_at(-1.0)


@pytest.mark.parametrize("dt", [None, 0.05])
def test_control_round_trip(dt):
    rng = np.random.default_rng(4)
    m = pc.StateSpaceModel(rng.standard_normal((3, 3)), rng.standard_normal((3, 2)),
                           rng.standard_normal((1, 3)), dt=dt, states=["p", "v", "i"],
                           inputs=["volt", "load"], outputs=["pos"])
    sys = m.to_control()
    assert sys.dt == (0 if dt is None else dt)
    back = pc.StateSpaceModel.from_control(sys)
    assert_allclose(back.A, m.A)
    assert back.dt == dt
    assert back.states == m.states and back.inputs == m.inputs


def test_control_unspecified_sample_time_refused():
    sys = control.ss([[0.5]], [[1.0]], [[1.0]], [[0.0]], True)
    with pytest.raises(ValueError, match="unspecified sample time"):
        pc.as_model(sys)


def test_as_model_tuple_and_errors():
    m = pc.as_model(([[1.0]], [[1.0]], [[1.0]]))
    assert m.n == 1
    with pytest.raises(ValueError, match="a model tuple must be"):
        pc.as_model(([[1.0]], [[1.0]]))
    with pytest.raises(TypeError, match="cannot use a str"):
        pc.as_model("model.toml")


def test_from_transfer_function_siso_against_python_control():
    # Reference: python-control's transfer function evaluated at the same points.
    num, den = [2.0, 3.0, 1.0], [1.0, 4.0, 6.0, 4.0]
    g = pc.from_transfer_function(num, den)
    ref = control.tf(num, den)
    for s in [0.3j, 1.0 + 2.0j, 5.0]:
        assert_allclose(g.transfer_at(s)[0, 0], ref(s), rtol=1e-12)
    assert g.n == 3


def test_from_transfer_function_biproper_and_discrete():
    # (2z + 1)/(z - 0.5) = 2 + 2/(z - 0.5): feedthrough 2, written out by long division.
    g = pc.from_transfer_function([2.0, 1.0], [1.0, -0.5], dt=0.1)
    assert g.is_discrete and g.D[0, 0] == 2.0
    z = 0.3 + 0.9j
    assert_allclose(g.transfer_at(z)[0, 0], (2 * z + 1) / (z - 0.5), rtol=1e-13)


def test_from_transfer_function_mimo():
    num = [[[1.0], [1.0, 0.0]], [[2.0], [0.0]]]
    den = [[[1.0, 1.0], [1.0, 2.0]], [[1.0, 3.0], [1.0]]]
    g = pc.from_transfer_function(num, den)
    s = 0.7j
    expected = np.array([[1 / (s + 1), s / (s + 2)], [2 / (s + 3), 0.0]])
    assert_allclose(g.transfer_at(s), expected, rtol=1e-12, atol=1e-14)


def test_from_transfer_function_errors():
    with pytest.raises(ValueError, match="improper"):
        pc.from_transfer_function([1.0, 0.0, 0.0], [1.0, 1.0])
    with pytest.raises(ValueError, match="denominator is zero"):
        pc.from_transfer_function([1.0], [0.0])
    with pytest.raises(ValueError, match="both be flat"):
        pc.from_transfer_function([[[1.0]]], [1.0, 1.0])


def test_replace_and_pickle():
    import pickle

    m = pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]], name="tank")
    m2 = m.replace(dt=0.5)
    assert m2.dt == 0.5 and m.dt is None and m2.name == "tank"
    m3 = pickle.loads(pickle.dumps(m))
    assert_allclose(m3.A, m.A) and m3.name == "tank"
