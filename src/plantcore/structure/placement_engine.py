"""The engine of the placement suggestions (internal to :mod:`plantcore.structure.placement`).

A model with some columns added is kept as two quotients (orthonormal bases and the quotient
maps): what the columns cannot reach yet, and what they do not reach of the observable
quotient (its size is how many modes the minimal order lacks).  Adding a column is one small
orthogonal staircase on each (Van Dooren 1981), with the model's scale and tolerance, and the
PBH margins are measured on one Schur form of ``A`` shared by every candidate
(:class:`plantcore.structure.pbh_measures.PBHMeasures`), the margins without the column
serving as lower bounds so that only the modes that may still be the smallest are measured.
See :mod:`plantcore.structure.placement` for the method and its references.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.optimize import linear_sum_assignment

from plantcore.core.equilibration import io_scaled
from plantcore.structure.kalman import _prepare, kalman_decomposition
from plantcore.structure.modes import NARROW_MARGIN, Mode, _mode_table, _upper
from plantcore.structure.pbh_measures import PBHMeasures
from plantcore.structure.staircase_kernels import reduce_staircase

__all__ = ["CHUNK"]

CHUNK = 8

"""Modes measured per call while pruning (each call sets up the BLAS thread limit once)."""


# --- the engine ------------------------------------------------------------------------------

@dataclass
class _Quotient:
    """An orthonormal basis ``G`` (n x k) of the complement of an invariant subspace and the
    quotient map ``G^T A_c G`` (internal): what is left to restore."""

    G: np.ndarray
    A: np.ndarray

    def restore(self, cols, scale, tol, label):
        """(rank restored, the quotient that remains, the reduction) for added columns."""
        k = self.G.shape[1]
        if k == 0:
            return 0, self, None
        red = reduce_staircase(self.A, self.G.T @ cols, np.zeros((0, k)), scale=scale, tol=tol,
                               label=label)
        r = red.rank
        if r == 0:
            return 0, self, red
        rest = red.form_U()[:, r:]
        return r, _Quotient(self.G @ rest, np.array(red.A[r:, r:])), red


@dataclass
class _State:
    """The model with some columns added (internal): what the columns cannot reach yet
    (``missing``: the quotient by the controllable subspace) and what they do not reach of
    the observable quotient (``hidden``: its quotient by its controllable subspace, whose
    size is the number of modes short of the full minimal order)."""

    missing: _Quotient
    hidden: _Quotient
    extra: np.ndarray       # added columns, decision-scaled (n x k)
    lower: dict             # mode key -> margin (relative) with the added columns
    unc: tuple              # indices of the modes still uncontrollable
    minimal_order: int
    decisions: tuple = ()


@dataclass
class _Eval:
    """A candidate (or a set) added to a state (internal)."""

    restored: tuple
    remaining: tuple
    missing: _Quotient
    hidden: _Quotient
    margin: float
    goal_margin: float
    restored_margin: float
    deficient: int
    minimal_order: int
    decisions: tuple


def _split(span: np.ndarray, n: int):
    """Orthonormal bases of the span of the columns of ``span`` (full column rank) and of
    its orthogonal complement."""
    k = span.shape[1]
    if k == 0:
        return np.zeros((n, 0)), np.eye(n)
    Q = scipy.linalg.qr(span, mode="full")[0]
    return Q[:, :k], Q[:, k:]


class _Problem:
    """Everything shared by the candidates of one suggestion (internal)."""

    def __init__(self, model, kind, goal, target, tol):
        self.model, self.kind, self.goal, self.target = model, kind, goal, target
        self.kd = kalman_decomposition(model, tol)
        p = self.p = _prepare(model, tol)
        self.modes: list[Mode] = _mode_table(self.kd, p, NARROW_MARGIN)
        self.scale, self.tol, n = float(p.scale), p.tol, model.n
        self.side = "c" if kind == "actuator" else "o"
        self.measures = PBHMeasures(p.A)
        self.keys = [_upper(m.value) for m in self.modes]
        self.distinct = list(dict.fromkeys(self.keys))
        weak = (not m.stable for m in self.modes) if goal in ("stabilizable", "detectable") \
            else (True for _ in self.modes)
        self.goal_modes = frozenset(i for i, g in enumerate(weak) if g)
        self.goal_keys = frozenset(self.keys[i] for i in self.goal_modes)
        n1, n2, n3, _ = tuple(self.kd.sizes)
        T_e = self.kd.T / p.s[:, None]           # the parts' bases in equilibrated coordinates
        R, R_perp = _split(T_e[:, :n1 + n2], n)
        N, N_perp = _split(np.hstack([T_e[:, n1:n1 + n2], T_e[:, n1 + n2 + n3:]]), n)
        if kind == "actuator":
            self.A_c, self.existing = p.A, p.B_dec
            self.deficient = tuple(i for i, m in enumerate(self.modes) if not m.controllable)
            missing, seen, reached = R_perp, N_perp, R
        else:       # the dual (A^T, C^T, B^T): controllable subspace N^perp, unobservable R^perp
            self.A_c, self.existing = p.A.T, p.C_dec.T
            self.deficient = tuple(i for i, m in enumerate(self.modes) if not m.observable)
            missing, seen, reached = N, R, N_perp
        # the observable quotient (basis `seen`) modulo the image of the controllable
        # subspace, whose dimension is the minimal order n1 (decided by the decomposition)
        U = np.linalg.svd(seen.T @ reached)[0] if reached.shape[1] else np.eye(seen.shape[1])
        hidden = seen @ U[:, n1:]
        self.base_missing = _Quotient(missing, missing.T @ self.A_c @ missing)
        self.base_hidden = _Quotient(hidden, hidden.T @ self.A_c @ hidden)

    def decision_columns(self, vectors: np.ndarray) -> np.ndarray:
        """Candidate vectors (user units) in equilibrated coordinates, each scaled by a power
        of two to the model's size, as columns (rows of ``C`` transposed for sensors)."""
        p = self.p
        if self.kind == "actuator":
            return io_scaled(vectors / p.s[:, None], np.zeros((0, p.A.shape[0])), self.scale)[0]
        rows = io_scaled(np.zeros((p.A.shape[0], 0)), vectors.T * p.s[None, :], self.scale)[1]
        return rows.T

    def measure_matrix(self, extra: np.ndarray) -> np.ndarray:
        X = np.hstack([self.existing, extra])
        return np.ascontiguousarray(X if self.side == "c" else X.T)

    def measure(self, X, keys) -> dict:
        values = self.measures.smallest(X, list(keys), self.side) if keys else []
        return {k: float(v) / self.scale for k, v in zip(keys, values)}

    def initial(self) -> _State:
        extra = np.zeros((self.model.n, 0))
        lower = self.measure(self.measure_matrix(extra), self.distinct)
        return _State(self.base_missing, self.base_hidden, extra, lower, self.deficient,
                      int(self.kd.sizes[0]))

    def evaluate(self, state: _State, cols: np.ndarray, label: str, *, margins=True) -> _Eval:
        """What adding the decision-scaled columns ``cols`` to ``state`` restores and buys."""
        r, missing, red = state.missing.restore(cols, self.scale, self.tol,
                                                f"{label}: restored modes")
        decisions = () if red is None else tuple(red.decisions)
        restored, remaining = (), tuple(state.unc)
        if r:
            restored, remaining = self._match(red.A[:r, :r], state.unc)
        order, hidden = state.minimal_order, state.hidden
        if r:
            gained, hidden, red2 = hidden.restore(cols, self.scale, self.tol,
                                                  f"{label}: minimal order")
            order += gained
            decisions += () if red2 is None else tuple(red2.decisions)
        goal_left = sum(1 for i in remaining if i in self.goal_modes)
        if not margins:
            return _Eval(restored, remaining, missing, hidden, math.nan, math.nan, math.nan,
                         goal_left, order, decisions)
        X = self.measure_matrix(np.hstack([state.extra, cols]))
        # the modes not yet controllable, and with them the weakest others (one call)
        first = list(dict.fromkeys(self.keys[i] for i in state.unc))
        first += [k for k in sorted(self.distinct, key=state.lower.get)
                  if k not in first][:CHUNK // 2]
        got = self.measure(X, first)
        self._prune(X, got, state.lower)
        margin = min(got.values(), default=math.inf)
        goal_margin = min((v for k, v in got.items() if k in self.goal_keys), default=math.inf)
        restored_margin = min((got[self.keys[i]] for i in restored), default=math.inf)
        deficient = goal_left
        if self.target is not None:
            deficient += sum(1 for i in self.goal_modes if i not in remaining
                             and got.get(self.keys[i], math.inf) < self.target)
        return _Eval(restored, remaining, missing, hidden, margin, goal_margin,
                     restored_margin, deficient, order, decisions)

    def _prune(self, X, got: dict, lower: dict) -> None:
        """Measure every other mode whose old margin (a lower bound) could still be the
        smallest margin, the smallest goal margin, or below the target; fill ``got``."""
        rest = sorted((k for k in self.distinct if k not in got), key=lambda k: lower[k])
        while True:
            cur = min(got.values(), default=math.inf)
            cur_goal = min((v for k, v in got.items() if k in self.goal_keys), default=math.inf)
            bar = cur_goal if self.target is None else max(cur_goal, self.target)
            need = [k for k in rest if k not in got
                    and (lower[k] < cur or (k in self.goal_keys and lower[k] < bar))]
            if not need:
                return
            got.update(self.measure(X, need[:CHUNK]))

    def _match(self, block, unc):
        """Which of the modes ``unc`` have the eigenvalues of ``block`` (nearest assignment)."""
        if block.shape[0] == len(unc):
            return tuple(unc), ()
        values = scipy.linalg.eigvals(block)
        table = np.array([self.modes[i].value for i in unc], dtype=complex)
        _, cols = linear_sum_assignment(np.abs(values[:, None] - table[None, :]))
        chosen = {unc[j] for j in cols}
        return (tuple(i for i in unc if i in chosen), tuple(i for i in unc if i not in chosen))

    def advance(self, state: _State, ev: _Eval, cols: np.ndarray) -> _State:
        """The state with ``cols`` added."""
        extra = np.hstack([state.extra, cols])
        lower = self.measure(self.measure_matrix(extra), self.distinct)
        return _State(ev.missing, ev.hidden, extra, lower, ev.remaining, ev.minimal_order,
                      state.decisions + ev.decisions)

    def state_deficient(self, state: _State) -> int:
        left = sum(1 for i in state.unc if i in self.goal_modes)
        if self.target is not None:
            left += sum(1 for i in self.goal_modes if i not in state.unc
                        and state.lower[self.keys[i]] < self.target)
        return left

    def state_goal_margin(self, state: _State) -> float:
        return min((state.lower[k] for k in self.goal_keys), default=math.inf)
