"""Rendering of result objects as text, markdown, JSON and HTML.

Display only: the functions here read result objects and format them; they compute nothing
numerical themselves.
"""

from __future__ import annotations

import dataclasses
import math

from plantcore.core.safe_norms import frobenius
from plantcore.core.wording import (
    SAFETY_CAUTION,
    counted,
    frequency_phrase,
    short_number,
    shown_eigenvalue,
    shown_value,
    special_number,
)
from plantcore.structure.removed_modes import hidden_mode_message

__all__ = ["analysis_markdown", "analysis_text", "certificate_text", "decision_method",
           "shown_removed_modes"]

# --- analysis reports (text and markdown) -----------------------------------------------------
# These read an :class:`plantcore.analysis.Analysis` and only format what it holds.

PART_LABELS = {
    "controllable_observable": "controllable and observable",
    "controllable_unobservable": "controllable, not observable",
    "uncontrollable_observable": "not controllable, observable",
    "uncontrollable_unobservable": "neither controllable nor observable",
}

_PART_ORDER = tuple(PART_LABELS)
_MAX_DIRECTIONS = 8
_MAX_HSV = 24
_MAX_LISTED_MODES = 4


def _num(x, digits: int = 3) -> str:
    if x is None:
        return "-"
    word = special_number(x, missing="nan", infinite="inf", negative_infinite="-inf", zero=None)
    return word if word is not None else f"{float(x):.{digits}g}"


def decision_method(decision) -> str:
    """Which method made a rank decision, in a few words (from its label and kind): an
    orthogonal staircase step, the modal certificate (mode by mode; a check of the
    staircase when it decides nothing itself), or the reduction of the system pencil."""
    if decision.label.startswith("modal certificate"):
        return "modal certificate" + (", check only" if decision.check_only else "")
    if decision.label.startswith("zeros"):
        return "pencil reduction"
    if "step" in decision.label:
        return "staircase"
    return "singular values"


def _hankel_note(note: str) -> str:
    """The analysis' note on Hankel singular values without a leading repeat of the
    heading ("Hankel singular values not available: ...")."""
    for lead in ("Hankel singular values not available: ", "Hankel singular values are not available: "):
        if note.startswith(lead):
            return note[len(lead):]
    return note


def _scale(a) -> float:
    """The scale eigenvalues are shown against (``||A||_F``; see ``shown_eigenvalue``)."""
    return frobenius(a.model.A) if a.model.n else 1.0


def _eig(value, digits: int = 4, scale: float | None = None, discrete: bool = False) -> str:
    if scale is not None:
        value = shown_eigenvalue(value, scale, discrete=discrete)
    value = complex(value)
    re = 0.0 if value.real == 0 else value.real     # no "-0"
    if value.imag == 0:
        return f"{re:.{digits}g}"
    sign = "+" if value.imag > 0 else "-"
    return f"{re:.{digits}g} {sign} {abs(value.imag):.{digits}g}j"


def _plural(k: int, word: str) -> str:
    return f"{k} {word}" if k == 1 else f"{k} {word}s"


def _model_line(a) -> str:
    m = a.model
    domain = (f"discrete time, sample time {m.dt:g}" if m.is_discrete else "continuous time")
    return (f"{_plural(m.n, 'state')}, {_plural(m.n_inputs, 'input')}, "
            f"{_plural(m.n_outputs, 'output')}; {domain}")


def _title(a) -> str:
    return f"Analysis of model {a.model.name!r}" if a.model.name else "Analysis of an unnamed model"


def _stability_word(mode) -> str:
    if mode.stable:
        return "stable"
    return "marginal" if mode.marginal else "UNSTABLE"


def _mode_list(modes, scale: float, discrete: bool = False) -> str:
    shown = [_eig(m.value, scale=scale, discrete=discrete) for m in modes[:_MAX_LISTED_MODES]]
    more = len(modes) - len(shown)
    return ", ".join(shown) + (f" and {more} more" if more > 0 else "")


def shown_removed_modes(removed, model) -> tuple:
    """Copies of removed modes (``RemovedMode``) whose values are as text shows them:
    parts at rounding level of ``model``'s scale written as 0 (``shown_eigenvalue``), so a
    message names an integrator as 0, not as ``-5.551e-17``."""
    scale = frobenius(model.A) if model.n else 1.0
    return tuple(dataclasses.replace(m, value=shown_eigenvalue(m.value, scale,
                                                               discrete=model.is_discrete))
                 for m in removed)


def _hidden_lines(a) -> list[str]:
    """The warning about removed modes that are not stable (shown first), or nothing."""
    removed = a.removed_unstable_modes
    if not removed:
        return []
    return ["WARNING: " + hidden_mode_message(shown_removed_modes(removed, a.model),
                                              "the minimal realization")]


def _hidden_verdict(a) -> tuple[str, str, str]:
    removed = a.removed_unstable_modes
    if not removed:
        return ("hidden modes", "no",
                "every mode outside part 1 (removed by the minimal realization) is stable")
    words = "; ".join(m.describe() for m in shown_removed_modes(removed, a.model)
                      if m.value.imag >= 0)
    verb = "is" if len(removed) == 1 else "are"
    why = f"the minimal realization removes {_plural(len(removed), 'mode')} that {verb} not stable"
    return ("hidden modes", "YES", f"{why}: {words}")


def _verdict_lines(a) -> list[tuple[str, str, str]]:
    """(name, answer, explanation) for the verdicts, the hidden modes first."""
    not_stable = [m for m in a.modes if not m.stable]
    rows = [_hidden_verdict(a)]
    for name, ok, attr, can, cannot in (
            ("stabilizable", a.stabilizable, "controllable", "can be moved by the inputs",
             "the inputs cannot move"),
            ("detectable", a.detectable, "observable", "is seen by the outputs",
             "the outputs cannot see")):
        if ok:
            why = "every mode is stable" if not not_stable else f"every mode that is not stable {can}"
            rows.append((name, "yes", why))
        else:
            bad = [m for m in not_stable if not getattr(m, attr)]
            modes, verb = ("the mode", "is") if len(bad) == 1 else ("the modes", "are")
            rows.append((name, "NO", (f"{cannot} {modes} "
                         f"{_mode_list(bad, _scale(a), a.model.is_discrete)}, which {verb} not "
                         "stable")))
    if a.is_minimal:
        rows.append(("minimal", "yes", "every state is controllable and observable"))
    else:
        rows.append(("minimal", "no",
                     (f"a minimal realization has {_plural(a.minimal_order, 'state')} "
                     f"({a.minimal.removed_uncontrollable} not controllable and "
                     f"{a.minimal.removed_unobservable} not observable removed)")))
    return rows


def _distance_line(d, scale: float) -> str:
    if d.at is None:
        return f"distance to {d.kind}: none (the model has no states)"
    return (f"distance to {d.kind}: about {_num(shown_value(d.value))} of the model's scale, "
            f"reached at lambda = {_eig(d.at, scale=scale)} (an estimate and an upper bound)")


def _method_lines(a) -> list[str]:
    """How the two distance estimates were found (one line if the same way)."""
    if not a.model.n:
        return []
    dc, do = a.distance_to_uncontrollability, a.distance_to_unobservability
    if dc.method == do.method:
        return [f"Both distances: {dc.method}."]
    return [f"Distance to {dc.kind}: {dc.method}.", f"Distance to {do.kind}: {do.method}."]


def _fragile_lines(a) -> list[str]:
    fragile = [d for d in a.decisions if d.fragile]
    if not fragile:
        return []
    near = [d for d in fragile if not d.window_outcome]
    out = []
    if near:
        labels = ", ".join(d.label for d in near)
        verb = "lies" if len(near) == 1 else "lie"
        out.append(f"WARNING: {_plural(len(near), 'rank decision')} ({labels}) {verb} within "
                   "a factor 100 of the tolerance, so the part sizes depend on the tolerance. "
                   "Compare with runs at a tolerance ten times larger and ten times smaller "
                   "before relying on them.")
    for d in fragile:
        if d.window_outcome:
            out.append(f"WARNING: {d.label}: {d.window_outcome}.")
    return out


def _narrow_lines(a) -> list[str]:
    narrow = a.narrow_modes
    if not narrow:
        return []
    verb = "passes" if len(narrow) == 1 else "pass"
    listed = _mode_list(list(narrow), _scale(a), a.model.is_discrete)
    return [(f"Note: {_plural(len(narrow), 'mode')} ({listed}) {verb} a test "
            f"with a margin below {_num(a.narrow_margin)}: a near pole-zero cancellation. A "
            "change of the model data of that relative size could make the test fail.")]


def _hsv_text(a) -> list[str]:
    hsv = a.hankel_singular_values
    lines = []
    if hsv is None:
        lines.append("  not available: " + _hankel_note(a.hankel_note))
        return lines
    if hsv.size == 0:
        lines.append("  none: " + (a.hankel_note or "the model has no states."))
        return lines
    shown = [f"{i + 1}: {_num(v, 4)}" for i, v in enumerate(hsv[:_MAX_HSV])]
    for k in range(0, len(shown), 6):
        lines.append("  " + "   ".join(shown[k:k + 6]))
    if hsv.size > _MAX_HSV:
        lines.append(f"  ... and {hsv.size - _MAX_HSV} smaller")
    if a.hankel_note:
        lines.append("  " + a.hankel_note)
    return lines


def analysis_text(a) -> str:
    """Plain-text report of an :class:`plantcore.analysis.Analysis`."""
    kd = a.decomposition
    out = []
    title = _title(a)
    out += [title, "=" * len(title), _model_line(a),
            f"rank tolerance {_num(a.tolerance)} (relative to the model's scale)", ""]
    hidden = _hidden_lines(a)
    out += hidden + ([""] if hidden else [])

    out += ["Kalman parts"]
    for i, (name, size) in enumerate(zip(_PART_ORDER, kd.sizes)):
        out.append(f"  part {i + 1}  {PART_LABELS[name]:<38s} {_plural(int(size), 'state')}")
    out.append(f"  transformation condition number {_num(kd.condition)}; largest entry set to "
               f"zero {_num(kd.residual)} of its block")
    out.append("")

    out.append("Rank decisions (margin: factor between the deciding singular value and the "
               "tolerance; below 100 is fragile)")
    if not a.decisions:
        out.append("  none (the model has no states)")
    width = max([len(d.label) for d in a.decisions], default=0)
    for d in a.decisions:
        flag = "  FRAGILE" if d.fragile else ""
        kept = "none" if math.isinf(d.smallest_kept) else _num(shown_value(d.smallest_kept))
        out.append(f"  {d.label:<{width}s}  rank {d.rank} of {d.size}  smallest kept "
                   f"{kept}  largest dropped {_num(shown_value(d.largest_dropped))}  "
                   f"margin {_num(d.margin)}  ({decision_method(d)}){flag}")
    out += _fragile_lines(a)
    out.append("")

    out.append("States in each part (one line per basis vector)")
    if not a.model.n:
        out.append("  none (the model has no states)")
    for i, name in enumerate(_PART_ORDER):
        dirs = a.part_directions.get(name, ())
        if not dirs:
            continue
        out.append(f"  part {i + 1} ({PART_LABELS[name]}):")
        for text in dirs[:_MAX_DIRECTIONS]:
            out.append(f"    {text}")
        if len(dirs) > _MAX_DIRECTIONS:
            out.append(f"    ... and {len(dirs) - _MAX_DIRECTIONS} more")
    if a.model.n:
        out.append("  Part 2, parts 1+2 (the controllable subspace) and parts 2+4 (the "
                   "unobservable subspace) are fixed by the model; parts 1, 3 and 4 are "
                   "complements chosen by the method.")
    out.append("")

    out.append("Verdicts")
    for name, answer, why in _verdict_lines(a):
        out.append(f"  {name:<13s} {answer:<4s} {why}")
    out.append("  " + _distance_line(a.distance_to_uncontrollability, _scale(a)))
    out.append("  " + _distance_line(a.distance_to_unobservability, _scale(a)))
    for line in _method_lines(a):
        out.append("  (" + line + ")")
    out.append("")

    out.append("Modes (margin: smallest singular value of [A - lambda I, B] or "
               "[A - lambda I; C], relative to the model's scale, measured on the controllable "
               "(observable) part for a controllable (observable) mode, else on the whole "
               "model; values at rounding level shown as 0)")
    scale, discrete = _scale(a), a.model.is_discrete
    if not a.modes:
        out.append("  none (the model has no states)")
    else:
        out.append(f"  {'#':>3s}  {'eigenvalue':<24s} {'stability':<9s}  "
                   f"{'controllable':<16s} {'observable':<16s} part")
        for k, m in enumerate(a.modes):
            c = f"{'yes' if m.controllable else 'no':<4s}{_num(shown_value(m.controllability_margin))}"
            o = f"{'yes' if m.observable else 'no':<4s}{_num(shown_value(m.observability_margin))}"
            part = _PART_ORDER.index(m.part) + 1
            flag = "  narrow" if m.narrow else ""
            out.append(f"  {k + 1:>3d}  {_eig(m.value, scale=scale, discrete=discrete):<24s} {_stability_word(m):<9s}  "
                       f"{c:<16s} {o:<16s} {part}{flag}")
    out += _narrow_lines(a)
    out.append("")

    out.append("Hankel singular values of the stable part")
    out += _hsv_text(a)
    out.append("")
    out.append(SAFETY_CAUTION)
    return "\n".join(out) + "\n"


def _md_escape(text: str) -> str:
    return str(text).replace("|", "\\|")


def analysis_markdown(a) -> str:
    """Markdown report of an :class:`plantcore.analysis.Analysis`."""
    kd = a.decomposition
    out = [f"# {_md_escape(_title(a))}", "", _model_line(a) + ".",
           f"Rank tolerance {_num(a.tolerance)}, relative to the model's scale.", ""]
    out += [f"> **{_md_escape(line)}**" for line in _hidden_lines(a)]
    out += [""] if a.removed_unstable_modes else []

    out += ["## Kalman parts", "", "| part | meaning | states |", "|---:|---|---:|"]
    for i, (name, size) in enumerate(zip(_PART_ORDER, kd.sizes)):
        out.append(f"| {i + 1} | {PART_LABELS[name]} | {int(size)} |")
    out += ["", (f"Transformation condition number {_num(kd.condition)}; largest entry set to zero "
            f"{_num(kd.residual)} of its block."), ""]

    out += ["## Rank decisions", "",
            ("Margin: factor between the deciding singular value and the tolerance; below 100 "
            "is fragile."), ""]
    if a.decisions:
        out += ["| decision | rank | smallest kept | largest dropped | margin | fragile |",
                "|---|---:|---:|---:|---:|---|"]
        for d in a.decisions:
            kept = "none" if math.isinf(d.smallest_kept) else _num(shown_value(d.smallest_kept))
            out.append(f"| {_md_escape(d.label)} | {d.rank} of {d.size} | {kept} "
                       f"| {_num(shown_value(d.largest_dropped))} | {_num(d.margin)} | "
                       f"{'**yes**' if d.fragile else 'no'} |")
    else:
        out.append("None (the model has no states).")
    out += [f"> {line}" for line in _fragile_lines(a)]
    out.append("")

    out += ["## States in each part", ""]
    for i, name in enumerate(_PART_ORDER):
        dirs = a.part_directions.get(name, ())
        if not dirs:
            continue
        out.append(f"- **part {i + 1}** ({PART_LABELS[name]}): "
                   + "; ".join(f"`{_md_escape(t)}`" for t in dirs[:_MAX_DIRECTIONS])
                   + (f"; and {len(dirs) - _MAX_DIRECTIONS} more" if len(dirs) > _MAX_DIRECTIONS else ""))
    if a.model.n:
        out += ["", ("Part 2, parts 1+2 (the controllable subspace) and parts 2+4 (the unobservable "
                "subspace) are fixed by the model; parts 1, 3 and 4 are complements chosen by "
                "the method.")]
    out.append("")

    out += ["## Verdicts", "", "| verdict | answer | why |", "|---|---|---|"]
    for name, answer, why in _verdict_lines(a):
        out.append(f"| {name} | {answer} | {_md_escape(why)} |")
    out += ["", "- " + _distance_line(a.distance_to_uncontrollability, _scale(a)),
            "- " + _distance_line(a.distance_to_unobservability, _scale(a))]
    for line in _method_lines(a):
        out.append("- " + line)
    out.append("")

    out += ["## Modes", "",
            ("Margin: smallest singular value of `[A - λI, B]` or `[A - λI; C]`, relative to the "
            "model's scale, measured on the controllable (observable) part for a controllable "
            "(observable) mode, else on the whole model; values at rounding level shown as 0."), ""]
    scale, discrete = _scale(a), a.model.is_discrete
    if a.modes:
        out += [("| # | eigenvalue | stability | controllable (margin) | observable (margin) "
                "| part | narrow |"), "|---:|---|---|---|---|---:|---|"]
        for k, m in enumerate(a.modes):
            out.append(f"| {k + 1} | {_eig(m.value, scale=scale, discrete=discrete)} | {_stability_word(m)} | "
                       f"{'yes' if m.controllable else 'no'} ({_num(shown_value(m.controllability_margin))}) | "
                       f"{'yes' if m.observable else 'no'} ({_num(shown_value(m.observability_margin))}) | "
                       f"{_PART_ORDER.index(m.part) + 1} | {'**yes**' if m.narrow else ''} |")
    else:
        out.append("None (the model has no states).")
    out += [f"> {line}" for line in _narrow_lines(a)]
    out.append("")

    out += ["## Hankel singular values of the stable part", ""]
    out += [line.strip() for line in _hsv_text(a)]
    out += ["", "---", "", f"*{SAFETY_CAUTION}*"]
    return "\n".join(out) + "\n"


def _certificate_verdict(cert) -> tuple:
    """The verdict word and what decided it, from the certificate's fields."""
    tol = short_number(cert.tolerance)
    if cert.criterion == "not comparable":
        return "NOT EQUIVALENT", "the models cannot be compared"
    if cert.criterion == "exact rational arithmetic":
        return (("EQUIVALENT" if cert.equivalent else "NOT EQUIVALENT"),
                "decided by exact rational arithmetic")
    basis = cert.verdict_basis
    relative = short_number(cert.relative_error)
    attainable = short_number(cert.attainable_accuracy)
    if basis == "attainable accuracy":
        return (f"EQUIVALENT to the attainable accuracy {attainable}",
                (f"relative peak error {relative} > tolerance {tol}, within what floating "
                "point can resolve at every frequency"))
    if basis == "unresolved":
        return ("UNDECIDED", (f"a difference above the tolerance {tol} and the attainable "
                f"accuracy {attainable}, but not clearly above rounding"))
    if basis == "no frequency":
        return "UNDECIDED", "no frequency could be examined"
    if basis == "boundary pole":
        return "NOT EQUIVALENT", "the difference has a pole on the boundary"
    if basis == "resolved":
        return ("NOT EQUIVALENT", (f"relative peak error {relative} > tolerance {tol}, and "
                f"far above the attainable accuracy {attainable}"))
    sign = "<=" if cert.relative_error <= cert.tolerance else ">"
    return ("EQUIVALENT" if cert.equivalent else "NOT EQUIVALENT",
            f"relative peak error {relative} {sign} tolerance {tol}")


def certificate_text(cert, *, caution: bool = True, labels=None) -> str:
    """A plain, readable report of an equivalence certificate.

    Parameters
    ----------
    cert : EquivalenceCertificate
    caution : bool, optional
        End with the safety caution (default).  Pass False only when the caution is
        printed elsewhere in the same report.
    labels : (str, str), optional
        How to call the two models (file names, say); default their names.
    """
    def label(k):
        who = "model A" if k == 0 else "model B"
        if labels is not None:
            return f"{who} ({labels[k]})"
        name = cert.names[k]
        return f"{who} {name!r}" if name else who

    verdict, decided = _certificate_verdict(cert)
    lines = ["Transfer-matrix equivalence certificate", "",
             f"  Verdict:               {verdict} ({decided})"]
    lines.append(f"  Compared:              {label(0)}, {counted(cert.orders[0], 'state')}, "
                 f"against {label(1)}, {counted(cert.orders[1], 'state')}")
    if cert.criterion != "not comparable":
        domain = ("discrete time, sample time " + f"{cert.sample_time:g}"
                  if cert.is_discrete else "continuous time")
        lines.append(f"  Time domain:           {domain}")
        if math.isfinite(cert.attainable_accuracy):
            at = frequency_phrase(cert.decision_frequency, cert.is_discrete, cert.sample_time)
            lines.append(f"  Attainable accuracy:   {short_number(cert.attainable_accuracy)} "
                         f"relative, at {at} (first-order rounding bound of evaluating and "
                         "storing both models; Higham 2002)")
        order_note = ""
        if (cert.criterion == "exact rational arithmetic" and not cert.equivalent
                and cert.difference_order == 0):
            order_note = " at the rank tolerance; the exact comparison finds a difference"
        lines.append(f"  Order of difference:   {cert.difference_order} "
                     f"({cert.difference_order_method or 'minimal realization of A - B'}"
                     f"{order_note})")
        if cert.peak_error > 0 and cert.difference_order == 0 and cert.d_error > 0:
            where = " (a constant: the same at every frequency)"
        elif cert.peak_error > 0:
            where = f" at {frequency_phrase(cert.peak_frequency, cert.is_discrete, cert.sample_time)}"
        else:
            where = ""
        method = f"; {cert.peak_error_method}" if cert.peak_error_method else ""
        peak = short_number(cert.peak_error)
        if (cert.criterion == "exact rational arithmetic" and not cert.equivalent
                and cert.peak_error <= cert.attainable_accuracy * max(cert.reference_gain, 0.0)):
            # the exact comparison found a difference that floating point cannot resolve:
            # say so, so that "0" is not read as "no difference"
            peak = (f"{peak} in floating point (below what floating point resolves; the exact "
                    "comparison finds a difference)")
        lines.append(f"  Peak error:            {peak}{where}{method}")
        lines.append(f"  Relative error:        {short_number(cert.relative_error)} "
                     f"(of the reference gain {short_number(cert.reference_gain)})")
        lines.append(f"  Markov parameters:     {cert.compared_markov_parameters} compared, "
                     f"largest relative difference {short_number(cert.markov_error)}")
        lines.append("  Feedthrough D:         "
                     + ("identical" if cert.d_error == 0 else
                        f"differs by {short_number(cert.d_error)} (spectral norm)"))
        if cert.exact_equal is not None:
            lines.append("  Exact comparison:      "
                         + ("identical" if cert.exact_equal else "different"))
        if cert.fragile:
            lines.append("  Rank decisions:        FRAGILE (the order of the difference "
                         "depends on the tolerance)")
    lines.append("")
    lines.append("Reasons:")
    for sentence in cert.reasons:
        lines.append(f"  - {sentence}")
    if caution:
        lines.append("")
        lines.append(SAFETY_CAUTION)
    return "\n".join(lines)
