"""Modes that a reduction removes although they are not stable, and the warning naming them.

A minimal realization removes the uncontrollable and the unobservable parts of a model.  The
transfer function does not change, but a removed mode is still in the plant: when it is
unstable, or on the stability boundary (an integrator, an undamped oscillation), no
controller designed on the reduced model can stabilize (or regulate) the plant through it,
because the inputs cannot move it or the outputs cannot see it.  This is exactly the failure
of stabilizability or detectability (W. M. Wonham, *Linear Multivariable Control: a
Geometric Approach*, 1979, ch. 2-3), found at the moment the mode is discarded.

Stability is decided by the rule of :mod:`plantcore.structure.modes` and nothing else: the
same boundary tolerance ``δ``, the same clustering of repeated eigenvalues and the same
snapping of defective boundary eigenvalues onto the boundary, so a mode called marginal here
is marginal in the mode table too.

The warning (:class:`plantcore.HiddenModeWarning`) is issued to callers outside plantcore.
plantcore's own uses of a reduction (the minimal realization of a difference model inside the
equivalence certificate, norms computed on a minimal model, the report and the sweep) read
the result's ``removed_unstable_modes`` field and show it their own way instead.
"""

from __future__ import annotations

import sys
import warnings
from dataclasses import dataclass

import numpy as np

from plantcore.core.errors import HiddenModeWarning
from plantcore.core.safe_norms import frobenius
from plantcore.structure.kalman import PART_NAMES
from plantcore.structure.modes import (
    _CLUSTER_FACTOR,
    _boundary_delta,
    _clustered_eigenvalues,
    _snap_to_boundary,
    _stability,
)

__all__ = ["REMOVED_PARTS", "RemovedMode", "hidden_mode_message"]

#: The values of :attr:`RemovedMode.part`: the three Kalman parts a minimal realization
#: removes, ``"uncontrollable"`` when the decomposition that would tell parts 3 and 4 apart
#: could not be made consistently with the minimal realization, and ``"truncated"`` for a
#: mode discarded by a balanced truncation.
REMOVED_PARTS = PART_NAMES[1:] + ("uncontrollable", "truncated")

_PART_WORDS = {
    "controllable_unobservable": "the unobservable part: the outputs cannot see it",
    "uncontrollable_observable": "the uncontrollable part: the inputs cannot move it",
    "uncontrollable_unobservable": "the uncontrollable and unobservable part: the inputs "
                                   "cannot move it and the outputs cannot see it",
    "uncontrollable": "the uncontrollable part: the inputs cannot move it",
    "truncated": "the truncated part",
}


@dataclass(frozen=True)
class RemovedMode:
    """A mode that a reduction removed although it is not stable.

    Attributes
    ----------
    value : complex
        The eigenvalue (``s``-plane in continuous time, ``z``-plane in discrete time), as
        the mode table of :func:`plantcore.classify_modes` reports it.
    part : str
        Where it was: one of :data:`REMOVED_PARTS` (``"controllable_unobservable"``,
        ``"uncontrollable_observable"``, ``"uncontrollable_unobservable"``,
        ``"uncontrollable"`` or ``"truncated"``).
    unstable : bool
        True when the mode is strictly unstable (``Re λ > δ``, or ``|λ| > 1 + δ``).
    marginal : bool
        True when the mode is on the stability boundary within ``δ`` (the tolerance of
        :mod:`plantcore.structure.modes`).  Exactly one of ``unstable`` and ``marginal``
        is True.
    """

    value: complex
    part: str
    unstable: bool
    marginal: bool

    def describe(self) -> str:
        """The mode in words, e.g. ``"0.5 (unstable, in the uncontrollable part: ...)"``."""
        kind = "unstable" if self.unstable else "on the stability boundary"
        return f"{_value_text(self.value)} ({kind}, in {_PART_WORDS[self.part]})"

    def to_dict(self) -> dict:
        """JSON-safe dictionary (the value as ``[re, im]``)."""
        return {"value": [float(self.value.real), float(self.value.imag)], "part": self.part,
                "unstable": bool(self.unstable), "marginal": bool(self.marginal)}


def _value_text(value: complex) -> str:
    value = complex(value)
    re = 0.0 if value.real == 0 else value.real     # no "-0"
    if value.imag == 0:
        return f"{re:.4g}"
    return f"{re:.4g} ± {abs(value.imag):.4g}j"


def removed_from_modes(modes) -> tuple:
    """The modes of a mode table that lie outside part 1 and are not stable (internal)."""
    return tuple(RemovedMode(complex(m.value), m.part, not m.marginal, bool(m.marginal))
                 for m in modes if m.part != PART_NAMES[0] and not m.stable)


def removed_from_blocks(blocks, norm_A: float, discrete: bool) -> tuple:
    """The modes that are not stable among removed diagonal blocks (internal).

    ``blocks`` is a sequence of ``(part, block)``: each block is the restriction of the
    equilibrated state matrix (Frobenius norm ``norm_A``) to one removed part, in an
    orthonormal (or at least exact) basis.  Eigenvalues are clustered, snapped onto the
    boundary and classified exactly as :func:`plantcore.classify_modes` does it.
    """
    delta = _boundary_delta(norm_A, discrete)
    found = []
    for part, block in blocks:
        if block.shape[0] == 0:
            continue
        values = _clustered_eigenvalues(block, _CLUSTER_FACTOR * norm_A)
        values = _snap_to_boundary(block, values, delta, norm_A, discrete)
        for lam in values:
            stable, marginal = _stability(complex(lam), delta, discrete)
            if not stable:
                found.append(RemovedMode(complex(lam), part, not marginal, bool(marginal)))
    return tuple(found)


def removed_from_decomposition(kd, p) -> tuple:
    """The modes that are not stable in parts 2 to 4 of a Kalman decomposition (internal).

    ``p`` is the prepared (equilibrated) model the decomposition was made from; each part's
    block is taken in equilibrated coordinates, as the mode table takes it.
    """
    T_e = kd.T / p.s[:, None]
    Ti_e = kd.T_inv * p.s[None, :]
    cuts = np.cumsum((0,) + tuple(kd.sizes))
    blocks = []
    for i, name in enumerate(PART_NAMES[1:], start=1):
        sl = slice(cuts[i], cuts[i + 1])
        blocks.append((name, (Ti_e[sl, :] @ p.A) @ T_e[:, sl]))
    return removed_from_blocks(blocks, float(frobenius(p.A)), p.model.is_discrete)


def hidden_mode_message(removed, action: str) -> str:
    """The sentence that names removed modes and what they mean for a design.

    Parameters
    ----------
    removed : sequence of RemovedMode
    action : str
        What removed them, as the subject of the sentence (``"the minimal realization"``).

    Returns
    -------
    str
        One paragraph (no line breaks); ``""`` when ``removed`` is empty.  Of a complex
        conjugate pair only the member with positive imaginary part is written, as
        ``a ± bj``.

    Examples
    --------
    >>> mode = RemovedMode(0.5 + 0j, "uncontrollable_observable", True, False)
    >>> print(hidden_mode_message([mode], "the minimal realization"))  # doctest: +ELLIPSIS
    the minimal realization removed 1 mode that is not stable: 0.5 (unstable, in the ...
    """
    if not removed:
        return ""
    shown = [m.describe() for m in removed if m.value.imag >= 0]
    count = len(removed)
    noun = "mode that is" if count == 1 else "modes that are"
    it = "it" if count == 1 else "them"
    consequences = []
    if any(m.unstable for m in removed):
        consequences.append("stabilize the plant through an unstable removed mode")
    if any(m.marginal for m in removed):
        consequences.append("regulate the plant through a removed mode on the stability "
                            "boundary (it neither decays nor can be made to)")
    return (f"{action} removed {count} {noun} not stable: {'; '.join(shown)}. The "
            "input-output behaviour is unchanged, but no controller designed on the reduced "
            f"model can {' or '.join(consequences)}. Deal with {it} before design (an "
            f"actuator or sensor that reaches {it}, or a separate model of that part), and "
            "validate against the full model.")


def _caller_outside_plantcore(depth: int) -> bool:
    """True when the frame ``depth`` levels above the caller of this function is not
    plantcore's own code."""
    try:
        frame = sys._getframe(depth + 1)
    except ValueError:   # pragma: no cover - a call stack shallower than asked
        return True
    name = frame.f_globals.get("__name__", "") or ""
    return not (name == "plantcore" or name.startswith("plantcore."))


def warn_hidden_modes(removed, action: str, *, stacklevel: int) -> None:
    """Issue :class:`plantcore.HiddenModeWarning` for ``removed`` (internal).

    ``stacklevel`` counts as for :func:`warnings.warn` from the caller of this function: 2
    names the line that called the public function.  Nothing is issued when ``removed`` is
    empty or when that line is plantcore's own code (it reads the result's field).
    """
    if removed and _caller_outside_plantcore(stacklevel):
        warnings.warn(hidden_mode_message(removed, action), HiddenModeWarning,
                      stacklevel=stacklevel + 1)
