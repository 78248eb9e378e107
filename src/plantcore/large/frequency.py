"""Frequency responses of sparse models by sparse LU solves, and the peak of an error.

``G(s) = C (s I - A)^{-1} B + D`` costs one sparse LU of ``s I - A`` per frequency; nothing
of size ``n x n`` is formed densely.  Frequencies are in rad/s (continuous time, ``s = jω``)
or rad/sample (discrete time, ``z = e^{jθ}``, ``0 <= θ <= π``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.model import StateSpaceModel

__all__ = ["PeakErrorEstimate", "estimate_peak_error", "frequency_response"]


def _point(model: StateSpaceModel, w: float) -> complex:
    return complex(math.cos(w), math.sin(w)) if model.is_discrete else complex(0.0, w)


def frequency_response(model: StateSpaceModel, frequencies) -> np.ndarray:
    """``G`` at each frequency, a complex ``(k, p, m)`` array (sparse solves for sparse A)."""
    return np.array([model.transfer_at(_point(model, float(w))) for w in frequencies])


def _largest_singular_value(M: np.ndarray) -> float:
    return float(np.linalg.svd(M, compute_uv=False)[0]) if M.size else 0.0


@dataclass(frozen=True)
class PeakErrorEstimate:
    """The measured peak of ``σ_max(G(jω) - G_r(jω))`` at the frequencies tried.

    Attributes
    ----------
    value : float
        The largest error found; a lower bound of the true peak (the peak may lie between
        the frequencies tried).
    frequency : float
        Where it was found (rad/s, or rad/sample in discrete time).
    frequencies, errors : (k,) ndarray
        Every frequency tried, ascending, and the error there.
    """

    value: float
    frequency: float
    frequencies: np.ndarray = field(repr=False)
    errors: np.ndarray = field(repr=False)

    @property
    def evaluations(self) -> int:
        """Number of sparse solves of the full model spent."""
        return int(self.frequencies.size)


def _candidates(reduced: StateSpaceModel, count: int) -> np.ndarray:
    """A log grid over the reduced model's pole magnitudes, its resonances, and zero."""
    poles = np.linalg.eigvals(reduced.A) if reduced.n else np.zeros(0)
    if reduced.is_discrete:
        with np.errstate(divide="ignore"):
            angles = np.abs(np.angle(poles[np.abs(poles) > 0]))
        grid = np.linspace(0.0, math.pi, count)
        return np.unique(np.concatenate([grid, angles[angles > 0]]))
    magnitude = np.abs(poles[np.abs(poles) > 0])
    low = magnitude.min() / 10.0 if magnitude.size else 1e-3
    high = magnitude.max() * 10.0 if magnitude.size else 1e3
    grid = np.geomspace(low, high, count)
    resonant = np.abs(poles.imag[np.abs(poles.imag) > 0.1 * np.abs(poles.real)])
    return np.unique(np.concatenate([[0.0], grid, resonant]))


def estimate_peak_error(full: StateSpaceModel, reduced: StateSpaceModel, *, grid: int = 24,
                        refinements: int = 8, progress=None) -> PeakErrorEstimate:
    """Peak error of a reduced model, by sparse solves of the full model at adaptive frequencies.

    The error ``σ_max(G - G_r)`` is measured on a logarithmic grid of ``grid`` frequencies
    spanning the reduced model's pole magnitudes (a decade beyond each end), at the
    reduced model's resonances and at zero; then around the two largest local maxima,
    golden-section steps in log-frequency (``refinements`` evaluations in all) move towards
    the peak.  Each evaluation is one sparse LU of the full model.  The result is a lower
    bound of the true peak; the balanced-truncation bound is the upper one.

    References
    ----------
    .. [1] J. Kiefer, "Sequential minimax search for a maximum", Proc. American
       Mathematical Society 4(3), 502-506, 1953 (golden-section search).
    """
    tried: dict[float, float] = {}

    def error(w: float) -> float:
        w = float(w)
        if w not in tried:
            point = _point(full, w)
            tried[w] = _largest_singular_value(full.transfer_at(point) - reduced.transfer_at(point))
            if progress is not None:
                progress(f"error check {len(tried)}: {tried[w]:.3e} at {w:.4g}")
        return tried[w]

    for w in _candidates(reduced, grid):
        error(w)
    budget = refinements
    ws = np.array(sorted(tried))
    es = np.array([tried[w] for w in ws])
    peaks = [i for i in range(ws.size)
             if es[i] >= (es[i - 1] if i else -1.0) and es[i] >= (es[i + 1] if i + 1 < ws.size else -1.0)]
    peaks = sorted(peaks, key=lambda i: -es[i])[:2]
    golden = (math.sqrt(5.0) - 1.0) / 2.0
    for i in peaks:
        lo, hi = ws[max(i - 1, 0)], ws[min(i + 1, ws.size - 1)]
        if hi <= lo:
            continue
        # search in log-frequency where both ends are positive, else linearly
        to_x = (lambda w: math.log(w)) if lo > 0 else (lambda w: w)
        to_w = (lambda x: math.exp(x)) if lo > 0 else (lambda x: x)
        a, b = to_x(lo), to_x(hi)
        steps = max(budget // max(len(peaks), 1), 0)
        for _ in range(steps // 2):
            c, d = b - golden * (b - a), a + golden * (b - a)
            if error(to_w(c)) >= error(to_w(d)):
                b = d
            else:
                a = c
    ws = np.array(sorted(tried))
    es = np.array([tried[w] for w in ws])
    k = int(np.argmax(es))
    return PeakErrorEstimate(float(es[k]), float(ws[k]), ws, es)
