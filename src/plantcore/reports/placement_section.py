"""How a placement suggestion reads: text and markdown tables, and the HTML report section.

Renders :class:`plantcore.structure.placement.PlacementSuggestion` and computes nothing.
Margins at rounding level are shown as 0 (:func:`plantcore.core.wording.shown_value`).
"""

from __future__ import annotations

from plantcore.core.wording import SAFETY_CAUTION, counted, short_number, shown_value
from plantcore.reports.style import escape, html_number

__all__ = ["placement_html", "placement_markdown", "placement_report_html", "placement_text"]

_HEADERS = ("rank", "candidate", "restores", "margin", "goal margin", "restored margin",
            "minimal order", "reaches goal")


def _value(z) -> str:
    z = complex(z)
    re, im = shown_value(z.real), shown_value(z.imag)
    if im == 0:
        return short_number(re)
    return f"{short_number(re)} {'+' if im > 0 else '-'} {short_number(abs(im))}j"


def _margin(x) -> str:
    return short_number(shown_value(x))


def _change(k: int) -> str:
    return f"{k:+d}" if k else "0"


def _nouns(s):
    if s.kind == "actuator":
        return "actuator", "inputs", "move", "uncontrollable"
    return "sensor", "outputs", "see", "unobservable"


def _goal_words(s) -> str:
    goal = s.goal
    if s.target_margin is not None:
        goal += f", every goal margin at least {s.target_margin:g}"
    return goal


def _summary_lines(s) -> list:
    """Plain sentences shared by the text and markdown forms."""
    _, signals, verb, _ = _nouns(s)
    lines = []
    if s.deficient_modes:
        values = ", ".join(_value(z) for z in s.deficient_modes[:8])
        more = f" (+{len(s.deficient_modes) - 8} more)" if len(s.deficient_modes) > 8 else ""
        lines.append(f"now: {counted(len(s.deficient_modes), 'mode')} the {signals} cannot "
                     f"{verb}: {values}{more}")
    else:
        lines.append(f"now: the {signals} {verb} every mode")
    if s.narrow_modes:
        lines.append("near cancellations (margin below 1e-4): "
                     + ", ".join(_value(z) for z in s.narrow_modes[:8]))
    lines.append(f"smallest margin now {_margin(s.base_margin)}; minimal order {s.minimal_order}")
    if s.recommended:
        lines.append(f"recommended: {', '.join(s.recommended)} -> goal margin "
                     f"{_margin(s.margin)}, minimal order {s.minimal_order} -> "
                     f"{s.minimal_order_with_recommended}"
                     + ("" if s.reaches_goal else " (does NOT reach the goal)"))
    elif s.reaches_goal:
        lines.append(f"recommended: nothing to add (goal margin {_margin(s.margin)})")
    else:
        lines.append("recommended: no candidate helps")
    if not s.achievable:
        out_of_reach = ("; out of reach of every candidate: "
                        + ", ".join(_value(z) for z in s.unreachable_modes[:8])
                        if s.unreachable_modes else "")
        lines.append("achievable: NO, no set of these candidates reaches the goal"
                     + out_of_reach)
    proven = s.smallest_proven and s.recommended and "exhaustive" not in s.search
    lines.append(f"search: {s.search}" + ("; no smaller set exists" if proven else ""))
    st = s.structural
    alone = f"with no {signals} at all the pattern would need {st.minimum_count}"
    if st.structurally_complete:
        lines.append(f"structural (maximum matching of the sparsity pattern): complete with "
                     f"the {signals} as they are; {alone}")
    else:
        where = ", ".join(st.states_needing_signal[:8])
        lines.append(f"structural (maximum matching of the sparsity pattern): "
                     f"{st.additional_count} more {signals} needed, at {where}; {alone}")
    return lines


def _rows(s):
    for k, r in enumerate(s.ranking, start=1):
        yield (str(k), r.name, str(r.restored), _margin(r.margin), _margin(r.goal_margin),
               _margin(r.restored_margin) if r.restored else "-", _change(r.minimal_order_change),
               ("yes" if r.reaches_goal else "no") + (" (fragile)" if r.fragile else ""))


def placement_text(s, *, caution: bool = True, max_rows: int | None = None) -> str:
    """The suggestion as plain text: a summary, the ranked table, notes, the caution."""
    kind = _nouns(s)[0]
    title = f"{kind.capitalize()} placement" + (f" for model '{s.model_name}'" if s.model_name
                                                else "")
    lines = [title, "=" * len(title), f"goal: {_goal_words(s)}"]
    lines += _summary_lines(s)
    rows = list(_rows(s))
    shown = rows if max_rows is None else rows[:max_rows]
    widths = [max(len(h), *(len(row[i]) for row in shown)) if shown else len(h)
              for i, h in enumerate(_HEADERS)]
    lines.append("")
    lines.append("Candidates, best first (margins: smallest singular value of "
                 + ("[A - lambda I, B, b]" if kind == "actuator" else "[A - lambda I; C; c]")
                 + " over the modes, relative to the model's scale)")
    lines.append("  " + "  ".join(h.ljust(w) for h, w in zip(_HEADERS, widths)).rstrip())
    for row in shown:
        lines.append("  " + "  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip())
    if len(shown) < len(rows):
        lines.append(f"  ... {len(rows) - len(shown)} more candidates")
    for note in s.notes:
        lines.append(f"note: {note}")
    if caution:
        lines.append("")
        lines.append(SAFETY_CAUTION)
    return "\n".join(lines) + "\n"


def placement_markdown(s, *, caution: bool = True) -> str:
    """The suggestion as markdown: a bullet summary and the ranked table."""
    kind = _nouns(s)[0]
    title = f"## {kind.capitalize()} placement" + (f": {s.model_name}" if s.model_name else "")
    lines = [title, "", f"- goal: {_goal_words(s)}"]
    lines += [f"- {line}" for line in _summary_lines(s)]
    lines += ["", "| " + " | ".join(_HEADERS) + " |", "|" + "---|" * len(_HEADERS)]
    for row in _rows(s):
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in row) + " |")
    if s.notes:
        lines.append("")
        lines += [f"> {note}" for note in s.notes]
    if caution:
        lines += ["", f"*{SAFETY_CAUTION}*"]
    return "\n".join(lines) + "\n"


def placement_html(s, *, max_rows: int = 12) -> str:
    """The suggestion as an HTML fragment (a summary list and the ranked table) for the
    report's placement section."""
    kind = _nouns(s)[0]
    items = "".join(f"<li>{escape(line)}</li>" for line in
                    [f"goal: {_goal_words(s)}"] + _summary_lines(s))
    cells = []
    for row in list(_rows(s))[:max_rows]:
        rank, name, restores, margin, goal_margin, restored_margin, order, reaches = row
        cells.append(f"<tr><td class=\"n\">{rank}</td><td><code>{escape(name)}</code></td>"
                     f"<td class=\"n\">{restores}</td>"
                     + "".join(f"<td class=\"n\">{escape(v)}</td>"
                               for v in (margin, goal_margin, restored_margin, order))
                     + f"<td>{escape(reaches)}</td></tr>")
    head = "".join(f"<th>{escape(h)}</th>" for h in _HEADERS)
    more = (f"<p>{len(s.ranking) - max_rows} more candidates are ranked in "
            "<code>plantcore suggest</code>.</p>" if len(s.ranking) > max_rows else "")
    notes = "".join(f"<p class=\"note\">{escape(n)}</p>" for n in s.notes)
    return (f"<h3>{escape(kind.capitalize())}s</h3><ul>{items}</ul>"
            f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(cells)}</tbody></table>"
            f"{more}{notes}")


def placement_report_html(contents) -> str:
    """The report's placement section (after the modes), or ``""`` when every mode passes
    both PBH tests clearly: reads ``contents.placement`` (computed by
    :func:`plantcore.analysis.collect_report`)."""
    suggestions = getattr(contents, "placement", ())
    if not suggestions:
        return ""
    body = "".join(placement_html(s) for s in suggestions)
    return ('<section id="placement">\n<h2><span class="num">&#8627;</span>Where to add an '
            f'actuator or sensor</h2>\n<p class="lead">{_LEAD}</p>\n{body}\n</section>\n')


_LEAD = ("Some mode is not controllable, not observable, or only barely. Each candidate "
            "below is one actuator (a unit input at a state) or one sensor (a measurement of a "
            "state) added to the model; its margin is the smallest singular value of "
            "[A &minus; &lambda;I, B, b] (or [A &minus; &lambda;I; C; c]) over the modes, the "
            "measure of the mode table. The recommended set is a smallest set found that "
            "makes every mode reachable, checked on the model with the set added. "
            f"{html_number(1e-4)} is the near-cancellation margin.")
