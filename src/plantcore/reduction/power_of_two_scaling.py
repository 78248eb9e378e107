"""Exact power-of-two rescaling of a whole model, so that the norms work on data of unit size.

The peak gain, the H2 norm and the Hankel singular values follow simple laws under three
scalings of a model (the time unit in continuous time, the input unit and the output
unit).  With ``A' = A / a``, ``B' = B / (a b)``, ``C' = C / c`` and ``D' = D / (b c)``
(``a = 1`` in discrete time) the transfer matrix is ``G'(s) = G(a s) / (b c)``, hence

* peak gain:        ``||G||_inf = b c ||G'||_inf``, at the frequency ``a w'``;
* H2 norm:          ``||G||_2 = b c sqrt(a) ||G'||_2`` (continuous time), ``b c ||G'||_2``
  (discrete time);
* Hankel singular values: ``sigma_i(G) = b c sigma_i(G')`` (the Hankel operator does not
  see the time unit).

When ``a``, ``b`` and ``c`` are powers of two the rescaled model carries exactly the digits
of the original one, so every result computed on it is the one computed on the original,
multiplied back exactly; only the squares and sums of squares inside the algorithms no
longer overflow (above about ``1e154``) or underflow (below about ``1e-154``).  This is the
scaling argument of the balancing literature (B. N. Parlett and C. Reinsch, "Balancing a
matrix for calculation of eigenvalues and eigenvectors", Numerische Mathematik 13, 1969:
powers of the radix change no digit), applied to the time and the signal units of the model.

Models whose norms all lie within ``2^-BAND .. 2^BAND`` are left as they are (the scaling is
the identity), so the results on ordinary models are bit for bit those computed before and
shared Schur forms stay shared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from plantcore.core.model import StateSpaceModel
from plantcore.core.safe_norms import frobenius

__all__ = ["BAND", "ModelScaling", "model_scaling"]

#: Norms of ``A``, ``B``, ``C``, ``D`` (and of the gain ``||B|| ||C||``) within
#: ``2^-BAND .. 2^BAND`` (about ``1e-30 .. 1e30``) need no rescaling: their squares, products
#: and sums stay far from the ends of the double range.
BAND = 100


def _exponent(x: float):
    """``e`` with ``x = f 2^e``, ``0.5 <= f < 1``; None for 0 (or a non-finite value)."""
    return math.frexp(x)[1] if x > 0.0 and math.isfinite(x) else None


def _scaled(x: float, power: int) -> float:
    """``x * 2^power`` as a float, ``inf`` (or 0) beyond the double range, without a warning."""
    if x == 0.0 or not math.isfinite(x):
        return x
    try:
        return math.ldexp(x, power)
    except OverflowError:
        return math.copysign(math.inf, x)


@dataclass(frozen=True)
class ModelScaling:
    """Exponents of the exact rescaling ``A' = A 2^-t``, ``B' = B 2^-(t+i)``, ``C' = C 2^-o``,
    ``D' = D 2^-(i+o)``.

    Attributes
    ----------
    time, inputs, outputs : int
        The exponents ``t`` (an even number, 0 in discrete time), ``i`` and ``o``.  ``i + o``
        and ``t`` are even, so ``sqrt(2^t)`` and the balanced-coordinate factor
        ``2^((t + i + o) / 2)`` are exact.
    """

    time: int = 0
    inputs: int = 0
    outputs: int = 0

    @property
    def is_identity(self) -> bool:
        return self.time == 0 and self.inputs == 0 and self.outputs == 0

    @property
    def gain(self) -> int:
        """The exponent ``i + o`` by which gains (peak gain, Hankel values) are multiplied back."""
        return self.inputs + self.outputs

    def apply(self, model: StateSpaceModel) -> StateSpaceModel:
        """The rescaled model (the same names, time domain and, when identity, the same object)."""
        if self.is_identity:
            return model
        t, i, o = self.time, self.inputs, self.outputs
        return model.replace(A=np.ldexp(model.A, -t), B=np.ldexp(model.B, -(t + i)),
                             C=np.ldexp(model.C, -o), D=np.ldexp(model.D, -(i + o)))

    def restore_gain(self, value: float) -> float:
        """A gain of the rescaled model (peak gain, Hankel value, error bound) in the original units."""
        return _scaled(float(value), self.gain)

    def restore_gains(self, values: np.ndarray) -> np.ndarray:
        """:meth:`restore_gain` of every entry (``inf`` beyond the double range)."""
        with np.errstate(over="ignore"):
            return np.ldexp(np.asarray(values, dtype=float), self.gain)

    def restore_frequency(self, w: float) -> float:
        """A frequency of the rescaled model (rad per time unit) in the original time unit."""
        return _scaled(float(w), self.time)

    def restore_h2(self, value: float) -> float:
        """An H2 norm of the rescaled model in the original units (``b c sqrt(a)``)."""
        return _scaled(float(value), self.gain + self.time // 2)

    def restore_balanced(self, model: StateSpaceModel, D) -> StateSpaceModel:
        """A reduced model computed on the rescaled data, back in the original units.

        ``A_r 2^t``, ``B_r 2^k``, ``C_r 2^k`` with ``k = (t + i + o) / 2``: the same transfer
        matrix as the plain inverse scaling (``B_r 2^(t+i)``, ``C_r 2^o``) after the scalar
        state scaling ``2^((t + i - o) / 2)``, which keeps a balanced realization balanced
        (both Gramians become ``2^(i+o)`` times those of the rescaled one).  ``D`` is the
        original feedthrough, given as it was.
        """
        if self.is_identity:
            return model
        k = (self.time + self.gain) // 2
        with np.errstate(over="ignore"):
            return model.replace(A=np.ldexp(model.A, self.time), B=np.ldexp(model.B, k),
                                 C=np.ldexp(model.C, k), D=D)


def model_scaling(model: StateSpaceModel, *, band: int = BAND) -> ModelScaling:
    """The exact rescaling that brings ``||A||`` (continuous time), ``||B|| ||C||`` or ``||D||``
    (the larger) and the balance of ``||B||`` and ``||C||`` to about 1; the identity when
    every norm already lies within ``2^-band .. 2^band``.

    In continuous time ``t`` is the exponent of ``||A||_F`` rounded to an even number (so the
    H2 norm's ``sqrt(2^t)`` is exact).  After it, with ``e_b``, ``e_c``, ``e_d`` the
    exponents of ``||B'||``, ``||C||`` and ``||D||``, the gain exponent is
    ``g = max(e_b + e_c, e_d)`` rounded up to even, ``i = (g + e_b - e_c) / 2`` and ``o = g - i``,
    so that ``||B'|| ~ ||C'|| ~ sqrt(||B|| ||C|| / 2^g) <= 1`` and ``||D'|| <= 1``.
    """
    norms = [frobenius(M) for M in (model.A, model.B, model.C, model.D)]
    exponents = [_exponent(x) for x in norms]
    gain = (exponents[1] + exponents[2]) if None not in exponents[1:3] else None
    checked = [e for e in exponents + [gain] if e is not None]
    if all(abs(e) <= band for e in checked):
        return ModelScaling()
    t = 0
    if not model.is_discrete and exponents[0] is not None:
        t = exponents[0] + (exponents[0] % 2)
    e_b = exponents[1] - t if exponents[1] is not None else None
    e_c, e_d = exponents[2], exponents[3]
    candidates = ([e_b + e_c] if e_b is not None and e_c is not None else []) \
        + ([e_d] if e_d is not None else [])
    if not candidates:
        return ModelScaling(t, 0, 0)
    g = max(candidates)
    g += g % 2
    if e_b is not None and e_c is not None:
        i = (g + e_b - e_c) // 2
    else:
        i = g // 2
    return ModelScaling(t, i, g - i)
