"""Where to add one more actuator or sensor: candidates ranked by the PBH margin they buy.

When some mode of a model cannot be moved by the inputs (or seen by the outputs), or only
barely, the engineer's next question is what to change in the hardware.
:func:`suggest_actuators` and :func:`suggest_sensors` try candidate input columns (output
rows), rank them, and recommend a smallest set that makes the model controllable
(observable), or stabilizable (detectable) on request, optionally with every PBH margin of
the goal at least ``target_margin``.

How a candidate is judged
-------------------------
* **Restored modes, by orthogonal staircases.**  The controllable subspace ``R`` of the model
  (from :func:`plantcore.kalman_decomposition`, in its equilibrated coordinates) is
  completed to an orthonormal basis ``W = [W_R, W_U]``; in it ``A = [[A11, A12], [0, A22]]``.
  With a column ``b`` added, the new controllable subspace is ``R`` plus the lift of the
  controllable subspace of the quotient pair ``(A22, W_U^T b)`` (the quotient by an
  invariant subspace; Wonham, *Linear Multivariable Control*, 1979, ch. 1), so the modes
  ``b`` restores are decided by one small staircase of size ``n - dim R`` (Van Dooren 1981),
  with the model's own scale and tolerance; its decisions are recorded.  Sensors are the
  dual: the unobservable subspace and the pair ``(A_N^T, (c W_N)^T)``.
* **Change in the minimal order**: the observability rank (staircase) of the model restricted
  to the new controllable subspace, minus the same for the model as it is.
* **Margins, with the measure of** :func:`plantcore.classify_modes`: the smallest singular
  value of ``[A - λI, B, b]`` at every mode ``λ``, relative to the model's scale, on the
  equilibrated model with every input column (candidates included) scaled by a power of two
  to the model's size, computed by :class:`plantcore.structure.pbh_measures.PBHMeasures` on
  **one Schur form of A shared by all candidates** (adding a column does not change ``A``).
  A column can only raise ``sigma_min([A - λI, B])`` (interlacing), so the margins without
  the candidate are lower bounds: a mode is measured again only when its old margin is below
  the smallest margin found so far for the candidate (or below the target).  The modes the
  existing inputs cannot move are always measured.  Cost per candidate: ``O(n^2)`` for each
  of those modes, ``O(n^3)`` in all for the staircases, never ``O(n^4)``.
* Margins are measured in the coordinates of the model **as it is** (its equilibration), so
  they compare directly with its mode table.  The ``margin`` of the recommended set is then
  checked by :func:`plantcore.classify_modes` on the model with the set added (which may
  choose another power-of-two equilibration for a badly scaled model; the check is what is
  reported).  A candidate that leaves a mode uncontrollable has a margin at rounding level.

The recommended set
-------------------
A greedy choice (the candidate that leaves the fewest goal modes uncontrollable or below the
target, then the largest goal margin), the ranking recomputed on the augmented model after
each pick; the structure of the result is then checked on the augmented model by
:func:`plantcore.classify_modes`.  When the number of smaller subsets is at most
:data:`EXHAUSTIVE_SUBSETS`, every smaller subset is tried as well (so with up to 12
candidates, or up to 3 picks among 28, the recommended set is a smallest one), and
``smallest_proven`` says so.  Whether *any* set reaches the goal is exact: the restored
subspace and the margins only grow with more columns, so it suffices to try all candidates at
once (``achievable``).  Greedy selection of actuators with the set function recomputed after
each pick follows T. H. Summers, F. L. Cortesi and J. Lygeros, "On submodularity and
controllability in complex dynamical networks", IEEE Trans. Control of Network Systems 3(1),
91-101, 2016 (from memory).

References
----------
.. [1] M. L. J. Hautus, "Controllability and observability conditions of linear autonomous
   systems", Proc. Koninklijke Nederlandse Akademie van Wetenschappen, Ser. A, 72,
   443-448, 1969.
.. [2] R. Eising, "Between controllable and uncontrollable", Systems & Control Letters 4(5),
   263-264, 1984.
.. [3] P. Van Dooren, "The generalized eigenstructure problem in linear system theory", IEEE
   Trans. Automatic Control 26(1), 111-129, 1981.
"""

from __future__ import annotations

import itertools
import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.core.file_readers import read_file
from plantcore.core.model import StateSpaceModel, as_model
from plantcore.core.rank import any_fragile
from plantcore.core.rendering import render
from plantcore.structure.kalman import _prepare, kalman_decomposition
from plantcore.structure.modes import NARROW_MARGIN, _mode_table
from plantcore.structure.placement_engine import _Eval, _Problem, _State
from plantcore.structure.structural_matching import StructuralPlacement, structural_placement

__all__ = ["EXHAUSTIVE_SUBSETS", "REPORT_STATES_LIMIT", "PlacementSuggestion", "RankedCandidate",
           "report_placement", "suggest_actuators", "suggest_sensors"]

EXHAUSTIVE_SUBSETS = 4096

"""Most subsets tried by the exhaustive search for a set smaller than the greedy one (about
0.1 ms each for the structure; the margins only for subsets that pass it)."""

REPORT_STATES_LIMIT = 60

"""A report suggests placements (one candidate at each state) only up to this many states;
beyond it ``plantcore suggest`` with a candidate file is the tool (its cost grows with the
number of candidates times the modes each must be measured at)."""

_GOALS = {"actuator": ("controllable", "stabilizable"), "sensor": ("observable", "detectable")}


@dataclass(frozen=True)
class RankedCandidate:
    """One candidate added alone to the model as it is.

    Attributes
    ----------
    name : str
    margin : float
        Smallest PBH margin over all modes with the candidate added (the measure of
        :func:`plantcore.classify_modes`; rounding level when a mode stays uncontrollable).
    goal_margin : float
        The same over the modes the goal concerns (all modes, or those not stable for
        ``stabilizable`` / ``detectable``); ``inf`` when there are none.
    restored : int
        How many uncontrollable (unobservable) modes the candidate makes controllable
        (observable).
    restored_modes : tuple of complex
        Their eigenvalues, as in the model's mode table.
    restored_margin : float
        Smallest margin among the restored modes (``inf`` when none).
    minimal_order_change : int
        Minimal order with the candidate minus the minimal order without it.
    reaches_goal : bool
        True when this candidate alone reaches the goal (and the target margin).
    fragile : bool
        True when a rank decision behind ``restored`` or the minimal order lies within a
        factor 100 of the tolerance: the count depends on the tolerance.
    decisions : tuple of RankDecision
    """

    name: str
    margin: float
    goal_margin: float
    restored: int
    restored_modes: tuple
    restored_margin: float
    minimal_order_change: int
    reaches_goal: bool
    fragile: bool
    decisions: tuple = field(default=(), repr=False)

    def to_dict(self) -> dict:
        """JSON-safe dictionary (complex values as ``[re, im]``, ``inf`` as ``None``)."""
        return {"name": self.name, "margin": _safe(self.margin),
                "goal_margin": _safe(self.goal_margin), "restored": self.restored,
                "restored_modes": [[float(z.real), float(z.imag)] for z in self.restored_modes],
                "restored_margin": _safe(self.restored_margin),
                "minimal_order_change": self.minimal_order_change,
                "reaches_goal": self.reaches_goal, "fragile": self.fragile}


@dataclass(frozen=True)
class PlacementSuggestion:
    """Candidates ranked, a recommended smallest set, and whether the goal can be reached.

    Attributes
    ----------
    kind : str
        ``"actuator"`` or ``"sensor"``.
    goal : str
        ``"controllable"`` or ``"stabilizable"`` (actuators), ``"observable"`` or
        ``"detectable"`` (sensors).
    target_margin : float or None
        Smallest PBH margin asked of every goal mode, or None for the structure alone.
    ranking : tuple of RankedCandidate
        One entry per candidate, best first: those reaching the goal alone, then by how few
        goal modes they leave deficient, their goal margin, the modes they restore.
    recommended : tuple of str
        Names of the recommended candidates, in the order picked (empty when the model
        already reaches the goal).
    margin : float
        Smallest margin over the goal modes with the recommended set added, checked by
        :func:`plantcore.classify_modes` on the augmented model (``inf`` without goal modes).
    achievable : bool
        False when no set of the candidates reaches the goal (not even all of them).
    reaches_goal : bool
        True when the recommended set reaches the goal (checked); False when it cannot be
        reached or ``max_count`` stopped the choice first.
    smallest_proven : bool
        True when no smaller set of the candidates reaches the goal (exhaustive search, or
        a set of one).
    search : str
        How the set was chosen, in words.
    base_margin : float
        Smallest margin over all modes of the model as it is.
    deficient_modes : tuple of complex
        Eigenvalues of the modes the existing inputs cannot move (outputs cannot see).
    narrow_modes : tuple of complex
        Modes that pass the test with a margin below :data:`plantcore.structure.modes.NARROW_MARGIN`.
    minimal_order : int
        Minimal order of the model as it is.
    minimal_order_with_recommended : int
        Minimal order with the recommended set added (checked).
    structural : StructuralPlacement
        The structural counterpart (maximum matching on the sparsity pattern).
    candidate_names : tuple of str
        Every candidate, in the order given.
    fragile : bool
        True when a rank decision of the model or of the recommendation lies within a factor
        100 of the tolerance.
    notes : tuple of str
        Plain sentences: limits of the search, how margins were measured, disagreements.
    model_name : str or None
    unreachable_modes : tuple of complex
        Goal modes that stay uncontrollable (unobservable) even with every candidate added.
    """

    kind: str
    goal: str
    target_margin: float | None
    ranking: tuple
    recommended: tuple
    margin: float
    achievable: bool
    reaches_goal: bool
    smallest_proven: bool
    search: str
    base_margin: float
    deficient_modes: tuple
    narrow_modes: tuple
    minimal_order: int
    minimal_order_with_recommended: int
    structural: StructuralPlacement
    candidate_names: tuple = ()
    fragile: bool = False
    notes: tuple = ()
    model_name: str | None = None
    unreachable_modes: tuple = ()

    def to_dict(self) -> dict:
        """JSON-safe dictionary."""
        return {"kind": self.kind, "goal": self.goal, "target_margin": self.target_margin,
                "ranking": [r.to_dict() for r in self.ranking],
                "recommended": list(self.recommended), "margin": _safe(self.margin),
                "achievable": self.achievable, "reaches_goal": self.reaches_goal,
                "smallest_proven": self.smallest_proven, "search": self.search,
                "base_margin": _safe(self.base_margin),
                "deficient_modes": [[float(z.real), float(z.imag)] for z in self.deficient_modes],
                "narrow_modes": [[float(z.real), float(z.imag)] for z in self.narrow_modes],
                "minimal_order": self.minimal_order,
                "minimal_order_with_recommended": self.minimal_order_with_recommended,
                "structural": self.structural.to_dict(), "fragile": self.fragile,
                "notes": list(self.notes), "model_name": self.model_name,
                "unreachable_modes": [[float(z.real), float(z.imag)]
                                      for z in self.unreachable_modes]}

    def to_text(self) -> str:
        """Plain-text table (rendered by :mod:`plantcore.reports.placement_section`)."""
        return render(self, "text")

    def to_markdown(self) -> str:
        """Markdown table."""
        return render(self, "markdown")


def _safe(x):
    return float(x) if x is not None and math.isfinite(x) else None


# --- candidates ------------------------------------------------------------------------------

def _candidate_matrix(model: StateSpaceModel, candidates, kind: str):
    """(names, user-unit vectors as the columns of an n x K array)."""
    n = model.n
    if candidates is None:
        return tuple(model.states), np.eye(n)
    if isinstance(candidates, (str, os.PathLike)):
        candidates = read_file("candidates", candidates, kind=kind, n_states=n,
                               states=model.states)
    if not hasattr(candidates, "items"):
        raise TypeError("candidates must be a dict name -> vector or the path of a candidate "
                        f"file, got {type(candidates).__name__}.")
    what = "column" if kind == "actuator" else "row"
    names, vectors = [], []
    for name, vector in candidates.items():
        if not isinstance(name, str) or not name.strip():
            raise ValueError(f"candidates: every name must be a non-empty text, got {name!r}.")
        try:
            v = np.asarray(vector, dtype=float)
        except (TypeError, ValueError):
            raise ValueError(f"candidates: {name!r}: the {what} must hold numbers.") from None
        v = v.reshape(-1) if v.ndim == 2 and 1 in v.shape else v
        if v.ndim != 1 or v.size != n:
            raise ValueError(f"candidates: {name!r}: the {what} has shape {v.shape} but the "
                             f"model has {n} states; give one number per state.")
        if not np.all(np.isfinite(v)):
            raise ValueError(f"candidates: {name!r}: the {what} holds a NaN or infinite value.")
        if not np.any(v):
            raise ValueError(f"candidates: {name!r}: the {what} is all zeros; it would "
                             f"{'move' if kind == 'actuator' else 'see'} nothing.")
        names.append(name)
        vectors.append(v)
    if not names:
        raise ValueError("candidates: no candidate given; give at least one, or None for one "
                         "at each state.")
    return tuple(names), np.column_stack(vectors)


def _rank_key(ev: _Eval, index: int):
    # a candidate that leaves a goal mode uncontrollable has a goal margin at rounding
    # level: it is ranked by what it restores instead
    goal_margin = ev.goal_margin if ev.deficient == 0 or not ev.remaining else 0.0
    return (ev.deficient, -goal_margin, -len(ev.restored), -ev.restored_margin, -ev.margin, index)


def _check(problem: _Problem, vectors: np.ndarray):
    """(reaches goal, goal margin, minimal order, decisions) of the model with the user-unit
    columns (rows) ``vectors`` added, by the library's own analysis."""
    m = problem.model
    k = vectors.shape[1]
    if problem.kind == "actuator":
        aug = StateSpaceModel(m.A, np.hstack([m.B, vectors]), m.C,
                              np.hstack([m.D, np.zeros((m.n_outputs, k))]), dt=m.dt)
    else:
        aug = StateSpaceModel(m.A, m.B, np.vstack([m.C, vectors.T]),
                              np.vstack([m.D, np.zeros((k, m.n_inputs))]), dt=m.dt)
    kd = kalman_decomposition(aug, problem.tol)
    table = _mode_table(kd, _prepare(aug, problem.tol), NARROW_MARGIN)
    goal = [md for md in table if problem.goal in ("controllable", "observable") or not md.stable]
    attr = "controllable" if problem.kind == "actuator" else "observable"
    reached = all(getattr(md, attr) for md in goal)
    values = [md.controllability_margin if attr == "controllable" else md.observability_margin
              for md in goal]
    margin = min(values, default=math.inf)
    if problem.target is not None and margin < problem.target:
        reached = False
    return reached, margin, kd.sizes[0], tuple(kd.decisions)


def _subsets_up_to(count: int, largest: int) -> int:
    return sum(math.comb(count, s) for s in range(1, largest + 1))


def _exhaustive(problem: _Problem, base: _State, cols: np.ndarray, largest: int):
    """The best (largest goal margin) among the smallest subsets of at most ``largest``
    candidates that reach the goal, or None."""
    K = cols.shape[1]
    for size in range(1, largest + 1):
        best = None
        for subset in itertools.combinations(range(K), size):
            # the structure first (a small staircase), the margins only when it passes
            if problem.evaluate(base, cols[:, subset], "subset", margins=False).deficient:
                continue
            ev = problem.evaluate(base, cols[:, subset], "subset")
            if ev.deficient:
                continue
            if best is None or ev.goal_margin > best[1].goal_margin:
                best = (subset, ev)
        if best is not None:
            return best
    return None


def _suggest(model, candidates, kind, *, target_margin, max_count, goal, tol) -> PlacementSuggestion:
    model = as_model(model)
    goals = _GOALS[kind]
    goal = goals[0] if goal is None else goal
    if goal not in goals:
        raise ValueError(f"goal for {kind}s must be one of {', '.join(goals)}, got {goal!r}.")
    if target_margin is not None:
        if isinstance(target_margin, bool) or not isinstance(target_margin, (int, float)) \
                or not math.isfinite(target_margin) or not 0 < target_margin < 1:
            raise ValueError("target_margin is a margin relative to the model's scale, a "
                             f"number between 0 and 1 (e.g. 1e-4); got {target_margin!r}.")
        target_margin = float(target_margin)
    if max_count is not None and (isinstance(max_count, bool) or not isinstance(max_count, int)
                                  or max_count < 1):
        raise ValueError(f"max_count must be a whole number of candidates, 1 or more, got "
                         f"{max_count!r}.")
    names, vectors = _candidate_matrix(model, candidates, kind)
    structural = structural_placement(model, sensors=kind == "sensor")
    if model.n == 0:
        return PlacementSuggestion(kind, goal, target_margin, (), (), math.inf, True, True, True,
                                   "none needed: the model has no states", math.inf, (), (), 0,
                                   0, structural, names, False, (), model.name)
    problem = _Problem(model, kind, goal, target_margin, tol)
    cols = problem.decision_columns(vectors)
    base = problem.initial()
    notes = []
    # the ranking: every candidate alone
    evals = [problem.evaluate(base, cols[:, [j]], names[j]) for j in range(len(names))]
    order = sorted(range(len(names)), key=lambda j: _rank_key(evals[j], j))
    ranking = tuple(RankedCandidate(
        names[j], evals[j].margin, evals[j].goal_margin, len(evals[j].restored),
        tuple(problem.modes[i].value for i in evals[j].restored), evals[j].restored_margin,
        evals[j].minimal_order - base.minimal_order, evals[j].deficient == 0,
        any_fragile(evals[j].decisions), evals[j].decisions) for j in order)
    # can any set do it?  All candidates at once (restored parts and margins only grow)
    everything = problem.evaluate(base, cols, "all candidates")
    achievable = everything.deficient == 0
    # greedy, recomputed after each pick
    chosen: list[int] = []
    state = base
    current = evals
    while problem.state_deficient(state) and (max_count is None or len(chosen) < max_count):
        left = [j for j in range(len(names)) if j not in chosen]
        if not left:
            break
        if chosen:
            current = {j: problem.evaluate(state, cols[:, [j]], names[j]) for j in left}
        best = min(left, key=lambda j: _rank_key(current[j], j))
        ev = current[best]
        # progress: fewer deficient goal modes, or (all of them controllable already) a
        # larger goal margin; a margin at rounding level is no progress
        structural_left = any(i in problem.goal_modes for i in ev.remaining)
        if ev.deficient >= problem.state_deficient(state) and (
                structural_left or not ev.goal_margin > problem.state_goal_margin(state)):
            break
        chosen.append(best)
        state = problem.advance(state, ev, cols[:, [best]])
    greedy_done = problem.state_deficient(state) == 0
    search = "none needed: the model already reaches the goal" if not chosen and greedy_done \
        else "greedy, the margins recomputed after each pick"
    proven = greedy_done and len(chosen) <= 1
    cap = len(chosen) - 1 if greedy_done else (max_count or len(names))
    cap = min(cap, len(names))
    if achievable and cap >= 1 and not proven:
        if _subsets_up_to(len(names), cap) <= EXHAUSTIVE_SUBSETS:
            found = _exhaustive(problem, base, cols, cap)
            if found is not None:
                chosen = list(found[0])
                search = "exhaustive search over every smaller set"
            else:
                search += "; no smaller set reaches the goal (exhaustive search)"
            proven = found is not None or greedy_done
        else:
            notes.append(f"Exhaustive search skipped: {_subsets_up_to(len(names), cap)} "
                         f"subsets of at most {cap} candidates exceed the limit of "
                         f"{EXHAUSTIVE_SUBSETS}; a smaller set may exist.")
    if chosen:
        reached, margin, order_with, check_decisions = _check(problem, vectors[:, chosen])
    else:
        reached, margin, order_with, check_decisions = _check(problem, vectors[:, :0])
    engine_reached = greedy_done if search.startswith(("greedy", "none")) else True
    if reached != engine_reached:
        notes.append("The check of the recommended set by classify_modes on the augmented "
                     f"model {'reaches' if reached else 'does not reach'} the goal, unlike the "
                     "quotient staircases; the check is what is reported (a decision near "
                     "the tolerance).")
    if not achievable:
        left = [problem.modes[i].value for i in everything.remaining if i in problem.goal_modes]
        if left:
            notes.append(f"No set of the {len(names)} candidates reaches the goal: with all of "
                         f"them added, {len(left)} goal mode(s) stay "
                         f"{'uncontrollable' if kind == 'actuator' else 'unobservable'}.")
        else:
            notes.append(f"No set of the {len(names)} candidates reaches the target margin "
                         f"{target_margin:g}: with all of them added the smallest goal margin "
                         f"is {everything.goal_margin:.3g}.")
    elif max_count is not None and not reached:
        notes.append(f"The goal needs more than max_count = {max_count} of these candidates "
                     "by the greedy choice.")
    fragile = bool(any_fragile(problem.kd.decisions) or any_fragile(state.decisions)
                   or any_fragile(check_decisions))
    if fragile:
        notes.append("A rank decision lies within a factor 100 of the tolerance: what is "
                     "restored depends on the tolerance.")
    attr = "controllability_margin" if kind == "actuator" else "observability_margin"
    narrow = tuple(m.value for i, m in enumerate(problem.modes)
                   if i not in problem.deficient and getattr(m, attr) < NARROW_MARGIN)
    return PlacementSuggestion(
        kind=kind, goal=goal, target_margin=target_margin, ranking=ranking,
        recommended=tuple(names[j] for j in chosen), margin=float(margin),
        achievable=bool(achievable), reaches_goal=bool(reached), smallest_proven=bool(proven),
        search=search, base_margin=min(base.lower.values(), default=math.inf),
        deficient_modes=tuple(problem.modes[i].value for i in problem.deficient),
        narrow_modes=narrow, minimal_order=int(problem.kd.sizes[0]),
        minimal_order_with_recommended=int(order_with), structural=structural,
        candidate_names=names, fragile=fragile, notes=tuple(notes), model_name=model.name,
        unreachable_modes=tuple(problem.modes[i].value for i in everything.remaining
                                if i in problem.goal_modes))


def suggest_actuators(model, candidates=None, *, target_margin=None, max_count=None, goal=None,
                      tol=None) -> PlacementSuggestion:
    """Rank candidate input columns and recommend a smallest set that reaches the goal.

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, or tuple (A, B, C[, D])
    candidates : dict or path, optional
        Name -> column (``n`` numbers, in the units of ``B``), or the path of a candidate
        file (:mod:`plantcore.files.candidate_files`, its ``[[actuator]]`` tables).  Default:
        one unit input at each state, named after the state.
    target_margin : float, optional
        Ask every goal mode for a PBH margin of at least this (relative to the model's
        scale, like :func:`plantcore.classify_modes`; e.g. ``1e-4``, the near-cancellation
        level).  Default: the structure alone.
    max_count : int, optional
        Recommend at most this many candidates.
    goal : {"controllable", "stabilizable"}, optional
        Default ``"controllable"``; ``"stabilizable"`` asks only the modes that are not
        stable (marginal ones included) to become controllable.
    tol : float, optional
        Relative rank tolerance (see :mod:`plantcore.core.rank`).

    Returns
    -------
    PlacementSuggestion

    Notes
    -----
    See the module notes: restored modes by staircases of the quotient by the controllable
    subspace (Van Dooren 1981), margins by the PBH measure of
    :func:`plantcore.classify_modes` (Hautus 1969; Eising 1984) on one Schur form shared by
    all candidates, a greedy choice checked on the augmented model, and an exhaustive search
    when at most :data:`EXHAUSTIVE_SUBSETS` smaller subsets exist.

    Examples
    --------
    Two identical carts pushed by one shared force: their difference cannot be moved, and a
    force on one cart alone restores it.

    >>> import numpy as np
    >>> import plantcore as pc
    >>> cart = np.array([[0.0, 1.0], [0.0, 0.0]])
    >>> A = np.kron(np.eye(2), cart); B = np.array([[0.0], [1.0], [0.0], [1.0]])
    >>> C = np.array([[1.0, 0.0, 1.0, 0.0]])
    >>> s = pc.suggest_actuators((A, B, C), {"push cart 1": [0, 1, 0, 0],
    ...                                      "push both": [0, 1, 0, 1]})
    >>> s.recommended, s.ranking[0].restored, s.ranking[1].restored
    (('push cart 1',), 2, 0)
    """
    return _suggest(model, candidates, "actuator", target_margin=target_margin,
                    max_count=max_count, goal=goal, tol=tol)


def suggest_sensors(model, candidates=None, *, target_margin=None, max_count=None, goal=None,
                    tol=None) -> PlacementSuggestion:
    """Rank candidate output rows and recommend a smallest set that reaches the goal.

    The dual of :func:`suggest_actuators`: ``candidates`` maps names to rows (``n`` numbers,
    in the units of ``C``) or is a candidate file (its ``[[sensor]]`` tables); by default one
    sensor measures each state.  ``goal`` is ``"observable"`` (default) or ``"detectable"``;
    margins are the smallest singular values of ``[A - λI; C; c]`` relative to the model's
    scale (the observability margins of :func:`plantcore.classify_modes`).

    Examples
    --------
    >>> import numpy as np
    >>> import plantcore as pc
    >>> A = np.array([[-1.0, 1.0], [0.0, -2.0]]); B = np.array([[0.0], [1.0]])
    >>> s = pc.suggest_sensors((A, B, np.zeros((0, 2))))
    >>> s.recommended, s.ranking[0].name, s.ranking[0].restored
    (('x1',), 'x1', 2)
    """
    return _suggest(model, candidates, "sensor", target_margin=target_margin,
                    max_count=max_count, goal=goal, tol=tol)


def report_placement(model, modes, *, tol=None) -> tuple:
    """The suggestions a model report shows (internal to the reports, public for them).

    An actuator suggestion when some mode of ``modes`` (the model's mode table) is not
    controllable or passes with a margin below :data:`~plantcore.structure.modes.NARROW_MARGIN`
    (then that margin is the target), a sensor suggestion likewise; one candidate at each
    state.  Empty when every mode passes both tests clearly, or when the model has more than
    :data:`REPORT_STATES_LIMIT` states.
    """
    model = as_model(model)
    if model.n == 0 or model.n > REPORT_STATES_LIMIT:
        return ()
    out = []
    for kind, ok, margin in (("actuator", "controllable", "controllability_margin"),
                             ("sensor", "observable", "observability_margin")):
        missing = any(not getattr(m, ok) for m in modes)
        narrow = any(getattr(m, ok) and getattr(m, margin) < NARROW_MARGIN for m in modes)
        if missing or narrow:
            out.append(_suggest(model, None, kind, target_margin=NARROW_MARGIN if narrow else None,
                                max_count=None, goal=None, tol=tol))
    return tuple(out)
