"""Tests of plantcore.reduction.equivalence (the transfer-matrix equivalence certificate).

External references, named beside each check:
- Similarity invariance of the transfer matrix, C T (sI - T^-1 A T)^-1 T^-1 B = C (sI - A)^-1 B
  (T. Kailath, Linear Systems, 1980, section 2.1).
- Known-structure systems from the shared catalog (Kalman decomposition built by hand), whose
  minimal realizations must keep the transfer matrix.
- A dense frequency grid (direct evaluation with numpy) for where two models differ most.
- sympy exact rational arithmetic for the exact path.
- Markov parameters of first-order systems in closed form, derived in the test.
"""

import json
import math

import numpy as np
import pytest
import sympy
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import catalog
import plantcore as pc
from plantcore.reduction.equivalence import check_equivalence
from plantcore.core.wording import SAFETY_CAUTION


def random_minimal(rng, n, m, p, *, discrete=False, feedthrough=True):
    """A random stable model with distinct poles and dense B, C (minimal almost surely)."""
    if discrete:
        eig = rng.uniform(-0.9, 0.9, n)
    else:
        eig = -rng.uniform(0.2, 5.0, n)
    Q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    A = Q @ (np.diag(eig) + np.triu(rng.standard_normal((n, n)) * 0.3, 1)) @ Q.T
    D = rng.standard_normal((p, m)) if feedthrough else None
    return pc.StateSpaceModel(A, rng.standard_normal((n, m)), rng.standard_normal((p, n)), D,
                              dt=0.1 if discrete else None)


def transformed(model, T):
    Ti = np.linalg.inv(T)
    return model.replace(A=Ti @ model.A @ T, B=Ti @ model.B, C=model.C @ T)


def diff_gain(a, b, w):
    pt = np.exp(1j * w) if a.is_discrete else 1j * w
    return float(np.linalg.norm(a.transfer_at(pt) - b.transfer_at(pt), 2))


# --- equivalent pairs ---------------------------------------------------------------------------

@pytest.mark.parametrize("discrete", [False, True])
@pytest.mark.parametrize("condition", [1.0, 1e2, 1e3])
def test_similarity_transform_is_equivalent(discrete, condition):
    rng = np.random.default_rng(int(condition) + discrete)
    model = random_minimal(rng, 6, 2, 3, discrete=discrete)
    T = catalog.similarity(6, rng, condition)
    cert = check_equivalence(model, transformed(model, T))
    assert cert.equivalent, cert.reasons
    assert cert.relative_error <= 1e-9
    assert cert.markov_error < 1e-9
    assert cert.criterion == "relative peak error"
    assert cert.is_discrete == discrete and cert.orders == (6, 6)


@given(seed=st.integers(0, 10_000), log_cond=st.floats(0.0, 3.0))
def test_similarity_transform_is_equivalent_property(seed, log_cond):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 6))
    model = random_minimal(rng, n, int(rng.integers(1, 3)), int(rng.integers(1, 3)),
                           discrete=bool(seed % 2))
    cert = check_equivalence(model, transformed(model, catalog.similarity(n, rng, 10 ** log_cond)))
    assert cert.equivalent, cert.reasons


@pytest.mark.parametrize("case", catalog.catalog()[::3], ids=lambda c: f"{c.sizes}-{c.tags}")
def test_model_and_its_minimal_realization_are_equivalent(case):
    minimal = pc.minimal_realization(case.model)
    cert = check_equivalence(case.model, minimal.model)
    assert cert.equivalent, cert.reasons
    # Within the tolerance, or (a transfer function that is zero up to rounding, whose peak
    # gain is itself rounding) within the attainable accuracy at every frequency examined.
    assert cert.relative_error <= 1e-9 or cert.verdict_basis == "attainable accuracy"
    assert all(c.difference <= max(1e-9 * cert.reference_gain, c.attainable)
               for c in cert.frequency_checks)
    assert cert.orders == (case.model.n, minimal.order)


def test_unstable_but_equal_models():
    rng = np.random.default_rng(3)
    model = random_minimal(rng, 5, 2, 2)
    unstable = model.replace(A=-model.A)                    # every pole in the right half plane
    cert = check_equivalence(unstable, transformed(unstable, catalog.similarity(5, rng, 50.0)))
    assert cert.equivalent and cert.difference_order == 0
    # The peak error is measured (rounding of the transformed copy), not set to 0 by the
    # order of the difference: below the tolerance and below the attainable accuracy.
    assert cert.relative_error <= 1e-12
    assert all(c.difference <= c.attainable for c in cert.frequency_checks)


def test_models_with_integrators():
    # a = 1/s + 1/(s + 1) in two different realizations: equal, although the peak gain of a
    # is infinite.  The shared integrator cancels in the minimal difference.
    a = pc.StateSpaceModel([[0.0, 0.0], [0.0, -1.0]], [[1.0], [1.0]], [[1.0, 1.0]])
    T = np.array([[1.0, 2.0], [0.5, 3.0]])
    cert = check_equivalence(a, transformed(a, T))
    assert cert.equivalent and cert.difference_order == 0
    # Change the stable part by 1e-3: the error is finite and measured against a's gain at
    # the frequency of the largest difference.
    b = a.replace(A=[[0.0, 0.0], [0.0, -1.001]])
    cert = check_equivalence(a, b)
    assert not cert.equivalent
    assert math.isfinite(cert.peak_error) and math.isfinite(cert.relative_error)
    assert any("infinite" in r for r in cert.reasons)
    # A different integrator gain: the difference itself has a pole at s = 0.
    c = a.replace(C=[[1.001, 1.0]])
    cert = check_equivalence(a, c)
    assert not cert.equivalent and math.isinf(cert.peak_error)
    assert any("without bound" in r for r in cert.reasons)


# --- pairs that differ ----------------------------------------------------------------------------

@pytest.mark.parametrize("discrete", [False, True])
@pytest.mark.parametrize("matrix", ["A", "B", "C"])
def test_one_entry_changed_by_1e_3_is_detected_and_located(discrete, matrix):
    rng = np.random.default_rng(17 + discrete)
    model = random_minimal(rng, 5, 2, 2, discrete=discrete, feedthrough=False)
    M = np.array(getattr(model, matrix))
    i, j = np.unravel_index(np.argmax(np.abs(M)), M.shape)
    M[i, j] *= 1 + 1e-3
    other = model.replace(**{matrix: M})
    cert = check_equivalence(model, other)
    assert not cert.equivalent
    assert cert.difference_order > 0
    assert 1e-6 < cert.relative_error < 1e-1
    # The peak error is attained at the reported frequency, and a dense grid finds nothing
    # larger (numpy evaluation of both transfer matrices).
    assert_allclose(diff_gain(model, other, cert.peak_frequency), cert.peak_error, rtol=1e-7)
    grid = np.linspace(0, math.pi, 2000) if discrete else np.concatenate([[0], np.geomspace(1e-3, 1e3, 3000)])
    assert max(diff_gain(model, other, w) for w in grid) <= cert.peak_error * (1 + 1e-8)
    assert_allclose(cert.relative_error, cert.peak_error / pc.peak_gain(model).value, rtol=1e-12)
    unit = "rad/sample" if discrete else "rad/s"
    assert any(r.startswith("The transfer functions differ most at") and unit in r
               for r in cert.reasons)
    assert any(r.startswith("Not equivalent") for r in cert.reasons)
    assert cert.markov_error > 1e-6


def test_feedthrough_only_difference():
    rng = np.random.default_rng(4)
    model = random_minimal(rng, 4, 2, 2)
    D = np.array(model.D)
    D[0, 1] += 0.25
    cert = check_equivalence(model, model.replace(D=D))
    assert cert.difference_order == 0
    assert cert.peak_error == pytest.approx(0.25, rel=1e-14)
    assert cert.d_error == pytest.approx(0.25, rel=1e-14)
    assert not cert.equivalent
    assert cert.peak_frequency == 0.0


def test_tolerance_decides():
    g = pc.from_transfer_function([1.0], [1.0, 1.0])
    h = pc.from_transfer_function([1.0 + 1e-6], [1.0, 1.0])
    # ||h - g||_inf = 1e-6 ||g||_inf exactly: fails 1e-9, passes 1e-5.
    assert not check_equivalence(g, h).equivalent
    loose = check_equivalence(g, h, tol=1e-5)
    assert loose.equivalent and loose.relative_error == pytest.approx(1e-6, rel=1e-6)
    with pytest.raises(ValueError, match="tol"):
        check_equivalence(g, h, tol=0.0)
    with pytest.raises(ValueError, match="tol"):
        check_equivalence(g, h, tol="small")


def test_markov_error_closed_form():
    # a = 2/(s + 1), b = 2/(s + 1.5).  Markov parameters M_k = c (-p)^(k-1), k >= 1; with
    # the frequency scale rho = 1.5 (largest spectral radius) the scaled parameters are
    # c (-p)^(k-1) / rho^k.  Derived here and compared with the certificate.
    a = pc.StateSpaceModel([[-1.0]], [[1.0]], [[2.0]])
    b = pc.StateSpaceModel([[-1.5]], [[1.0]], [[2.0]])
    cert = check_equivalence(a, b)
    rho, count = 1.5, 3                                  # 2 max(n) + 1 = 3 parameters, D first
    Ma = [0.0] + [2.0 * (-1.0) ** (k - 1) / rho ** k for k in range(1, count)]
    Mb = [0.0] + [2.0 * (-1.5) ** (k - 1) / rho ** k for k in range(1, count)]
    expected = max(abs(x - y) for x, y in zip(Ma, Mb)) / max(abs(x) for x in Ma)
    assert cert.compared_markov_parameters == count
    assert cert.markov_error == pytest.approx(expected, rel=1e-12)


# --- models that cannot be compared ---------------------------------------------------------------

def test_mismatches_give_reasons_not_exceptions():
    rng = np.random.default_rng(8)
    a = random_minimal(rng, 3, 2, 2)
    cases = {
        "inputs": random_minimal(rng, 3, 1, 2),
        "outputs": random_minimal(rng, 3, 2, 1),
        "discrete-time": random_minimal(rng, 3, 2, 2, discrete=True),
    }
    for word, b in cases.items():
        cert = check_equivalence(a, b)
        assert not cert.equivalent and cert.difference_order is None
        assert cert.criterion == "not comparable"
        assert any(word in r for r in cert.reasons), cert.reasons
        assert math.isinf(cert.relative_error)
        assert SAFETY_CAUTION in cert.to_text()
    d1 = random_minimal(rng, 3, 2, 2, discrete=True)
    cert = check_equivalence(d1, d1.replace(dt=0.2))
    assert not cert.equivalent and any("sample time" in r for r in cert.reasons)


def test_static_and_empty_models():
    D = np.array([[1.0, 2.0]])
    s1 = pc.StateSpaceModel(np.zeros((0, 0)), np.zeros((0, 2)), np.zeros((1, 0)), D)
    s2 = pc.StateSpaceModel([[-1.0]], [[0.0, 0.0]], [[3.0]], D)   # a hidden state, same gain
    assert check_equivalence(s1, s2).equivalent
    zero_a = pc.StateSpaceModel([[-1.0]], [[1.0]], [[0.0]])
    zero_b = pc.StateSpaceModel([[-2.0]], [[0.0]], [[1.0]])
    assert check_equivalence(zero_a, zero_b).equivalent
    nonzero = pc.StateSpaceModel([[-2.0]], [[1.0]], [[1.0]])
    cert = check_equivalence(zero_a, nonzero)
    assert not cert.equivalent and math.isinf(cert.relative_error)


# --- exact arithmetic -----------------------------------------------------------------------------

def _rational_pair():
    A = sympy.Matrix([[sympy.Rational(-1, 3), 0], [1, -2]])
    B = sympy.Matrix([[1], [sympy.Rational(1, 2)]])
    C = sympy.Matrix([[1, 1]])
    T = sympy.Matrix([[1, 1], [0, 2]])
    Ti = T.inv()
    a = ([["-1/3", "0"], ["1", "-2"]], [["1"], ["1/2"]], [["1", "1"]], [["0"]])
    b = (Ti * A * T, Ti * B, C * T, sympy.Matrix([[0]]))
    return a, b


def test_exact_path_equal_models():
    a, b = _rational_pair()
    cert = check_equivalence(a, b, exact=True)
    assert cert.equivalent and cert.exact_equal is True
    assert cert.criterion == "exact rational arithmetic"
    # Cross-check the claim independently with sympy: both transfer functions reduce to the
    # same rational function, (3/2 s + 19/6) / ((s + 1/3)(s + 2)), worked out by hand from a:
    # X1 = U/(s + 1/3), X2 = (X1 + U/2)/(s + 2), Y = X1 + X2.
    s = sympy.Symbol("s")
    Aa = sympy.Matrix([[sympy.Rational(-1, 3), 0], [1, -2]])
    G = (sympy.Matrix([[1, 1]]) * (s * sympy.eye(2) - Aa).inv() * sympy.Matrix([[1], [sympy.Rational(1, 2)]]))[0]
    assert sympy.cancel(G - (sympy.Rational(3, 2) * s + sympy.Rational(19, 6))
                        / ((s + sympy.Rational(1, 3)) * (s + 2))) == 0


def test_exact_path_unequal_models():
    a, b = _rational_pair()
    b_changed = (b[0], b[1], b[2], sympy.Matrix([[sympy.Rational(1, 10 ** 12)]]))
    cert = check_equivalence(a, b_changed, exact=True)
    assert not cert.equivalent and cert.exact_equal is False
    # The floating-point comparison alone would pass: 1e-12 relative to a gain of about 4.
    assert cert.relative_error < 1e-9
    assert any("exact" in r and "differ" in r for r in cert.reasons)
    assert check_equivalence(pc.StateSpaceModel(*[np.array(m, dtype=float) for m in
                                                  ([[-0.5]], [[1.0]], [[1.0]])]),
                             ([["-1/2"]], [["1"]], [["1"]]), exact=True).equivalent


def test_exact_path_refuses_symbols():
    k = sympy.Symbol("k")
    with pytest.raises(ValueError, match="symbols"):
        check_equivalence(([[-1]], [[1]], [[k]]), ([[-1]], [[1]], [[1]]), exact=True)


# --- output ---------------------------------------------------------------------------------------

def test_text_and_dict_output():
    g = pc.from_transfer_function([1.0, 0.3], [1.0, -0.2, -0.15], dt=0.5)  # 1/(z - 0.5)
    h = pc.from_transfer_function([1.0], [1.0, -0.49], dt=0.5)
    cert = check_equivalence(g, h)
    text = cert.to_text()
    assert "NOT EQUIVALENT" in text and text.rstrip().endswith(SAFETY_CAUTION)
    assert "rad/sample" in text
    assert SAFETY_CAUTION not in cert.to_text(caution=False)
    data = cert.to_dict()
    json.dumps(data)                                     # JSON-safe
    assert data["equivalent"] is False and data["frequency_unit"] == "rad/sample"
    same = check_equivalence(g, pc.minimal_realization(g).model)
    assert "Verdict:               EQUIVALENT" in same.to_text()
    assert same.to_dict()["verdict"] == "equivalent" and same.to_dict()["relative_error"] < 1e-12
    identical = check_equivalence(g, g).to_dict()     # measured as exactly 0: no peak frequency
    assert identical["peak_error"] == 0.0 and identical["peak_frequency"] is None


def test_reference_peak_gain_uses_every_blas_thread_and_the_rest_one(monkeypatch):
    # issue 17, item 6: above the one-thread size the peak gain of A (Hamiltonian
    # eigenvalue problems) gains from a second thread, the certificate's solves do not
    from threadpoolctl import threadpool_info, threadpool_limits

    from plantcore.reduction import equivalence
    from plantcore.structure import pbh_measures

    def blas_threads():
        return max(e["num_threads"] for e in threadpool_info() if e["user_api"] == "blas")

    seen = {}
    peak, certify = equivalence.peak_gain, equivalence._certify

    def spy_peak(*args, **kwargs):
        seen["peak"] = blas_threads()
        return peak(*args, **kwargs)

    def spy_certify(*args, **kwargs):
        seen["certify"] = blas_threads()
        return certify(*args, **kwargs)

    monkeypatch.setattr(pbh_measures, "ONE_THREAD_SIZE", 2)      # 4 states count as large
    monkeypatch.setattr(equivalence, "peak_gain", spy_peak)
    monkeypatch.setattr(equivalence, "_certify", spy_certify)
    g = pc.from_transfer_function([1.0, 3.0], [1.0, 5.0, 6.0, 2.0, 1.0])
    with threadpool_limits(2, user_api="blas"):
        outside = blas_threads()
        if outside < 2:
            pytest.skip("BLAS runs on one thread here: the two parts could not be told apart")
        assert pc.check_equivalence(g, g).equivalent
    assert seen == {"peak": outside, "certify": 1}
