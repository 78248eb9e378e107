"""State-space models whose Kalman structure is known by construction.

Every model here is built in the four-part Kalman form with *exact* zeros::

    A = [[A11, 0,   A13, 0  ],      B = [[B1],      C = [C1, 0, C3, 0]
         [A21, A22, A23, A24],           [B2],
         [0,   0,   A33, 0  ],           [0 ],
         [0,   0,   A43, A44]]           [0 ]]

(part 1 controllable and observable, part 2 controllable and unobservable, part 3
uncontrollable and observable, part 4 uncontrollable and unobservable) and then hidden by a
similarity ``x = T z``.  The four part sizes, the minimal order (the size of part 1), the
controllable dimension (parts 1 + 2) and the observable dimension (parts 1 + 3) are
therefore known without running any of the code under test.  This module does not import
plantcore: the generator stays independent of what it is used to judge.

Families
--------
``general``
    n = 5..60, 1-4 inputs and outputs, continuous or discrete time, random couplings in
    every block the form allows; hidden by a random orthogonal ``T`` or by an
    ill-conditioned ``T = U diag(s) V^T`` (``U``, ``V`` random orthogonal, ``s``
    log-spaced, condition number 1e1..1e3).  For n <= :data:`EXACT_MAX_STATES`, half of the
    models are *exact*: small dyadic entries and a dyadic ``T`` (see "Exact models").
``scaled``
    a ``general`` model whose states are then scaled by exact powers of two,
    ``diag(2^k_i)`` with ``|k_i| <= K`` and ``K`` one of 10, 20, 30 binary orders.  The
    scaled model is exactly similar to the unscaled one: same answer.
``chain``
    single-input, single-output, n = 20..120: part 1 is an upper-triangular, strongly
    non-normal chain (random eigenvalues on the diagonal, off-diagonal entries
    ``alpha * N(0, 1) / sqrt(n1)`` with ``alpha`` 1, 3 or 10) driven at its last state and
    read at its first; part 2 is reached only through the end of the chain and part 3 seen
    only through its start.  Such chains are themselves close to uncontrollable: with
    ``alpha`` 3-10 and n >= 80 the measured margin (below) is typically 1e-11..1e-19, so
    most long chains are judged with the "removal" rule: reporting *fewer* controllable or
    observable states is acceptable (if flagged, or always below 1e-12), reporting more
    never is.
``near_cancellation``
    a ``general``-type model (n = 6..40) with one extra real mode that is weakly
    controllable (or weakly observable) with a relative coupling ``delta`` of 1e-13..1e-4:
    an almost cancelling pole and zero.  See "Truth" for what counts as right.
``repeated``
    n = 12..20, eigenvalues shared between the parts: ``shared_defective`` (every diagonal
    block ``lambda0 I + strictly upper``, all eigenvalues equal and defective),
    ``identical`` (the same block in two to four of the parts: identical subsystems) and
    ``split_jordan`` (Jordan blocks of one eigenvalue in every part, linked into chains
    across the parts through the couplings the form allows).
``large``
    a ``general``-type model at n = 100, 200, 500, 1000 or 2000, parts of about
    40/15/15/30 % of the states, 1-4 inputs and outputs.

Truth
-----
The constructed sizes are the exact answer for the unrounded block form.  The rounding of
the hiding similarity perturbs the structural zeros by about ``cond(T) * eps`` relative
(at most ~2e-13), which by the project's tolerance policy is rounding noise and must be
treated as zero.  Two things can make the constructed answer *ambiguous* under that
policy, and both are measured, never assumed:

* The weak coupling of a ``near_cancellation`` model, measured on the hidden model as the
  PBH value ``sigma_min([A - lambda_w I, B_s]) / s`` (or its dual for a weakly observable
  mode) at the weak eigenvalue ``lambda_w``, with ``s = max(||A||_F, ||B||_F, ||C||_F)`` and
  the columns of ``B`` (rows of ``C``) scaled to ``s``, as plantcore scales them.  It is
  stored as :attr:`KnownModel.coupling`.  Then

  - ``coupling >= 1e-8`` (:data:`REAL_COUPLING`): the coupling is real, the mode must be
    kept; only the constructed answer is right (``alternative_rule = "never"``);
  - ``1e-12 < coupling < 1e-8``: ambiguous; the constructed ("kept") answer is right,
    and the answer with the mode removed (:attr:`KnownModel.alternative_sizes`) is right
    only when it is flagged fragile (``alternative_rule = "if_fragile"``);
  - ``coupling <= 1e-12`` (:data:`NOISE_COUPLING`): removing the mode is acceptable with or
    without a flag, and so is keeping it (``alternative_rule = "always"``).

* The robustness of the constructed parts themselves: :attr:`KnownModel.margin` is the
  smallest PBH value of the constructed controllable pair (parts 1-2, in an orthonormal
  basis of its subspace in the hidden coordinates) and of the constructed observable pair
  (parts 1 and 3, dually), evaluated at the eigenvalues of those parts (known from the
  construction) and, where the construction repeats an eigenvalue (defective blocks,
  blocks shared between parts), also at the computed eigenvalues of the pair and of the
  whole model and on a grid around the repeated eigenvalue refined by a local search
  (see :func:`_pbh_distance`: at a repeated eigenvalue the value at the eigenvalue itself
  overstated the margin by up to ten orders).  It is measured up to
  :data:`MARGIN_MAX_STATES` states (``nan`` above).
  When it is below 1e-8 the constructed parts are themselves weak: the constructed
  answer is right, and so is any answer that only *removes* (no more controllable,
  observable or minimal states than constructed, ``alternative_sizes = None``), if it
  is flagged fragile (margin in 1e-12..1e-8, ``ambiguous``) or even unflagged (margin
  <= 1e-12, ``alternative_rule = "always"``).  An answer that reports more controllable or
  observable states than constructed is always wrong: the uncontrollable and unobservable
  parts are exact zeros, perturbed only by the hiding's rounding.
  The PBH value at the eigenvalues is an upper bound of the distance to
  uncontrollability, not the distance itself (which is a minimum over all complex
  ``lambda``); for strongly non-normal parts the two can differ by orders of magnitude.

Exact models
------------
For n <= :data:`EXACT_MAX_STATES` the ``general`` (and so ``scaled``) and ``repeated``
families can build the model from dyadic rationals (small integers over powers of two) and
hide it with a dyadic similarity: ``U`` and ``V`` are signed permutations times products of
reflections ``I - (2/k) v v^T`` with ``v`` of +-1 entries on ``k`` = 2, 4 or 8 coordinates
(exactly orthogonal, dyadic), and ``s_i = 2^-e_i``, so that ``T = U diag(s) V^T`` and
``T^-1 = V diag(1/s) U^T`` are both dyadic and ``cond_2(T) = 2^E`` exactly.  ``A = T A_z
T^-1`` etc. are computed with :class:`fractions.Fraction` and checked to be exactly
representable in double precision, so the float matrices *are* the rational model and
:func:`exact_sizes` confirms the sizes in exact arithmetic.  (On a float-hidden model,
:func:`exact_sizes` gives the exact sizes of the rounded data, generically those of a
minimal model; that is not the constructed answer.)

Usage
-----
>>> import known_structure as ks
>>> km = ks.draw("general", 7)
>>> km.sizes.controllable_observable == km.minimal_order
True
>>> models = ks.draw_many("repeated", 3, seed=1)
>>> all(m.family == "repeated" for m in models)
True
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from typing import NamedTuple

import numpy as np
import scipy.linalg
import scipy.optimize

__all__ = [
    "EXACT_MAX_STATES",
    "FAMILIES",
    "GENERATORS",
    "LARGE_SIZES",
    "MARGIN_MAX_STATES",
    "NOISE_COUPLING",
    "REAL_COUPLING",
    "SIZE_RANGES",
    "KnownModel",
    "Sizes",
    "chain",
    "draw",
    "draw_many",
    "exact_sizes",
    "general",
    "large",
    "near_cancellation",
    "pbh_value",
    "repeated",
    "scaled",
]

FAMILIES = ("general", "scaled", "chain", "near_cancellation", "repeated", "large")

#: Inclusive range of the number of states drawn by each family.
SIZE_RANGES = {
    "general": (5, 60),
    "scaled": (5, 60),
    "chain": (20, 120),
    "near_cancellation": (6, 40),
    "repeated": (12, 20),
    "large": (100, 2000),
}

#: The sizes the ``large`` family draws from.
LARGE_SIZES = (100, 200, 500, 1000, 2000)

#: Largest model built (and checked by :func:`exact_sizes`) in exact rational arithmetic.
EXACT_MAX_STATES = 14

#: Largest model whose structural margin is measured (an SVD per eigenvalue, so the cost
#: grows as n^4; every ``chain`` model is measured, ``large`` only at n = 100).
MARGIN_MAX_STATES = 120

#: Relative couplings at or above this are real and must be kept (project policy).
REAL_COUPLING = 1e-8

#: Relative couplings at or below this may be treated as zero (rounding noise is ~1e-13).
NOISE_COUPLING = 1e-12

_ZERO_BLOCKS = ((0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1))
_PART_NAMES = ("controllable_observable", "controllable_unobservable",
               "uncontrollable_observable", "uncontrollable_unobservable")


class Sizes(NamedTuple):
    """The four Kalman part sizes, in the order plantcore reports them."""

    controllable_observable: int
    controllable_unobservable: int
    uncontrollable_observable: int
    uncontrollable_unobservable: int


def _freeze(x: np.ndarray) -> np.ndarray:
    x = np.array(x, dtype=float)
    x.setflags(write=False)
    return x


@dataclass(frozen=True, eq=False)
class KnownModel:
    """A model with a known answer.

    Attributes
    ----------
    A, B, C : ndarray
        The (hidden) model, read-only float arrays.
    dt : float or None
        Sample time; ``None`` for continuous time.
    sizes : Sizes
        The constructed four part sizes (the exact answer).
    minimal_order : int
        Size of part 1.
    family : str
        One of :data:`FAMILIES`.
    description : str
        One line saying how the model was built.
    hiding_condition : float
        2-norm condition number of the hiding similarity ``T`` (1 for orthogonal hiding;
        without the power-of-two scaling of the ``scaled`` family).
    ambiguous : bool
        True when the tolerance policy allows a second answer only if it is flagged
        fragile (``alternative_rule == "if_fragile"``; see the module docstring).
    alternative_sizes : Sizes or None
        The second answer allowed by ``alternative_rule``.  ``None`` with a rule other
        than ``"never"`` allows any answer that only *removes* (no more controllable,
        observable or minimal states than constructed): the constructed parts themselves
        are weak (see ``margin``).
    alternative_rule : str
        ``"never"``, ``"if_fragile"`` or ``"always"``.
    coupling : float
        Measured relative weak coupling (``near_cancellation`` only; ``nan`` otherwise).
    margin : float
        Measured structural margin of the constructed parts (``nan`` when not measured).
    exact : bool
        True when ``A``, ``B``, ``C`` are exactly the rational similarity of the block form,
        so that :func:`exact_sizes` must reproduce ``sizes``.
    variant : str
        Sub-kind within the family (e.g. ``"identical"``, ``"controllability"``).
    seed : tuple
        The seed the model was drawn with by :func:`draw` (empty when built directly).
    """

    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    dt: float | None
    sizes: Sizes
    minimal_order: int
    family: str
    description: str
    hiding_condition: float
    ambiguous: bool = False
    alternative_sizes: Sizes | None = None
    alternative_rule: str = "never"
    coupling: float = math.nan
    margin: float = math.nan
    exact: bool = False
    variant: str = ""
    seed: tuple = ()

    # -- shapes -------------------------------------------------------------------------
    @property
    def n(self) -> int:
        """Number of states."""
        return self.A.shape[0]

    @property
    def n_inputs(self) -> int:
        """Number of inputs."""
        return self.B.shape[1]

    @property
    def n_outputs(self) -> int:
        """Number of outputs."""
        return self.C.shape[0]

    @property
    def controllable_dimension(self) -> int:
        """Constructed controllable dimension, parts 1 + 2."""
        return self.sizes[0] + self.sizes[1]

    @property
    def observable_dimension(self) -> int:
        """Constructed observable dimension, parts 1 + 3."""
        return self.sizes[0] + self.sizes[2]

    def model(self):
        """The model as a ``plantcore.StateSpaceModel`` (imports plantcore)."""
        import plantcore as pc

        return pc.StateSpaceModel(np.array(self.A), np.array(self.B), np.array(self.C),
                                  dt=self.dt, name=f"{self.family} n={self.n}")

    # -- judging ------------------------------------------------------------------------
    def expected(self, quantity: str, alternative: bool = False):
        """The answer a quantity must have.

        Parameters
        ----------
        quantity : {"sizes", "minimal_order", "controllable_rank", "observable_rank"}
        alternative : bool
            Use :attr:`alternative_sizes` instead of :attr:`sizes` (``None`` when there is
            no specific alternative).

        Returns
        -------
        tuple of int, int or None
        """
        sizes = self.alternative_sizes if alternative else self.sizes
        if sizes is None:
            return None
        if quantity == "sizes":
            return tuple(sizes)
        if quantity == "minimal_order":
            return sizes[0]
        if quantity == "controllable_rank":
            return sizes[0] + sizes[1]
        if quantity == "observable_rank":
            return sizes[0] + sizes[2]
        raise ValueError(f"unknown quantity {quantity!r}")

    def accepts(self, quantity: str, value, fragile: bool | None) -> bool:
        """Whether an answer is right under the tolerance policy.

        Parameters
        ----------
        quantity : str
            As for :meth:`expected`.
        value : tuple of int or int
            The answer given.
        fragile : bool or None
            Whether the answer was flagged fragile (``None``: the method has no flag).

        Returns
        -------
        bool
            True for the constructed answer; for the alternative (or, when
            ``alternative_sizes`` is None, any answer that only removes states from the
            controllable, observable and minimal parts) according to ``alternative_rule``:
            never, only if ``fragile``, or always.
        """
        value = tuple(int(v) for v in value) if quantity == "sizes" else int(value)
        if value == self.expected(quantity):
            return True
        if self.alternative_rule == "never":
            return False
        alt = self.expected(quantity, alternative=True)
        if alt is None:
            if not self._removes_only(quantity, value):
                return False
        elif value != alt:
            return False
        return self.alternative_rule == "always" or bool(fragile)

    def _removes_only(self, quantity: str, value) -> bool:
        """True when ``value`` treats some constructed couplings as zero and adds none:
        no more controllable, observable or minimal states than constructed."""
        n1, n2, n3, _ = self.sizes
        if quantity == "sizes":
            a1, a2, a3, a4 = value
            return (a1 + a2 + a3 + a4 == self.n and a1 <= n1 and a1 + a2 <= n1 + n2
                    and a1 + a3 <= n1 + n3)
        return value <= self.expected(quantity)


# ----------------------------------------------------------------------------------------
# Building blocks
# ----------------------------------------------------------------------------------------

def _slices(sizes) -> list[slice]:
    cuts = np.cumsum((0,) + tuple(int(k) for k in sizes))
    return [slice(int(cuts[i]), int(cuts[i + 1])) for i in range(len(sizes))]


def _pow2(x: float) -> float:
    """The power of two nearest to ``x`` (in the log sense)."""
    return 2.0 ** round(math.log2(x))


def _random_orthogonal(n: int, rng: np.random.Generator) -> np.ndarray:
    q, r = np.linalg.qr(rng.standard_normal((n, n)))
    return q * np.sign(np.diag(r))[None, :]


def _gaussian(rng):
    return lambda shape: rng.standard_normal(shape)


def _dyadic(rng, den: int = 4, values=(-3, -2, -1, 1, 2, 3)):
    """Sampler of nonzero small integers over ``den`` (a power of two): exact in binary."""
    vals = np.array(values, dtype=float) / den
    return lambda shape: rng.choice(vals, size=shape)


def _stable_block(k: int, rng, discrete: bool) -> np.ndarray:
    """A random k x k block with eigenvalues in the open left half plane / unit disc."""
    if k == 0:
        return np.zeros((0, 0))
    G = rng.standard_normal((k, k)) / math.sqrt(k)
    if discrete:
        M = 0.6 * G
        rho = max(abs(np.linalg.eigvals(M)))
        if rho > 0.95:
            M *= 0.9 / rho
        return M
    M = G - (1.0 + rng.uniform(0.0, 1.0)) * np.eye(k)
    top = max(np.linalg.eigvals(M).real)
    if top > -0.05:
        M -= (top + 0.2) * np.eye(k)
    return M


def _dyadic_block(k: int, sample, discrete: bool) -> np.ndarray:
    """A k x k block of dyadic entries (stability is not needed for the structure)."""
    if k == 0:
        return np.zeros((0, 0))
    scale = _pow2(1.0 / math.sqrt(k))
    M = scale * sample((k, k))
    return 0.5 * M if discrete else M - 2.0 * np.eye(k)


def _assemble(diag_blocks, sizes, m: int, p: int, sample, coupling: float):
    """The four-part Kalman form with exact zeros and sampled couplings."""
    n = int(sum(sizes))
    bl = _slices(sizes)
    A = coupling * sample((n, n))
    for i in range(4):
        A[bl[i], bl[i]] = diag_blocks[i]
    for i, j in _ZERO_BLOCKS:
        A[bl[i], bl[j]] = 0.0
    B = sample((n, m))
    B[bl[2], :] = 0.0
    B[bl[3], :] = 0.0
    C = sample((p, n))
    C[:, bl[1]] = 0.0
    C[:, bl[3]] = 0.0
    return A, B, C


def _block_eigs(Az: np.ndarray, sizes) -> list[np.ndarray]:
    """Eigenvalues of the four diagonal blocks of a block-form ``A``."""
    return [np.linalg.eigvals(Az[s, s]) if s.stop > s.start else np.zeros(0)
            for s in _slices(sizes)]


def _draw_sizes(n: int, rng, min_first: int = 1) -> Sizes:
    """Four part sizes adding to n, part 1 at least ``min_first``, proportions random."""
    w = rng.dirichlet(np.ones(4))
    extra = rng.multinomial(n - min_first, w)
    return Sizes(int(extra[0]) + min_first, int(extra[1]), int(extra[2]), int(extra[3]))


def _draw_condition(rng, orthogonal_probability: float = 0.5, high: float = 1e3) -> float:
    if rng.uniform() < orthogonal_probability:
        return 1.0
    return float(10.0 ** rng.uniform(1.0, math.log10(high)))


def _sample_time(rng, discrete: bool):
    return float(rng.choice([0.01, 0.1, 1.0])) if discrete else None


def _time_word(dt) -> str:
    return "continuous" if dt is None else f"discrete (dt={dt:g})"


# ----------------------------------------------------------------------------------------
# Hiding similarities
# ----------------------------------------------------------------------------------------

def _hide_float(Az, Bz, Cz, cond: float, rng):
    """``x = T z`` with ``T = U diag(s) V^T`` (``U`` alone when ``cond == 1``).

    Returns ``A, B, C, T, T_inv``.
    """
    n = Az.shape[0]
    U = _random_orthogonal(n, rng)
    if cond == 1.0:
        T, Ti = U, U.T
    else:
        V = _random_orthogonal(n, rng)
        s = np.geomspace(1.0, 1.0 / cond, n)
        T = (U * s[None, :]) @ V.T
        Ti = (V / s[None, :]) @ U.T
    return T @ Az @ Ti, T @ Bz, Cz @ Ti, T, Ti


def _fractions(M: np.ndarray) -> np.ndarray:
    out = np.empty(M.shape, dtype=object)
    for idx, x in np.ndenumerate(np.asarray(M, dtype=float)):
        out[idx] = Fraction(x)
    return out


def _exact_floats(M: np.ndarray) -> np.ndarray:
    """Fractions to floats, refusing any that is not exactly representable."""
    out = np.empty(M.shape, dtype=float)
    for idx, x in np.ndenumerate(M):
        f = float(x)
        if Fraction(f) != x:
            raise ArithmeticError("a dyadic entry is not exactly representable in double")
        out[idx] = f
    return out


def _dyadic_orthogonal(n: int, rng, reflections: int = 3) -> np.ndarray:
    """An exactly orthogonal dyadic matrix (Fraction entries): signed permutation times
    reflections ``I - (2/k) v v^T``, ``v`` of +-1 on ``k`` coordinates, ``k`` in 2, 4, 8."""
    Q = np.empty((n, n), dtype=object)
    Q[:] = Fraction(0)
    for i, j in enumerate(rng.permutation(n)):
        Q[i, j] = Fraction(int(rng.choice([-1, 1])))
    choices = [k for k in (2, 4, 8) if k <= n]
    for _ in range(reflections if choices else 0):
        k = int(rng.choice(choices))
        v = np.zeros(n, dtype=object)
        v[:] = Fraction(0)
        for i in rng.choice(n, size=k, replace=False):
            v[i] = Fraction(int(rng.choice([-1, 1])))
        H = np.empty((n, n), dtype=object)
        for i in range(n):
            for j in range(n):
                H[i, j] = (Fraction(1) if i == j else Fraction(0)) - Fraction(2, k) * v[i] * v[j]
        Q = Q @ H
    return Q


def _hide_dyadic(Az, Bz, Cz, exponent: int, rng):
    """Exact dyadic hiding, ``cond_2(T) = 2**exponent``; returns float ``A, B, C, T, T_inv``."""
    n = Az.shape[0]
    U = _dyadic_orthogonal(n, rng)
    V = _dyadic_orthogonal(n, rng) if exponent else None
    if exponent:
        e = [round(exponent * i / (n - 1)) if n > 1 else 0 for i in range(n)]
        s = np.array([Fraction(1, 2 ** k) for k in e], dtype=object)
        si = np.array([Fraction(2 ** k) for k in e], dtype=object)
        T = (U * s[None, :]) @ V.T
        Ti = (V * si[None, :]) @ U.T
    else:
        T, Ti = U, U.T
    eye = np.array([[Fraction(int(i == j)) for j in range(n)] for i in range(n)], dtype=object)
    if not np.all(T @ Ti == eye):
        raise ArithmeticError("dyadic hiding: T @ T_inv is not the identity")
    Aq, Bq, Cq = _fractions(Az), _fractions(Bz), _fractions(Cz)
    return (_exact_floats(T @ Aq @ Ti), _exact_floats(T @ Bq), _exact_floats(Cq @ Ti),
            _exact_floats(T), _exact_floats(Ti))


# ----------------------------------------------------------------------------------------
# Measured margins
# ----------------------------------------------------------------------------------------

def _model_scale(A, B, C) -> float:
    return max(np.linalg.norm(A), np.linalg.norm(B), np.linalg.norm(C), np.finfo(float).tiny)


def _columns_to(X: np.ndarray, s: float) -> np.ndarray:
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    return X * (s / norms)[None, :]


def _distinct_points(points) -> np.ndarray:
    """One of each conjugate pair (imaginary part >= 0), duplicates removed."""
    pts = np.asarray(points, dtype=complex).ravel()
    pts = np.where(pts.imag < 0, pts.conj(), pts)
    if pts.size == 0:
        return pts
    key = np.round(pts.real, 12) + 1j * np.round(pts.imag, 12)
    _, idx = np.unique(key, return_index=True)
    return pts[np.sort(idx)]


def _min_pbh(A: np.ndarray, X: np.ndarray, points) -> float:
    """``min over lambda in points of sigma_min([A - lambda I, X])``."""
    k = A.shape[0]
    best = math.inf
    for lam in _distinct_points(points):
        if abs(lam.imag) == 0.0:
            M = np.hstack([A - lam.real * np.eye(k), X])
        else:
            M = np.hstack([A - lam * np.eye(k), X.astype(complex)])
        best = min(best, float(scipy.linalg.svdvals(M)[-1]))
    return best


def _repeated_points(points) -> np.ndarray:
    """The points that occur more than once (to rounding), one of each, and of a
    conjugate pair the one in the upper half plane (the PBH value of a real pair is the
    same at both); a conjugate pair itself is not a repetition."""
    pts = np.asarray(points, dtype=complex).ravel()
    key = np.round(pts.real, 12) + 1j * np.round(pts.imag, 12)
    values, counts = np.unique(key, return_counts=True)
    values = values[counts > 1]
    return values[values.imag >= 0]


def _pbh_distance(A: np.ndarray, X: np.ndarray, points, scale: float,
                  whole: np.ndarray | None = None) -> float:
    """``min sigma_min([A - lambda I, X])`` over ``points`` and, around every repeated
    point, over a polar grid (radii ``1e-4 .. 0.5`` of ``scale``, 16 angles) refined by a
    local search: an upper bound of the distance to uncontrollability, which is the
    minimum over all complex ``lambda`` (R. Eising, "Between controllable and
    uncontrollable", Systems & Control Letters 4(5), 263-264, 1984).  At a repeated
    (defective, or shared between blocks) eigenvalue the value at the eigenvalue itself
    can exceed that minimum by many orders: measured on the ``repeated`` family, seed
    20261203 model 155, 5.9e-6 at the eigenvalue -1 against 2e-16 on this search, and a
    model with one more unobservable mode lies within 8e-14 (a reordered Schur form of
    ``A + L C`` with the cluster's output rows of norm 9.3e-15, exactly block
    triangular once they are zeroed); seed 2060040533 model 84, 3.6e-9 on the grid
    alone against 8e-19 at the whole model's computed eigenvalues (``whole``)."""
    best = _min_pbh(A, X, points)
    extra = _repeated_points(points)
    if not extra.size:
        return best
    k = A.shape[0]
    Xc = X.astype(complex)

    def value(z: complex) -> float:
        return float(scipy.linalg.svdvals(np.hstack([A - z * np.eye(k), Xc]))[-1])

    # the computed eigenvalues of the pair's own matrix and of the whole model: rounding
    # scatters a defective eigenvalue into a ring, and the dips of sigma_min lie on it
    rings = np.concatenate([np.linalg.eigvals(A),
                            np.zeros(0, dtype=complex) if whole is None else whole])
    if rings.size:
        best = min(best, min(value(z) for z in rings))
    radii = np.geomspace(1e-4, 0.5, 13) * scale
    angles = np.exp(2j * np.pi * np.arange(16) / 16)
    for centre in extra:
        grid = centre + (radii[:, None] * angles[None, :]).ravel()
        near = rings[np.abs(rings - centre) <= 0.5 * scale]
        grid = np.concatenate([grid, near])
        values = np.array([value(z) for z in grid])
        start = grid[int(np.argmin(values))]
        best = min(best, float(values.min()))
        found = scipy.optimize.minimize(lambda v: value(complex(v[0], v[1])),
                                        [start.real, start.imag], method="Nelder-Mead",
                                        options={"xatol": 1e-10 * scale, "fatol": 0.0,
                                                 "maxiter": 400})
        best = min(best, float(found.fun))
    return best


def pbh_value(A, B, C, lam, side: str = "controllability") -> float:
    """The relative PBH value of a model at one point, in plantcore's scaling.

    Parameters
    ----------
    A, B, C : array_like
        The model.
    lam : complex
        The point (usually an eigenvalue of ``A``).
    side : {"controllability", "observability"}

    Returns
    -------
    float
        ``sigma_min([A - lam I, B_s]) / s`` (or ``sigma_min([A - lam I; C_s]) / s``) with
        ``s = max(||A||_F, ||B||_F, ||C||_F)`` and the columns of ``B`` (rows of ``C``)
        scaled to norm ``s``.  Zero means the mode at ``lam`` is exactly uncontrollable
        (unobservable).
    """
    A, B, C = (np.asarray(X, dtype=float) for X in (A, B, C))
    s = _model_scale(A, B, C)
    if side == "controllability":
        return _min_pbh(A, _columns_to(B, s), [lam]) / s
    if side == "observability":
        return _min_pbh(A.T, _columns_to(C.T, s), [lam]) / s
    raise ValueError(f"side must be 'controllability' or 'observability', got {side!r}")


def _structure_margin(A, B, C, T, Ti, sizes, eigs, max_states=MARGIN_MAX_STATES) -> float:
    """Smallest PBH value of the constructed controllable and observable pairs.

    The controllable pair is ``(Q^T A Q, Q^T B_s)`` with ``Q`` an orthonormal basis of the
    constructed controllable subspace (columns of ``T`` of parts 1-2); the observable pair
    is the dual, on an orthonormal basis of the span of the rows of ``T^-1`` of parts 1 and
    3.  Evaluated at the eigenvalues of those parts (``eigs``: per-part eigenvalues known
    from the construction) and, for repeated ones, around them (:func:`_pbh_distance`),
    relative to the hidden model's scale.
    """
    n = A.shape[0]
    if n > max_states:
        return math.nan
    s = _model_scale(A, B, C)
    n1, n2, n3, _ = sizes
    values = []
    repeated = _repeated_points(np.concatenate([np.asarray(e, dtype=complex).ravel()
                                                for e in eigs])).size > 0
    whole = np.linalg.eigvals(A) if repeated else np.zeros(0, dtype=complex)
    if n1 + n2:
        Q = np.linalg.qr(T[:, :n1 + n2])[0]
        pts = np.concatenate([eigs[0], eigs[1]])
        values.append(_pbh_distance(Q.T @ A @ Q, Q.T @ _columns_to(B, s), pts, s,
                                    whole=whole) / s)
    rows = np.r_[0:n1, n1 + n2:n1 + n2 + n3]
    if rows.size:
        W = np.linalg.qr(Ti[rows, :].T)[0]
        pts = np.concatenate([eigs[0], eigs[2]])
        values.append(_pbh_distance(W.T @ A.T @ W, W.T @ _columns_to(C.T, s), pts, s,
                                    whole=whole) / s)
    return min(values) if values else math.inf


# ----------------------------------------------------------------------------------------
# Finishing a model
# ----------------------------------------------------------------------------------------

def _finish(family, variant, Az, Bz, Cz, sizes, eigs, dt, rng, *, cond=1.0, exponent=None,
            description=""):
    """Hide a block-form model, measure its margin and wrap it as a :class:`KnownModel`.

    ``exponent`` (an int) selects exact dyadic hiding with ``cond = 2**exponent``; otherwise
    the float hiding of condition ``cond`` is used.
    """
    sizes = Sizes(*(int(k) for k in sizes))
    if exponent is not None:
        A, B, C, T, Ti = _hide_dyadic(Az, Bz, Cz, int(exponent), rng)
        cond = float(2 ** int(exponent))
        exact = True
    else:
        A, B, C, T, Ti = _hide_float(Az, Bz, Cz, cond, rng)
        exact = False
    margin = _structure_margin(A, B, C, T, Ti, sizes, eigs)
    rule = _margin_rule(margin)
    hiding = "orthogonal" if cond == 1.0 else f"cond {cond:.3g}"
    text = (f"{family}{'/' + variant if variant else ''} n={sum(sizes)} sizes {tuple(sizes)} "
            f"m={Bz.shape[1]} p={Cz.shape[0]} {_time_word(dt)}, hidden by T ({hiding}"
            f"{', exact dyadic' if exact else ''})" + (f"; {description}" if description else ""))
    return KnownModel(
        A=_freeze(A), B=_freeze(B), C=_freeze(C), dt=dt, sizes=sizes,
        minimal_order=sizes[0], family=family, description=text, hiding_condition=float(cond),
        ambiguous=rule == "if_fragile", alternative_sizes=None, alternative_rule=rule,
        margin=float(margin), exact=exact, variant=variant)


def _margin_rule(margin: float) -> str:
    """The alternative rule a structural margin calls for (``nan``: not measured)."""
    if not margin < REAL_COUPLING:
        return "never"
    return "if_fragile" if margin > NOISE_COUPLING else "always"


def _coupling_rule(coupling: float) -> str:
    """The alternative rule a measured weak coupling calls for."""
    if coupling >= REAL_COUPLING:
        return "never"
    return "if_fragile" if coupling > NOISE_COUPLING else "always"


def _want_exact(exact, n, rng) -> bool:
    if exact is None:
        return n <= EXACT_MAX_STATES and rng.uniform() < 0.5
    if exact and n > EXACT_MAX_STATES:
        raise ValueError(f"exact models are built up to {EXACT_MAX_STATES} states, not {n}")
    return bool(exact)


def _exponent_for(cond: float) -> int:
    return 0 if cond == 1.0 else max(1, round(math.log2(cond)))


# ----------------------------------------------------------------------------------------
# Families
# ----------------------------------------------------------------------------------------

def general(rng: np.random.Generator, n: int | None = None, *, m: int | None = None,
            p: int | None = None, discrete: bool | None = None, cond: float | None = None,
            exact: bool | None = None) -> KnownModel:
    """A random four-part model, hidden by an orthogonal or ill-conditioned similarity.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of all randomness.
    n : int, optional
        Number of states; drawn from ``SIZE_RANGES["general"]`` when omitted.
    m, p : int, optional
        Inputs and outputs; 1-4 each when omitted.
    discrete : bool, optional
        Discrete time; a fair coin when omitted.
    cond : float, optional
        Condition number of the hiding ``T``; 1 (orthogonal) or log-uniform in 1e1..1e3,
        with equal probability, when omitted.  Exact models round it to a power of two.
    exact : bool, optional
        Build from dyadic rationals with a dyadic ``T`` (n <= :data:`EXACT_MAX_STATES`);
        when omitted, a fair coin for n <= 14 and False above.

    Returns
    -------
    KnownModel
    """
    lo, hi = SIZE_RANGES["general"]
    n = int(rng.integers(lo, hi + 1)) if n is None else int(n)
    m = int(rng.integers(1, 5)) if m is None else int(m)
    p = int(rng.integers(1, 5)) if p is None else int(p)
    discrete = bool(rng.integers(2)) if discrete is None else bool(discrete)
    cond = _draw_condition(rng) if cond is None else float(cond)
    exact = _want_exact(exact, n, rng)
    sizes = _draw_sizes(n, rng)
    dt = _sample_time(rng, discrete)
    if exact:
        sample = _dyadic(rng)
        blocks = [_dyadic_block(k, sample, discrete) for k in sizes]
        Az, Bz, Cz = _assemble(blocks, sizes, m, p, sample, _pow2(1.0 / math.sqrt(n)))
        return _finish("general", "exact", Az, Bz, Cz, sizes, _block_eigs(Az, sizes), dt, rng,
                       exponent=_exponent_for(cond))
    blocks = [_stable_block(k, rng, discrete) for k in sizes]
    Az, Bz, Cz = _assemble(blocks, sizes, m, p, _gaussian(rng), 1.0 / math.sqrt(n))
    return _finish("general", "", Az, Bz, Cz, sizes, _block_eigs(Az, sizes), dt, rng,
                   cond=cond)


def scaled(rng: np.random.Generator, n: int | None = None, *, binary_orders: int | None = None,
           **options) -> KnownModel:
    """A :func:`general` model with its states scaled by exact powers of two.

    ``x = D x~`` with ``D = diag(2^k_i)``, ``k_i`` uniform integers in ``[-K, K]``:
    ``A~ = D^-1 A D``, ``B~ = D^-1 B``, ``C~ = C D``.  Every product is exact in binary
    floating point, so the scaled model is exactly similar to the unscaled one and has
    the same answer; entries then span up to ``2^(2K)`` in magnitude.

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int, optional
        Number of states (as for :func:`general`).
    binary_orders : int, optional
        ``K``; one of 10, 20, 30 when omitted.
    **options
        Passed to :func:`general`.

    Returns
    -------
    KnownModel
    """
    base = general(rng, n, **options)
    K = int(rng.choice([10, 20, 30])) if binary_orders is None else int(binary_orders)
    d = 2.0 ** rng.integers(-K, K + 1, size=base.n).astype(float)
    A = np.array(base.A) / d[:, None] * d[None, :]
    B = np.array(base.B) / d[:, None]
    C = np.array(base.C) * d[None, :]
    return dataclasses.replace(
        base, A=_freeze(A), B=_freeze(B), C=_freeze(C), family="scaled",
        variant=f"2^+-{K}" + ("/exact" if base.exact else ""),
        description=base.description.replace("general", "scaled", 1)
        + f"; states scaled by 2^k, |k| <= {K}")


def chain(rng: np.random.Generator, n: int | None = None, *, discrete: bool | None = None,
          cond: float | None = None, alpha: float | None = None) -> KnownModel:
    """A long single-input, single-output chain with a strongly non-normal part 1.

    Part 1 (70 % of the states) is ``diag(lambda) + alpha * triu(N(0, 1), 1) / sqrt(n1)``,
    driven at its last state and read at its first; part 2 is driven only by the first
    state of part 1 (the end of the chain), part 3 feeds only the last state of part 1
    (the start of the chain) and is not read directly; parts 2-4 share the remaining
    states at random.

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int, optional
        Number of states; drawn from ``SIZE_RANGES["chain"]`` when omitted.
    discrete : bool, optional
        Discrete time (diagonal in -0.9..0.9) or continuous (-2..-0.1); a coin when omitted.
    cond : float, optional
        Condition number of the hiding ``T`` (as for :func:`general`).
    alpha : float, optional
        Off-diagonal strength; 1, 3 or 10 when omitted.

    Returns
    -------
    KnownModel
    """
    lo, hi = SIZE_RANGES["chain"]
    n = int(rng.integers(lo, hi + 1)) if n is None else int(n)
    discrete = bool(rng.integers(2)) if discrete is None else bool(discrete)
    cond = _draw_condition(rng) if cond is None else float(cond)
    alpha = float(rng.choice([1.0, 3.0, 10.0])) if alpha is None else float(alpha)
    rest = n - round(0.7 * n)
    n1 = n - rest
    w = rng.multinomial(rest, [1 / 3] * 3)
    sizes = Sizes(n1, int(w[0]), int(w[1]), int(w[2]))
    lam = rng.uniform(-0.9, 0.9, n1) if discrete else -rng.uniform(0.1, 2.0, n1)
    A11 = np.diag(lam) + alpha * np.triu(rng.standard_normal((n1, n1)), 1) / math.sqrt(n1)
    blocks = [A11] + [_stable_block(k, rng, discrete) for k in sizes[1:]]
    Az, Bz, Cz = _assemble(blocks, sizes, 1, 1, _gaussian(rng), 1.0 / math.sqrt(n))
    bl = _slices(sizes)
    first, last = bl[0].start, bl[0].stop - 1
    Bz[bl[0], 0] = 0.0
    Bz[last, 0] = 1.0
    Cz[0, bl[0]] = 0.0
    Cz[0, first] = 1.0
    Bz[bl[1], :] = 0.0
    Az[bl[1], bl[0]] = 0.0
    Az[bl[1], first] = rng.standard_normal(sizes[1])
    Cz[:, bl[2]] = 0.0
    Az[bl[0], bl[2]] = 0.0
    Az[last, bl[2]] = rng.standard_normal(sizes[2])
    eigs = _block_eigs(Az, sizes)
    eigs[0] = lam.astype(complex)          # exact: part 1 is triangular
    return _finish("chain", f"alpha={alpha:g}", Az, Bz, Cz, sizes, eigs,
                   _sample_time(rng, discrete), rng, cond=cond)


def near_cancellation(rng: np.random.Generator, n: int | None = None, *,
                      delta: float | None = None, side: str | None = None,
                      discrete: bool | None = None, cond: float | None = None,
                      max_tries: int = 20) -> KnownModel:
    """A four-part model with one weakly controllable or weakly observable real mode.

    The weak mode ``x_w`` (eigenvalue ``lambda_w``, kept 0.05 away from the others) is built
    so that it sits in part 1 when its coupling ``delta`` counts and in part 3
    (``side="controllability"``: ``x_w`` is driven by nothing but ``delta`` times an input,
    feeds parts 1-2 and is read) or part 2 (``side="observability"``: driven by an input and
    by parts 1 and 3, feeds part 2 only, read with weight ``delta``) when it does not.  So
    :attr:`KnownModel.sizes` has the mode kept and :attr:`KnownModel.alternative_sizes` has
    it removed; which of the two is right follows from the *measured* coupling (see the
    module docstring).  The rest of the model is redrawn until its structural margin is at
    least :data:`REAL_COUPLING`, so the mode is the only ambiguity.

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int, optional
        Number of states including the weak mode; from ``SIZE_RANGES["near_cancellation"]``.
    delta : float, optional
        Nominal relative coupling; log-uniform in 1e-13..1e-4 when omitted.
    side : {"controllability", "observability"}, optional
        Which coupling is weak; a coin when omitted.
    discrete : bool, optional
    cond : float, optional
        Condition number of the hiding ``T``: 1 or log-uniform 1e1..1e2 when omitted.
    max_tries : int
        Redraws allowed for the structural margin.

    Returns
    -------
    KnownModel
    """
    lo, hi = SIZE_RANGES["near_cancellation"]
    n = int(rng.integers(lo, hi + 1)) if n is None else int(n)
    if n < 2:
        raise ValueError("near_cancellation needs at least 2 states")
    m, p = int(rng.integers(1, 4)), int(rng.integers(1, 4))
    side = str(rng.choice(["controllability", "observability"])) if side is None else side
    if side not in ("controllability", "observability"):
        raise ValueError(f"side must be 'controllability' or 'observability', got {side!r}")
    delta = float(10.0 ** rng.uniform(-13.0, -4.0)) if delta is None else float(delta)
    discrete = bool(rng.integers(2)) if discrete is None else bool(discrete)
    cond = _draw_condition(rng, high=1e2) if cond is None else float(cond)
    dt = _sample_time(rng, discrete)
    for _ in range(max_tries):
        base = _draw_sizes(n - 1, rng)
        n1, n2, n3, n4 = base
        if side == "controllability":
            alt = Sizes(n1, n2, n3 + 1, n4)      # x_w first state of part 3
        else:
            alt = Sizes(n1, n2 + 1, n3, n4)      # x_w last state of part 2
        w = n1 + n2
        blocks = [_stable_block(k, rng, discrete) for k in alt]
        Az, Bz, Cz = _assemble(blocks, alt, m, p, _gaussian(rng), 1.0 / math.sqrt(n))
        bl = _slices(alt)
        # lambda_w is an exact eigenvalue once row w is emptied below; the others are
        # those of the model without x_w.
        others = np.linalg.eigvals(np.delete(np.delete(Az, w, axis=0), w, axis=1))
        lam_w = 0.0
        for _ in range(50):
            lam_w = rng.uniform(-0.8, 0.8) if discrete else -rng.uniform(0.2, 2.0)
            if others.size == 0 or np.min(np.abs(others - lam_w)) > 0.05:
                break
        if side == "controllability":
            Az[w, :] = 0.0                       # driven by nothing ...
            Az[bl[2], w] = 0.0                   # ... feeds parts 1-2 only
            Az[bl[3], w] = 0.0
            Az[w, w] = lam_w
            u = rng.standard_normal(m)
            Bz[w, :] = delta * (u / np.linalg.norm(u)) * np.linalg.norm(Bz, axis=0)
        else:
            Az[w, bl[1]] = 0.0                   # driven by parts 1 and 3 (and inputs);
            Az[w, bl[3]] = 0.0                   # feeds part 2 only (the form's zeros)
            Az[w, w] = lam_w
            u = rng.standard_normal(p)
            Cz[:, w] = delta * (u / np.linalg.norm(u)) * np.linalg.norm(Cz, axis=1)
        eigs = _block_eigs(Az, alt)
        A, B, C, T, Ti = _hide_float(Az, Bz, Cz, cond, rng)
        margin = _structure_margin(A, B, C, T, Ti, alt, eigs)
        if margin >= REAL_COUPLING:
            break
    else:
        raise RuntimeError("near_cancellation: no draw with a clear structural margin")
    coupling = pbh_value(A, B, C, lam_w, side)
    kept = Sizes(n1 + 1, n2, n3, n4)
    rule = _coupling_rule(coupling)
    hiding = "orthogonal" if cond == 1.0 else f"cond {cond:.3g}"
    text = (f"near_cancellation/{side} n={n} kept sizes {tuple(kept)} (removed "
            f"{tuple(alt)}) m={m} p={p} {_time_word(dt)}, hidden by T ({hiding}); weak mode "
            f"{lam_w:.3g}, nominal coupling {delta:.2g}, measured {coupling:.2g}")
    return KnownModel(
        A=_freeze(A), B=_freeze(B), C=_freeze(C), dt=dt, sizes=kept, minimal_order=kept[0],
        family="near_cancellation", description=text, hiding_condition=float(cond),
        ambiguous=rule == "if_fragile", alternative_sizes=alt, alternative_rule=rule,
        coupling=float(coupling), margin=float(margin), exact=False, variant=side)


def _repeated_sizes(n: int, rng) -> Sizes:
    """Sizes adding to n with part 1 of 2..8 states and the others up to 8."""
    while True:
        n1 = int(rng.integers(2, 9))
        rest = rng.multinomial(n - n1, rng.dirichlet(np.ones(3)))
        if max(rest) <= 8:
            return Sizes(n1, int(rest[0]), int(rest[1]), int(rest[2]))


def repeated(rng: np.random.Generator, n: int | None = None, *, variant: str | None = None,
             discrete: bool | None = None, cond: float | None = None,
             exact: bool | None = None) -> KnownModel:
    """A four-part model whose parts share (often defective) eigenvalues.

    Variants:

    * ``"shared_defective"``: every diagonal block is ``lambda0 I`` plus a random strictly
      upper triangle (weight 2), so all n eigenvalues equal ``lambda0`` (-1 in continuous
      time; 0 or 1/2 in discrete time), each part a defective block;
    * ``"identical"``: one random block ``M`` (3-5 states) placed in two to four of the
      parts (identical subsystems); the other parts get their own random blocks;
    * ``"split_jordan"``: every part a Jordan block of ``lambda0``, chained across the parts
      by unit couplings the form allows (part 3 -> part 1 -> part 2, part 3 -> part 4 ->
      part 2), plus random couplings.

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int, optional
        Number of states; from ``SIZE_RANGES["repeated"]`` when omitted (``identical`` may
        end up a few states off so that the shared block fits).
    variant : str, optional
        One of the above; drawn when omitted.
    discrete : bool, optional
    cond : float, optional
        Condition number of the hiding ``T`` (as for :func:`general`).
    exact : bool, optional
        Dyadic construction and hiding (n <= 14); a coin for n <= 14 when omitted.

    Returns
    -------
    KnownModel
    """
    lo, hi = SIZE_RANGES["repeated"]
    n = int(rng.integers(lo, hi + 1)) if n is None else int(n)
    variant = (str(rng.choice(["shared_defective", "identical", "split_jordan"]))
               if variant is None else variant)
    discrete = bool(rng.integers(2)) if discrete is None else bool(discrete)
    cond = _draw_condition(rng) if cond is None else float(cond)
    m, p = int(rng.integers(1, 4)), int(rng.integers(1, 4))
    dt = _sample_time(rng, discrete)
    lam0 = float(rng.choice([0.0, 0.5])) if discrete else -1.0

    if variant == "identical":
        k = int(rng.integers(3, 6))
        shared = sorted(rng.choice(4, size=int(rng.integers(2, 5)), replace=False).tolist())
        if 0 not in shared and rng.uniform() < 0.5:
            shared[0] = 0
        room = max(n - k * len(shared), 0)
        free = [i for i in range(4) if i not in shared]
        sz = [k if i in shared else 0 for i in range(4)]
        if free:
            split = rng.multinomial(room, np.ones(len(free)) / len(free))
            for i, c in zip(free, split):
                sz[i] = int(c)
        if sz[0] == 0:
            sz[0] = 2
        sizes = Sizes(*sz)
        n = sum(sizes)
    elif variant in ("shared_defective", "split_jordan"):
        sizes = _repeated_sizes(n, rng)
    else:
        raise ValueError(f"unknown repeated variant {variant!r}")

    exact = _want_exact(exact, n, rng)
    sample = _dyadic(rng) if exact else _gaussian(rng)
    coupling = _pow2(1.0 / math.sqrt(n)) if exact else 1.0 / math.sqrt(n)

    def upper(k, weight):
        if k == 0:
            return np.zeros((0, 0))
        w = _pow2(weight / math.sqrt(k)) if exact else weight / math.sqrt(k)
        return lam0 * np.eye(k) + w * np.triu(sample((k, k)), 1)

    if variant == "shared_defective":
        blocks = [upper(k, 2.0) for k in sizes]
        Az, Bz, Cz = _assemble(blocks, sizes, m, p, sample, coupling)
        eigs = [np.full(k, lam0, dtype=complex) for k in sizes]
        note = f"every eigenvalue {lam0:g}, defective blocks"
    elif variant == "identical":
        if exact:
            M = _dyadic_block(k, sample, discrete)
        else:
            M = _stable_block(k, rng, discrete)
        blocks = [M if i in shared else
                  (_dyadic_block(sizes[i], sample, discrete) if exact
                   else _stable_block(sizes[i], rng, discrete)) for i in range(4)]
        Az, Bz, Cz = _assemble(blocks, sizes, m, p, sample, coupling)
        eigs = _block_eigs(Az, sizes)
        note = f"identical {k}-state block in parts {[i + 1 for i in shared]}"
    else:
        blocks = [lam0 * np.eye(k) + np.eye(k, k=1) for k in sizes]
        Az, Bz, Cz = _assemble(blocks, sizes, m, p, sample, 0.5 * coupling)
        bl = _slices(sizes)

        def link(dst, src):     # the last state of part dst is fed by the first of part src
            if sizes[dst] and sizes[src]:
                Az[bl[dst].stop - 1, bl[src].start] = 1.0

        link(0, 2)
        link(1, 0)
        link(3, 2)
        link(1, 3)
        eigs = [np.full(k, lam0, dtype=complex) for k in sizes]
        note = f"Jordan blocks of {lam0:g} chained across the parts"
    cond = float(2 ** _exponent_for(cond)) if exact else cond
    return _finish("repeated", variant, Az, Bz, Cz, sizes, eigs, dt, rng, cond=cond,
                   exponent=_exponent_for(cond) if exact else None, description=note)


def large(rng: np.random.Generator, n: int | None = None, *, m: int | None = None,
          p: int | None = None, discrete: bool | None = None,
          cond: float | None = None) -> KnownModel:
    """A large random four-part model (parts about 40/15/15/30 % of the states).

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int, optional
        Number of states; one of :data:`LARGE_SIZES` when omitted.
    m, p : int, optional
        Inputs and outputs; 1-4 each when omitted.
    discrete : bool, optional
    cond : float, optional
        Condition number of the hiding ``T`` (as for :func:`general`).

    Returns
    -------
    KnownModel
        Its ``margin`` is measured only up to :data:`MARGIN_MAX_STATES` states.
    """
    n = int(rng.choice(LARGE_SIZES)) if n is None else int(n)
    m = int(rng.integers(1, 5)) if m is None else int(m)
    p = int(rng.integers(1, 5)) if p is None else int(p)
    discrete = bool(rng.integers(2)) if discrete is None else bool(discrete)
    cond = _draw_condition(rng) if cond is None else float(cond)
    w = rng.dirichlet(40.0 * np.array([0.4, 0.15, 0.15, 0.3]))
    extra = rng.multinomial(n - 1, w)
    sizes = Sizes(int(extra[0]) + 1, int(extra[1]), int(extra[2]), int(extra[3]))
    blocks = [_stable_block(k, rng, discrete) for k in sizes]
    Az, Bz, Cz = _assemble(blocks, sizes, m, p, _gaussian(rng), 1.0 / math.sqrt(n))
    return _finish("large", f"n={n}", Az, Bz, Cz, sizes, _block_eigs(Az, sizes),
                   _sample_time(rng, discrete), rng, cond=cond)


#: family name -> generator ``f(rng, n=None, **options) -> KnownModel``.
GENERATORS: dict[str, Callable[..., KnownModel]] = {
    "general": general,
    "scaled": scaled,
    "chain": chain,
    "near_cancellation": near_cancellation,
    "repeated": repeated,
    "large": large,
}


def _seed_tuple(seed) -> tuple:
    if isinstance(seed, (int, np.integer)):
        return (int(seed),)
    return tuple(int(s) for s in seed)


def draw(family: str, seed, **options) -> KnownModel:
    """One model of a family, reproducible from ``(family, seed, options)``.

    Parameters
    ----------
    family : str
        One of :data:`FAMILIES`.
    seed : int or sequence of int
        Seed; the family's index is mixed in, so the same seed gives independent models
        in different families.
    **options
        Passed to the family's generator (e.g. ``n=``).

    Returns
    -------
    KnownModel
        With ``seed`` recorded.
    """
    if family not in GENERATORS:
        raise ValueError(f"unknown family {family!r}; choose one of {', '.join(FAMILIES)}")
    seed = _seed_tuple(seed)
    rng = np.random.default_rng((FAMILIES.index(family) + 1, *seed))
    return dataclasses.replace(GENERATORS[family](rng, **options), seed=seed)


def draw_many(family: str, count: int, seed, **options) -> list[KnownModel]:
    """``count`` models of a family: ``[draw(family, (*seed, i), **options) for i ...]``.

    Parameters
    ----------
    family : str
    count : int
    seed : int or sequence of int
    **options
        Passed to the generator.

    Returns
    -------
    list of KnownModel
        Model ``i`` is also ``draw(family, (*seed, i), **options)``.
    """
    base = _seed_tuple(seed)
    return [draw(family, base + (i,), **options) for i in range(int(count))]


# ----------------------------------------------------------------------------------------
# Exact confirmation
# ----------------------------------------------------------------------------------------

def _domain_matrix(X: np.ndarray):
    from sympy import QQ
    from sympy.polys.matrices import DomainMatrix

    X = np.asarray(X, dtype=float)
    rows = [[QQ(*Fraction(float(x)).as_integer_ratio()) for x in row] for row in X.tolist()]
    return DomainMatrix(rows, X.shape, QQ)


def exact_sizes(model, max_states: int = EXACT_MAX_STATES) -> Sizes:
    """The four part sizes of a model in exact rational arithmetic (sympy).

    Every double is a rational number, so the model's entries are converted exactly
    (``Fraction(x)``) to sympy's rational field ``QQ`` and then, with no rounding at all,

    * ``rc = rank K``, ``K = [B, AB, ..., A^(n-1) B]``: the controllable dimension
      ``n1 + n2``;
    * ``ro = rank O``, ``O = [C; CA; ...; CA^(n-1)]``: the observable dimension ``n1 + n3``;
    * ``n1 = rank(O K)``: ``O K`` is the block Hankel matrix of the Markov parameters, and
      its rank is the minimal order.  (Equivalently ``dim(R ∩ N) = rank K - rank(O K)``:
      ``O`` restricted to the controllable subspace ``R = range K`` has kernel ``R ∩ N``.)

    so ``n2 = rc - n1``, ``n3 = ro - n1`` and ``n4 = n - n1 - n2 - n3``.  Krylov matrices
    are unusable in floating point but exact here.

    Parameters
    ----------
    model : KnownModel, object with ``A``, ``B``, ``C`` attributes, or tuple (A, B, C)
    max_states : int
        Refuse larger models (the cost grows quickly with the size of the rationals).

    Returns
    -------
    Sizes

    Notes
    -----
    For a :class:`KnownModel` with ``exact=True`` the result must equal ``model.sizes``.
    On a float-hidden model it gives the exact sizes of the rounded data, which are
    generically those of a minimal model and not the constructed ones.
    """
    if isinstance(model, tuple):
        A, B, C = model[:3]
    else:
        A, B, C = model.A, model.B, model.C
    A = np.asarray(A, dtype=float)
    n = A.shape[0]
    if n > max_states:
        raise ValueError(f"exact_sizes is limited to {max_states} states, got {n}")
    if n == 0:
        return Sizes(0, 0, 0, 0)
    Aq, Bq, Cq = _domain_matrix(A), _domain_matrix(B), _domain_matrix(C)
    ks, os_ = [Bq], [Cq]
    for _ in range(n - 1):
        ks.append(Aq * ks[-1])
        os_.append(os_[-1] * Aq)
    K = ks[0].hstack(*ks[1:])
    O = os_[0].vstack(*os_[1:])
    rc, ro = K.rank(), O.rank()
    n1 = (O * K).rank()
    n2, n3 = rc - n1, ro - n1
    return Sizes(int(n1), int(n2), int(n3), int(n - n1 - n2 - n3))
