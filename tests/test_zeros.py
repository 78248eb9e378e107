"""Tests for plantcore.structure.zeros (transmission and invariant zeros)."""

import numpy as np
import pytest
import scipy.linalg
from scipy.optimize import linear_sum_assignment

import plantcore as pc

slycot = pytest.importorskip("slycot")


def _slycot_zeros(A, B, C, D):
    """Reference: SLICOT AB08ND through slycot (finite zeros, normal rank, infinite zeros).

    Its rank tolerance is given as 1e-10 (relative, like ours): with its default (0, which
    SLICOT replaces by a multiple of eps) it keeps rounding noise of 2e-17 relative as a
    rank and misses the zero of a model whose B has two equal columns (seed 22, model 291;
    the system pencil there loses rank, smallest singular value 2e-16 of 12).
    """
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    out = slycot.ab08nd(n, m, p, A, B, C, D, tol=1e-10, ldwork=100 * (n + m + p) + 100)
    nu, rank, dinfz, infz, Af, Bf = out[0], out[1], out[2], out[5], out[8], out[9]
    zeros = scipy.linalg.eigvals(Af[:nu, :nu], Bf[:nu, :nu]) if nu else np.zeros(0)
    # infz[i] infinite elementary divisors of degree i + 1: a zero at infinity of that order
    infinite = sum((i + 1) * int(infz[i]) for i in range(dinfz))
    return zeros, rank, infinite


def _matched_error(ours, reference):
    """Largest distance after the best one-to-one pairing, relative to max(1, |z|)."""
    if reference.size == 0:
        return 0.0
    cost = np.abs(ours[:, None] - reference[None, :]) / np.maximum(1.0, np.abs(reference))[None, :]
    rows, cols = linear_sum_assignment(cost)
    return float(cost[rows, cols].max())


def _generated(rng):
    n, m, p = int(rng.integers(1, 9)), int(rng.integers(1, 4)), int(rng.integers(1, 4))
    A = rng.standard_normal((n, n))
    B = rng.standard_normal((n, m))
    C = rng.standard_normal((p, n))
    D = rng.standard_normal((p, m)) if rng.random() < 0.3 else np.zeros((p, m))
    if rng.random() < 0.3 and m > 1:          # rank-deficient input side
        B[:, -1], D[:, -1] = B[:, 0], D[:, 0]
    if rng.random() < 0.2 and n > 2:          # an uncontrollable mode: a decoupling zero
        B[-1, :], A[-1, :-1] = 0.0, 0.0
    if rng.random() < 0.2 and p > 1:          # rank-deficient output side
        C[-1], D[-1] = C[0], D[0]
    return A, B, C, D


@pytest.mark.parametrize("discrete", [False, True])
def test_generated_models_agree_with_slycot_ab08nd(discrete):
    # Reference: SLICOT AB08ND (Emami-Naeini and Van Dooren's method) via slycot, on 300
    # generated models, square and not, with rank-deficient B, C, D and decoupling zeros.
    rng = np.random.default_rng(22 + discrete)
    for _ in range(300):
        A, B, C, D = _generated(rng)
        model = pc.StateSpaceModel(A, B, C, D, dt=0.1 if discrete else None)
        ours = pc.transmission_zeros(model, realization="as_given")
        zeros, rank, infinite = _slycot_zeros(A, B, C, D)
        assert ours.finite_zeros.size == zeros.size
        assert ours.normal_rank == rank
        assert ours.infinite_zero_count == infinite
        assert _matched_error(ours.finite_zeros, zeros) <= 1e-8


def test_slicot_documentation_example():
    # SLICOT AB08ND documentation example (from memory): 6 states, 2 inputs, 3 outputs;
    # invariant zeros 2 and -1.  The zero -1 is the unobservable mode x5 (a decoupling
    # zero), so the transmission zeros of the minimal realization are only 2.
    A = np.diag([1.0, 1.0, 3.0, -4.0, -1.0, 3.0])
    B = np.array([[0, -1], [-1, 0], [1, -1], [0, 0], [0, 1], [-1, -1.0]])
    C = np.array([[1, 0, 0, 1, 0, 0], [0, 1, 0, 1, 0, 1], [0, 0, 1, 0, 0, 1.0]])
    D = np.zeros((3, 2))
    given = pc.transmission_zeros((A, B, C, D), realization="as_given")
    np.testing.assert_allclose(given.finite_zeros, [-1.0, 2.0], rtol=1e-12, atol=1e-12)
    assert given.normal_rank == 2
    minimal = pc.transmission_zeros((A, B, C, D))
    np.testing.assert_allclose(minimal.finite_zeros, [2.0], rtol=1e-12)
    assert minimal.realization == "minimal"


def test_two_by_two_right_half_plane_zero():
    # S. Skogestad and I. Postlethwaite, "Multivariable Feedback Control", 2nd ed., 2005,
    # ch. 4 (from memory): G(s) = 1/(s+2) [[s-1, 4], [4.5, 2(s-1)]] has no zero at s = 1
    # although every diagonal entry does; det G = 2(s-4)/(s+2), pole polynomial s + 2,
    # so the only transmission zero is s = 4 (checked by hand).
    num = [[[1.0, -1.0], [4.0]], [[4.5], [2.0, -2.0]]]
    den = [[[1.0, 2.0]] * 2, [[1.0, 2.0]] * 2]
    result = pc.transmission_zeros(pc.from_transfer_function(num, den))
    np.testing.assert_allclose(result.finite_zeros, [4.0], rtol=1e-10)
    assert result.normal_rank == 2 and result.infinite_zero_count == 0
    assert not result.fragile


@pytest.mark.parametrize("dt", [None, 0.5])
def test_siso_zeros_are_the_numerator_roots(dt):
    # Constructed: (s + 2)(s - 1)(s + 0.5) / ((s+3)(s+4)(s+5)(s+6)(s+7)) has zeros at the
    # numerator roots and relative degree 2 (common practice).
    num = np.poly([-2.0, 1.0, -0.5])
    den = np.poly([-3.0, -4.0, -5.0, -6.0, -7.0])
    result = pc.transmission_zeros(pc.from_transfer_function(num, den, dt=dt))
    np.testing.assert_allclose(result.finite_zeros, [-2.0, -0.5, 1.0], rtol=1e-9)
    assert result.infinite_zero_count == 2
    assert result.normal_rank == 1


def test_complex_zeros_come_in_exact_conjugate_pairs():
    num = np.poly([-1.0 + 2.0j, -1.0 - 2.0j]).real
    result = pc.transmission_zeros(pc.from_transfer_function(num, np.poly([-1.0, -2.0, -3.0])))
    z = result.finite_zeros
    assert z.size == 2 and z[0] == np.conj(z[1])
    np.testing.assert_allclose(sorted(z, key=lambda v: v.imag), [-1 - 2j, -1 + 2j], rtol=1e-10)


def test_chain_of_integrators_has_only_zeros_at_infinity():
    # 1/s^4: no finite zeros, four at infinity (common practice).
    n = 4
    A = np.diag(np.ones(n - 1), 1)
    B = np.zeros((n, 1)); B[-1, 0] = 1.0
    C = np.zeros((1, n)); C[0, 0] = 1.0
    result = pc.transmission_zeros((A, B, C))
    assert result.finite_zeros.size == 0 and result.infinite_zero_count == 4


def test_decisions_are_recorded_and_a_near_rank_deficient_feedthrough_is_fragile():
    D = np.array([[1.0, 0.0], [0.0, 1e-10]])
    result = pc.transmission_zeros((-np.eye(2), np.eye(2), np.eye(2), D), realization="as_given")
    assert any(d.label.startswith("zeros: ") for d in result.decisions)
    assert result.fragile


def test_unknown_realization_is_refused():
    with pytest.raises(ValueError, match="realization must be one of"):
        pc.transmission_zeros(([[-1.0]], [[1.0]], [[1.0]]), realization="full")


@pytest.mark.parametrize("power", [-450, -100, 100, 450])
def test_zeros_do_not_change_with_exact_scalings(power):
    # (s^2 + 3 s + 2.5) / ((s + 1)(s + 2)(s + 3)) has the zeros -1.5 +- 0.5j (by hand).
    # Scaling A, B, C and D by 2^k scales the zeros by 2^k; a scalar change of state units
    # (B times 2^k, C divided by it) and a change of time units (A and B times 2^k, zeros
    # times 2^k) are exact too, so the computed zeros must follow them.
    model = pc.from_transfer_function([1.0, 3.0, 2.5], [1.0, 6.0, 11.0, 6.0])
    A, B, C, D = model.A, model.B, model.C, model.D
    s = 2.0 ** power
    expected = np.array([-1.5 - 0.5j, -1.5 + 0.5j])
    for scaled, factor in (((A * s, B * s, C * s, D * s), s), ((A, B * s, C / s, D), 1.0),
                           ((A * s, B * s, C, D), s)):
        zeros = pc.transmission_zeros(scaled, realization="as_given")
        found = np.sort_complex(zeros.finite_zeros / factor)
        np.testing.assert_allclose(found, expected, rtol=1e-10)


def test_zeros_of_a_model_in_extreme_time_units():
    # 1/(s + 1e300) has no finite zero and normal rank 1; 1/(s + 1e300) + 1 has the zero
    # -1e300 - 1 (by hand); no overflow on the way (the suite turns RuntimeWarning into an error)
    plain = pc.transmission_zeros(([[-1e300]], [[1.0]], [[1.0]]), realization="as_given")
    assert plain.finite_zeros.size == 0 and plain.normal_rank == 1
    assert plain.infinite_zero_count == 1
    with_d = pc.transmission_zeros(([[-1e300]], [[1.0]], [[1.0]], [[1.0]]), realization="as_given")
    np.testing.assert_allclose(with_d.finite_zeros, [-1e300], rtol=1e-12)
