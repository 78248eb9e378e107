"""Tests for plantcore.structure.exact: exact part sizes, minimal order and transfer matrix.

External references, named beside each check:
* an analytic derivation written out below (fixed-fixed spring-mass chain, mode shapes
  sin(i j pi / (N + 1)), from memory; a standard result of vibration theory);
* the rank of the block Hankel matrix of Markov parameters computed with sympy's own
  ``Matrix.rank`` (Ho and Kalman, "Effective construction of linear state-variable models
  from input/output functions", 1966): an independent route to the minimal order;
* python-control's ``minreal`` (slycot TB01PD) on models where the answer is clear-cut;
* plantcore's floating-point ``kalman_decomposition`` and ``minimal_realization``;
* hand-derived transfer functions.
"""

from __future__ import annotations

import dataclasses
from fractions import Fraction

import numpy as np
import pytest
import sympy

import plantcore as pc
from plantcore.structure.exact import ExactPartSizes, exact_transfer_comparison

s = sympy.Symbol("s")


# =============================================================================================
# Analytic case: a symmetric spring-mass chain with symmetric actuation
# =============================================================================================
#
# N equal masses m in a row, joined to each other and to two fixed walls by N + 1 equal
# springs k.  With positions q and velocities v, x = [q; v]:
#
#     A = [[0, I], [-(k/m) L, 0]],  L = tridiag(-1, 2, -1)  (N x N),
#
# The mode shapes of L are phi_j(i) = sin(i j pi / (N + 1)), j = 1..N, with distinct
# eigenvalues 2 - 2 cos(j pi / (N + 1)) (from memory; standard vibration theory).  Under the
# mirror i -> N + 1 - i, phi_j(N + 1 - i) = (-1)^(j + 1) phi_j(i): odd j are symmetric modes
# (ceil(N/2) of them), even j antisymmetric (floor(N/2)).  Each mode owns two states (its
# position and its velocity, eigenvalues +/- i omega_j with omega_j > 0).
#
# By the PBH test (Hautus 1969) mode j is controllable from the force b (applied to v) iff
# phi_j . b != 0 and observable from the position measurement c iff phi_j . c != 0.
# * b = e_1 + e_N (equal forces at both ends): phi_j . b = phi_j(1) (1 + (-1)^(j+1)), zero
#   exactly for the antisymmetric modes; phi_j(1) = sin(j pi / (N + 1)) != 0.
# * c = e_1 sees every mode; c = e_1 + e_N sees only the symmetric modes; c = e_1 - e_N only
#   the antisymmetric ones.
# With S = 2 ceil(N/2) and Z = 2 floor(N/2) states, the four parts are therefore
#     c = e_1:        (S, 0, Z, 0)
#     c = e_1 + e_N:  (S, 0, 0, Z)
#     c = e_1 - e_N:  (0, S, Z, 0)

def _spring_chain(N, k, m, b, c):
    """Exact (A, B, C) of the chain; k, m may be numbers or sympy symbols."""
    L = sympy.zeros(N, N)
    for i in range(N):
        L[i, i] = 2
        if i + 1 < N:
            L[i, i + 1] = L[i + 1, i] = -1
    A = sympy.zeros(2 * N, 2 * N)
    A[:N, N:] = sympy.eye(N)
    A[N:, :N] = -(k / m) * L
    B = sympy.zeros(2 * N, 1)
    C = sympy.zeros(1, 2 * N)
    for i, w in b.items():
        B[N + i, 0] = w
    for i, w in c.items():
        C[0, i] = w
    return A, B, C


def _chain_expected(N, which):
    S, Z = 2 * ((N + 1) // 2), 2 * (N // 2)
    return {"end": (S, 0, Z, 0), "symmetric": (S, 0, 0, Z), "antisymmetric": (0, S, Z, 0)}[which]


def _chain_output(N, which):
    return {"end": {0: 1}, "symmetric": {0: 1, N - 1: 1}, "antisymmetric": {0: 1, N - 1: -1}}[which]


@pytest.mark.parametrize("N", [4, 5])
@pytest.mark.parametrize("which", ["end", "symmetric", "antisymmetric"])
def test_spring_chain_parts_match_the_analytic_derivation(N, which):
    A, B, C = _spring_chain(N, sympy.Integer(3), sympy.Integer(2), {0: 1, N - 1: 1},
                            _chain_output(N, which))
    sizes = pc.exact_part_sizes((A, B, C))
    expected = _chain_expected(N, which)
    assert tuple(sizes.part_sizes) == expected          # analytic derivation above
    assert sizes.controllable_dimension == 2 * ((N + 1) // 2)
    assert sizes.unobservable_dimension == expected[1] + expected[3]
    assert sizes.minimal_order == expected[0] == pc.exact_minimal_order((A, B, C))
    assert sizes.n == 2 * N and not sizes.generic


def test_spring_chain_with_symbolic_stiffness_and_mass_is_generic():
    k, m = sympy.symbols("k m", positive=True)
    A, B, C = _spring_chain(5, k, m, {0: 1, 4: 1}, _chain_output(5, "symmetric"))
    sizes = pc.exact_part_sizes((A, B, C))
    assert tuple(sizes.part_sizes) == _chain_expected(5, "symmetric")  # analytic, as above
    assert sizes.generic and sizes.parameters == ("k", "m")


def test_spring_chain_agrees_with_the_floating_point_decomposition():
    # The float path (orthogonal staircases) on the same chain with k/m = 3/2 must agree.
    N = 5
    A, B, C = _spring_chain(N, sympy.Integer(3), sympy.Integer(2), {0: 1, N - 1: 1},
                            _chain_output(N, "antisymmetric"))
    model = tuple(np.array(M.tolist(), dtype=float) for M in (A, B, C))
    kd = pc.kalman_decomposition(model)
    assert tuple(kd.sizes) == _chain_expected(N, "antisymmetric")


def test_spring_chain_transfer_function_has_only_symmetric_poles():
    # Symmetric force, symmetric output (c = e_1 + e_N): the transfer function keeps the three
    # symmetric modes (j = 1, 3, 5 for N = 5), so its denominator has degree 6 and is the
    # product of (s^2 + (k/m) lambda_j) over those modes.  lambda_j = 2 - 2 cos(j pi / 6):
    # j = 1: 2 - sqrt(3); j = 3: 2; j = 5: 2 + sqrt(3); with k/m = 3/2 (derived by hand):
    # (s^2 + 3/2 (2 - sqrt 3)) (s^2 + 3/2 (2 + sqrt 3)) = s^4 + 6 s^2 + 9/4, times (s^2 + 3).
    N = 5
    A, B, C = _spring_chain(N, sympy.Integer(3), sympy.Integer(2), {0: 1, N - 1: 1},
                            _chain_output(N, "symmetric"))
    G = pc.exact_transfer_matrix((A, B, C), s)
    num, den = sympy.fraction(sympy.cancel(G[0, 0]))
    expected_den = sympy.expand((s**4 + 6 * s**2 + sympy.Rational(9, 4)) * (s**2 + 3))
    assert sympy.degree(den, s) == 6
    assert sympy.expand(den / sympy.LC(den, s) - expected_den) == 0


# =============================================================================================
# Known-structure integer models hidden by a unimodular change of coordinates
# =============================================================================================

def _unimodular(n, rng, steps):
    """An integer matrix with determinant +/- 1 (so its inverse is integer too)."""
    T = sympy.eye(n)
    for _ in range(steps):
        i, j = rng.choice(n, size=2, replace=False) if n > 1 else (0, 0)
        if i == j:
            continue
        T[i, :] = T[i, :] + int(rng.choice([-1, 1])) * T[j, :]
    return T


def _hidden_structure(sizes, m, p, seed):
    """The four-part form of DESIGN.md with random small integer blocks, hidden by T."""
    rng = np.random.default_rng(seed)
    n1, n2, n3, n4 = sizes
    n = sum(sizes)
    idx = np.cumsum([0, n1, n2, n3, n4])
    blocks = {(r, c): True for r, c in [(0, 0), (0, 2), (1, 0), (1, 1), (1, 2), (1, 3), (2, 2),
                                        (3, 2), (3, 3)]}

    def rand(r, c):
        return sympy.Matrix(rng.integers(-3, 4, size=(r, c)).tolist()) if r and c else sympy.zeros(r, c)

    A = sympy.zeros(n, n)
    for (r, c) in blocks:
        A[idx[r]:idx[r + 1], idx[c]:idx[c + 1]] = rand(sizes[r], sizes[c])
    B = sympy.zeros(n, m)
    B[: n1 + n2, :] = rand(n1 + n2, m)
    C = sympy.zeros(p, n)
    C[:, :n1] = rand(p, n1)
    C[:, idx[2]:idx[3]] = rand(p, n3)
    D = rand(p, m)
    T = _unimodular(n, rng, steps=2 * n) if n else sympy.eye(0)
    Ti = T.inv() if n else T
    return T * A * Ti, T * B, C * Ti, D


STRUCTURES = [(2, 1, 1, 1), (1, 0, 2, 0), (0, 2, 0, 1), (3, 1, 0, 2), (1, 1, 1, 1), (2, 2, 2, 2),
              (4, 0, 0, 0), (0, 0, 0, 3), (2, 0, 3, 1)]


def _block_hankel_rank(A, B, C):
    """rank [C A^(i+j) B], i, j = 0..n-1, by sympy's Matrix.rank (Ho and Kalman 1966)."""
    n = A.rows
    if n == 0:
        return 0
    markov = [C * A**k * B for k in range(2 * n - 1)]
    H = sympy.Matrix(sympy.BlockMatrix([[markov[i + j] for j in range(n)] for i in range(n)]))
    return H.rank()


@pytest.mark.parametrize("seed, sizes", list(enumerate(STRUCTURES)))
def test_hidden_structure_exact_sizes_and_hankel_rank(seed, sizes):
    m, p = 1 + seed % 2, 1 + (seed // 2) % 2
    A, B, C, D = _hidden_structure(sizes, m, p, seed=100 + seed)
    result = pc.exact_part_sizes((A, B, C, D))
    assert tuple(result.part_sizes) == sizes                        # built that way
    assert result.minimal_order == _block_hankel_rank(A, B, C)      # Ho and Kalman 1966


@pytest.mark.parametrize("seed, sizes", list(enumerate(STRUCTURES)))
def test_hidden_structure_agrees_with_float_path_and_python_control(seed, sizes):
    import control

    m, p = 1 + seed % 2, 1 + (seed // 2) % 2
    A, B, C, D = _hidden_structure(sizes, m, p, seed=100 + seed)
    arrays = tuple(np.array(M.tolist(), dtype=float).reshape(M.shape) for M in (A, B, C, D))
    exact = pc.exact_part_sizes((A, B, C, D))
    kd = pc.kalman_decomposition(arrays)
    assert tuple(kd.sizes) == tuple(exact.part_sizes), f"fragile={kd.fragile}"
    assert pc.minimal_realization(arrays).order == exact.minimal_order
    if sum(sizes):
        # python-control minreal (slycot TB01PD): integer models, clear-cut ranks.  An explicit
        # tolerance is needed: the default (machine-precision level) keeps a spurious state
        # for the seed-4 model, whose three eigenvalues at 1 sit in different parts.
        reduced = control.minreal(control.ss(*arrays), tol=1e-9, verbose=False)
        assert reduced.nstates == exact.minimal_order


def test_siso_transfer_denominator_degree_is_the_minimal_order():
    # Kalman 1963: only the controllable, observable part reaches the transfer function, so
    # for SISO the degree of the cancelled denominator equals the minimal order.
    for seed, sizes in enumerate(STRUCTURES):
        A, B, C, D = _hidden_structure(sizes, 1, 1, seed=300 + seed)
        G = pc.exact_transfer_matrix((A, B, C, D), s)
        _, den = sympy.fraction(sympy.cancel(G[0, 0]))
        assert sympy.degree(den, s) == pc.exact_minimal_order((A, B, C)), sizes


def test_transfer_matrix_agrees_with_numeric_evaluation():
    A, B, C, D = _hidden_structure((2, 1, 1, 1), 2, 2, seed=7)
    G = pc.exact_transfer_matrix((A, B, C, D), s)
    model = pc.StateSpaceModel(*(np.array(M.tolist(), dtype=float) for M in (A, B, C, D)))
    rng = np.random.default_rng(11)
    for point in rng.standard_normal(4) + 1j * rng.standard_normal(4):
        exact = np.array(G.subs(s, sympy.nsimplify(point.real) + sympy.I * sympy.nsimplify(point.imag))
                         .evalf(30).tolist(), dtype=complex)
        np.testing.assert_allclose(model.transfer_at(point), exact, rtol=1e-9, atol=1e-12)


# =============================================================================================
# Transfer matrices derived by hand
# =============================================================================================

def test_transfer_matrix_of_a_companion_form():
    # x1' = x2, x2' = -2 x1 - 3 x2 + u, y = x1:  G = 1 / (s^2 + 3 s + 2)  (by hand)
    G = pc.exact_transfer_matrix(([[0, 1], [-2, -3]], [[0], [1]], [[1, 0]]), s)
    assert sympy.cancel(G[0, 0] - 1 / (s**2 + 3 * s + 2)) == 0


def test_transfer_matrix_cancels_hidden_modes_and_keeps_D():
    # Two lags, the second neither driven nor seen, plus feedthrough 1/2:
    # G = 1 / (s + 1/3) + 1/2  (by hand).
    G = pc.exact_transfer_matrix(([["-1/3", 0], [0, -5]], [[1], [0]], [[1, 0]], [["1/2"]]), s)
    assert sympy.cancel(G[0, 0] - (1 / (s + sympy.Rational(1, 3)) + sympy.Rational(1, 2))) == 0
    assert sympy.degree(sympy.fraction(G[0, 0])[1], s) == 1


def test_transfer_matrix_symbolic_and_variable_names():
    a = sympy.Symbol("a")
    G = pc.exact_transfer_matrix(([[-a]], [[1]], [[1]]), "w")
    assert sympy.cancel(G[0, 0] - 1 / (sympy.Symbol("w") + a)) == 0
    with pytest.raises(ValueError, match="also a parameter"):
        pc.exact_transfer_matrix(([[-a]], [[1]], [[1]]), a)


def test_transfer_matrix_discrete_model_uses_z_and_static_gain_is_D():
    model = pc.StateSpaceModel([[0.5]], [[1.0]], [[2.0]], dt=0.1)
    G = pc.exact_transfer_matrix(model)
    z = sympy.Symbol("z")
    assert G.free_symbols == {z}
    assert sympy.cancel(G[0, 0] - 2 / (z - sympy.Rational(1, 2))) == 0
    gain = pc.exact_transfer_matrix(([], [], [], [[1, "2/3"], [0, -1]]))
    assert gain == sympy.Matrix([[1, sympy.Rational(2, 3)], [0, -1]])
    sizes = pc.exact_part_sizes(([], [], [], [[1, 2]]))
    assert tuple(sizes.part_sizes) == (0, 0, 0, 0) and sizes.minimal_order == 0


# =============================================================================================
# Entries: exact conversion, generic ranks, refusals
# =============================================================================================

def test_floats_are_taken_at_their_exact_binary_value():
    # 0.1 + 0.2 != 0.3 in binary: two "equal" decoupled lags are distinct as doubles, so the
    # generic answer (order 2) comes back; as decimals (strings / fractions) they are equal
    # and one of them is redundant (order 1).  Documented behaviour.
    B, C = [[1], [1]], [[1, 1]]
    assert pc.exact_minimal_order(([[0.3, 0], [0, 0.1 + 0.2]], B, C)) == 2
    assert pc.exact_minimal_order(([["0.3", 0], [0, "3/10"]], B, C)) == 1
    assert pc.exact_minimal_order(([[Fraction(3, 10), 0], [0, Fraction("0.3")]], B, C)) == 1
    G = pc.exact_transfer_matrix(([[0.1]], [[1]], [[1]]), s)
    assert sympy.cancel(G[0, 0] - 1 / (s - sympy.Rational(3602879701896397, 36028797018963968))) == 0
    assert sympy.cancel(G[0, 0] - 1 / (s - sympy.Rational(1, 10))) != 0


def test_generic_rank_drops_at_special_parameter_values():
    a, b = sympy.symbols("a b")
    model = ([[a, 0], [0, b]], [[1], [1]], [[1, 1]])
    assert pc.exact_minimal_order(model) == 2                         # generic
    special = tuple(sympy.Matrix(M).subs(b, a) for M in model)
    assert pc.exact_minimal_order(special) == 1                       # a == b: one mode hidden


def test_sympy_floats_numpy_arrays_and_state_space_models_are_accepted():
    A = np.array([[-1.0, 0.0], [0.0, -2.0]])
    B = np.array([[1.0], [0.0]])
    C = np.array([[1.0, 1.0]])
    by_tuple = pc.exact_part_sizes((A, B, C))
    by_model = pc.exact_part_sizes(pc.StateSpaceModel(A, B, C))
    by_sympy = pc.exact_part_sizes((sympy.Matrix([[sympy.Float(-1.0), 0], [0, -2]]), B, C))
    assert tuple(by_tuple.part_sizes) == tuple(by_model.part_sizes) == tuple(by_sympy.part_sizes) \
        == (1, 0, 1, 0)


@pytest.mark.parametrize("entry, message", [
    ("__import__('os').getcwd()", r"A row 1, column 1 is the string .* not a rational number"),
    ("1/0", "not a rational number"),
    (True, "A row 1, column 1 is a boolean"),
    (1 + 2j, "complex"),
    (float("nan"), "finite"),
    (sympy.I, "finite and real"),
    (sympy.oo, "finite and real"),
    (None, "NoneType, not a number"),
])
def test_bad_entries_are_refused_with_the_matrix_named(entry, message):
    with pytest.raises(ValueError, match=message):
        pc.exact_part_sizes(([[entry]], [[1]], [[1]]))


@pytest.mark.parametrize("model, message", [
    (([[1, 2]], [[1]], [[1]]), r"A is 1 x 2 but must be square"),
    (([[1]], [[1], [2]], [[1]]), r"B has 2 rows but A is 1 x 1"),
    (([[1]], [[1]], [[1, 2]]), r"C has 2 columns"),
    (([[1]], [[1]], [[1]], [[1, 2]]), r"D is 1 x 2 .* D must be 1 x 1"),
    (([1, 2], [[1]], [[1]]), r"A is a flat list of 2 entries"),
    (([[1], [2, 3]], [[1]], [[1]]), r"A row 2 has 2 entries but row 1 has 1"),
    (([[1]], [[1]]), r"\(A, B, C\) or \(A, B, C, D\); got 2 items"),
])
def test_bad_shapes_are_refused(model, message):
    with pytest.raises(ValueError, match=message):
        pc.exact_part_sizes(model)


def test_result_is_a_frozen_dataclass():
    sizes = pc.exact_part_sizes(([[-1]], [[1]], [[1]]))
    assert isinstance(sizes, ExactPartSizes)
    with pytest.raises(dataclasses.FrozenInstanceError):
        sizes.minimal_order = 3


# --- exact comparison of transfer matrices by Markov parameters -------------------------------


def _padded(A, B, C, rng):
    """The same transfer matrix with one uncontrollable and one unobservable state added.

    The new first state is never driven (zero row of B, zero coupling from the old states)
    and the new last state is never seen (zero column of C, no coupling into the old
    states), so by the canonical structure theorem (Kalman 1963) the transfer matrix is
    unchanged, exactly.
    """
    n = A.shape[0]
    Ap = np.zeros((n + 2, n + 2))
    Ap[1:n + 1, 1:n + 1] = A
    Ap[0, 0] = -0.75
    Ap[1:n + 1, 0] = rng.standard_normal(n)          # it drives the old states, is not driven
    Ap[n + 1, n + 1] = -1.25
    Ap[n + 1, 1:n + 1] = rng.standard_normal(n)      # it is driven by them, is not seen
    Bp = np.vstack([np.zeros((1, B.shape[1])), B, rng.standard_normal((1, B.shape[1]))])
    Cp = np.hstack([rng.standard_normal((C.shape[0], 1)), C, np.zeros((C.shape[0], 1))])
    return Ap, Bp, Cp


@pytest.mark.parametrize("n", [3, 8])
def test_markov_comparison_agrees_with_rational_functions(n):
    rng = np.random.default_rng(n)
    A = rng.standard_normal((n, n)) - 2 * np.eye(n)
    B = rng.standard_normal((n, 2))
    C = rng.standard_normal((2, n))
    same = exact_transfer_comparison((A, B, C), _padded(A, B, C, rng))
    assert same.equal and same.differing_entries == () and same.first_difference is None
    assert same.compared_markov_parameters == 2 * n + 2
    # one entry of C changed in its last bit: only the row of that output differs
    C2 = C.copy()
    C2[1, 0] = np.nextafter(C2[1, 0], np.inf)
    changed = exact_transfer_comparison((A, B, C), (A, B, C2))
    assert not changed.equal and changed.differing_entries == ((1, 0), (1, 1))
    if n == 3:  # the slow general route (elimination over rational functions) agrees
        s = sympy.Symbol("s")
        G1 = pc.exact_transfer_matrix((A, B, C), s)
        G2 = pc.exact_transfer_matrix((A, B, C2), s)
        assert [(i, j) for i in range(2) for j in range(2)
                if sympy.cancel(G1[i, j] - G2[i, j]) != 0] == [(1, 0), (1, 1)]


def test_markov_comparison_finds_a_difference_past_the_first_parameters():
    # a = 1/(s+1)^2 (Markov parameters 0, 1, -2, ...; by hand).  b adds a third state that
    # is never driven, so b = a exactly; c drives it, adding 1/(s+1)^3, whose Markov
    # parameters are 0, 0, 1, ...: the first difference is at k = 2, not at k = 0.
    a = ([[-1, 1], [0, -1]], [[0], [1]], [[1, 0]])
    b = ([[-1, 1, 0], [0, -1, 1], [0, 0, "-1/2"]], [[0], [1], [0]], [[1, 0, 0]])  # b = a
    assert exact_transfer_comparison(a, b).equal
    c = ([[-1, 1, 0], [0, -1, 1], [0, 0, -1]], [[0], [1], [1]], [[1, 0, 0]])
    result = exact_transfer_comparison(a, c)
    assert not result.equal and result.first_difference == 2


def test_markov_comparison_of_discrete_and_static_models():
    dt = 0.5
    a = pc.StateSpaceModel([[0.5]], [[1.0]], [[2.0]], [[1.0]], dt=dt)
    static = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), [[1.0]],
                                dt=dt)
    result = exact_transfer_comparison(a, static)
    assert not result.equal and result.first_difference == 0
    assert exact_transfer_comparison(static, static).equal
    d_only = exact_transfer_comparison(a, a.replace(D=[[1.5]]))
    assert not d_only.equal and d_only.first_difference == -1


def test_markov_comparison_falls_back_for_symbolic_parameters():
    k = sympy.Symbol("k", positive=True)
    a = ([[-k]], [[1]], [[k]])
    b = ([[-k, 0], [0, -1]], [[1], [0]], [[k, 1]])
    result = exact_transfer_comparison(a, b)
    assert result.equal and result.method == "rational functions (sympy)"


def test_exact_certificate_of_thirty_states_uses_integer_markov_parameters():
    rng = np.random.default_rng(30)
    n = 30
    A = rng.standard_normal((n, n)) - 3 * np.eye(n)
    B = rng.standard_normal((n, 2))
    C = rng.standard_normal((2, n))
    cert = pc.check_equivalence((A, B, C), _padded(A, B, C, rng), exact=True)
    assert cert.equivalent and cert.exact_equal
    assert any("first 62 Markov parameters" in r for r in cert.reasons)
