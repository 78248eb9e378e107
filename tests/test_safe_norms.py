"""Frobenius norms without overflow or underflow, and the structure routines at extreme scales.

Reference for the scaled sum of squares: C. L. Lawson, R. J. Hanson, D. R. Kincaid and
F. T. Krogh, "Basic linear algebra subprograms for Fortran usage", ACM TOMS 5(3), 1979.
The suite turns RuntimeWarning into an error, so an overflow on the way fails these tests.
"""

import math

import numpy as np
import pytest

import plantcore as pc
from plantcore.core.safe_norms import frobenius, frobenius_of_columns, frobenius_of_rows


@pytest.mark.parametrize("power", [-1070, -600, -300, 0, 300, 600, 1020])
def test_frobenius_is_exact_for_a_pythagorean_triple_at_any_scale(power):
    unit = 2.0 ** power  # 2^-1070 is subnormal: 3, 4 and 5 times it are still exact
    X = np.array([[3.0, 0.0], [0.0, 4.0]]) * unit
    assert math.isclose(frobenius(X), 5.0 * unit, rel_tol=1e-15)
    np.testing.assert_allclose(frobenius_of_columns(X), [3.0 * unit, 4.0 * unit], rtol=1e-15)
    np.testing.assert_allclose(frobenius_of_rows(X), frobenius_of_columns(X), rtol=0)


def test_frobenius_of_complex_and_empty_arrays():
    assert frobenius(np.array([3e200j, 4e200])) == pytest.approx(5e200, rel=1e-15)
    assert frobenius(np.zeros((0, 4))) == 0.0
    assert frobenius_of_columns(np.zeros((0, 3))).shape == (3,)


@pytest.mark.parametrize("value", [-1e300, 1e300, -1e-300])
def test_structure_routines_on_an_eigenvalue_at_the_edge_of_the_double_range(value):
    model = ([[value]], [[1.0]], [[1.0]])
    minimal = pc.minimal_realization(model)
    assert minimal.order == 1 and not minimal.fragile
    kd = pc.kalman_decomposition(model)
    assert kd.sizes.controllable_observable == 1
    np.testing.assert_allclose(np.linalg.eigvals(kd.model.A), [value], rtol=1e-14)


@pytest.mark.parametrize("power", [-450, 450])
def test_decomposition_unchanged_by_scaling_the_whole_model(power):
    # three states: one controllable and observable, one uncontrollable, one unobservable
    A = np.array([[-1.0, 0.3, 0.0], [0.0, -2.0, 0.0], [0.0, 0.0, -3.0]])
    B = np.array([[1.0], [0.0], [1.0]])
    C = np.array([[1.0, 1.0, 0.0]])
    s = 2.0 ** power
    base = pc.kalman_decomposition((A, B, C)).sizes
    assert tuple(base) == (1, 1, 1, 0)
    for scaled in ((A * s, B * s, C * s), (A, B * s, C / s), (A * s, B, C)):
        assert pc.kalman_decomposition(scaled).sizes == base
        assert pc.minimal_realization(scaled).order == 1
