"""A self-contained HTML report of one model: verdicts, parts, decisions, modes and plots.

The report is one HTML file with everything inside it: the style sheet is inline, the three
plots are PNG images embedded as base64 ``data:`` addresses, and there is no script, no
external style sheet, no web font and no address on any network, so the file opens the same
way on an offline machine, in an e-mail attachment or in a design-review archive, and prints
cleanly (a print style sheet drops the on-screen navigation and keeps sections whole).

Two steps, kept apart:

* :func:`plantcore.analysis.report_contents.collect_report` runs the library (analysis,
  minimal realization, balanced truncation, equivalence certificates, peak gain, sampled
  frequency responses) and keeps the results in a ``ReportContents``.
* :func:`render_html` turns a ``ReportContents`` into the HTML text.  It reads result
  objects only and computes nothing.

:func:`write_html_report` does both for a model, or renders an analysis (or contents) the
caller already has without repeating it.

Every name that comes from a model (model, state, input and output names) is escaped with
:func:`html.escape` (``quote=True``) before it enters the page, and none is ever placed in
a plot, where matplotlib would interpret ``$`` as mathematics.

The module runs a little over 600 lines: one renderer per report section, which read best
side by side with the shared style sheet.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.analysis.analyze import Analysis
from plantcore.analysis.report_contents import (
    DEFAULT_RELATIVE_ERROR,
    ReportContents,
    _progress,
    collect_report,
)
from plantcore.core.safe_norms import frobenius
from plantcore.core.version import __version__
from plantcore.core.wording import SAFETY_CAUTION, counted, shown_eigenvalue, shown_value
from plantcore.files.safe_write import atomic_write_text
from plantcore.reports.placement_section import placement_report_html
from plantcore.reports.plots import PART_LABELS, eigenvalue_plot, frequency_plot, hankel_plot
from plantcore.reports.style import escape, html_fragment, html_number, html_page
from plantcore.reports.text import decision_method, shown_removed_modes
from plantcore.structure.pbh_measures import threads_by_size
from plantcore.structure.removed_modes import hidden_mode_message

__all__ = [
    "DEFAULT_RELATIVE_ERROR",
    "PART_LABELS",
    "ReportContents",
    "WrittenReport",
    "analysis_html",
    "collect_report",
    "render_html",
    "write_html_report",
]

_PART_MEANING = {
    "controllable_observable": "the inputs move these states and the outputs see them: the "
                               "whole input-output behaviour lives here",
    "controllable_unobservable": "the inputs move these states but no output sees them",
    "uncontrollable_observable": "no input moves these states, but the outputs see them "
                                 "(they show up only through initial conditions)",
    "uncontrollable_unobservable": "no input moves these states and no output sees them",
}


# =============================================================================================
# Formatting helpers
# =============================================================================================

_e = escape
_num = html_number


def _complex(z, digits: int = 4) -> str:
    z = complex(z)
    re, im = z.real, z.imag
    if im == 0 and re == 0:
        return "0"
    if im == 0:
        return _num(re, digits)
    sign = "+" if im > 0 else "&minus;"
    return f"{_num(re, digits)} {sign} {_num(abs(im), digits)}j"


def _yes_no(flag: bool) -> str:
    return "yes" if flag else "no"


# =============================================================================================
# HTML
# =============================================================================================

_SECTIONS = [
    ("model", "The model"),
    ("verdicts", "Verdicts"),
    ("part-sizes", "Kalman parts"),
    ("rank-decisions", "Rank decisions"),
    ("modes", "Modes"),
    ("eigenvalues", "Eigenvalue map"),
    ("frequency-response", "Frequency response"),
    ("hankel-singular-values", "Hankel singular values and truncation"),
    ("certificate", "Equivalence certificate"),
    ("caution", "Validation and safety"),
]


def _section(sid: str, body: str, lead: str = "") -> str:
    number = [s for s, _ in _SECTIONS].index(sid) + 1
    title = dict(_SECTIONS)[sid]
    lead_html = f'<p class="lead">{lead}</p>' if lead else ""
    return (f'<section id="{sid}">\n<h2><span class="num">{number}</span>{_e(title)}</h2>\n'
            f"{lead_html}\n{body}\n</section>\n")


def _names_list(names, what: str) -> str:
    if not names:
        return f"<p>No {what}.</p>"
    items = "".join(f"<li><code>{_e(x)}</code></li>" for x in names)
    if len(names) > 12:
        return (f"<details><summary>{len(names)} {what}</summary><ul class=\"names\">{items}"
                "</ul></details>")
    return f'<ul class="names">{items}</ul>'


def _table(headers, rows, *, tall: bool = False) -> str:
    """A table with a header row (``headers``: HTML cells' contents) over rendered rows, in
    a box that scrolls sideways (and, when ``tall``, down) rather than widen the page."""
    head = "".join(f"<th>{h}</th>" for h in headers)
    box = "table-wrap tall" if tall else "table-wrap"
    return (f'<div class="{box}"><table><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(rows)}</tbody></table></div>")


def _key_value_table(pairs) -> str:
    """A two-column table of (label, value) pairs, labels as row headers."""
    return ('<div class="table-wrap"><table><tbody>'
            + "".join(f"<tr><th>{a}</th><td>{b}</td></tr>" for a, b in pairs)
            + "</tbody></table></div>")


def _model_section(c: ReportContents) -> str:
    m = c.model
    domain = ("continuous time" if not m.is_discrete
              else f"discrete time, sample time {_num(m.dt, 6)}")
    rows = [
        ("Name", _e(m.name) if m.name else "<em>unnamed</em>"),
        ("File", f"<code>{_e(c.source)}</code>" if c.source else "<em>given in Python</em>"),
        ("Time domain", domain),
        ("States, inputs, outputs", f"{m.n}, {m.n_inputs}, {m.n_outputs}"),
        ("Rank tolerance (relative)", _num(c.analysis.tolerance)),
    ]
    if c.peak_gain is not None:
        pg = c.peak_gain
        unit = "rad/sample" if m.is_discrete else "rad per time unit"
        boundary = [mode for mode in c.analysis.modes if getattr(mode, "marginal", False)
                    and mode.part == "controllable_observable"]
        if boundary and math.isfinite(pg.value):
            rows.append(("Peak gain", ("&infin;: a pole lies on the stability boundary (the "
                                      f"search stopped at {_num(pg.value, 4)})")))
        else:
            rows.append(("Peak gain", f"{_num(pg.value, 4)} at frequency {_num(pg.frequency, 4)} {unit}"))
    table = _key_value_table(rows)
    names = (f"<h3>Inputs</h3>{_names_list(m.inputs, 'inputs')}"
             f"<h3>Outputs</h3>{_names_list(m.outputs, 'outputs')}"
             f"<h3>States</h3>{_names_list(m.states, 'states')}")
    return _section("model", table + names)


def _tile(question: str, answer: str, why: str, good: bool | None) -> str:
    cls = "tile" + ("" if good is None else (" good" if good else " warn"))
    return (f'<div class="{cls}"><div class="q">{question}</div><div class="a">{answer}</div>'
            f'<div class="why">{why}</div></div>')


def _verdict_section(c: ReportContents) -> str:
    a = c.analysis
    m = c.model
    r = a.minimal_order
    removed = a.removed_unstable_modes
    tiles = [
        _tile("Removed modes not stable", str(len(removed)),
              "the minimal realization removes a mode that is unstable or on the stability "
              "boundary; see the warning above" if removed else
              "every mode the minimal realization removes is stable", not removed),
        _tile("Minimal", _yes_no(a.is_minimal),
              f"{r} of the {m.n} states shape the input-output behaviour"
              + ("." if a.is_minimal else f"; {m.n - r} can be removed."), a.is_minimal),
        _tile("Stabilizable", _yes_no(a.stabilizable),
              "every mode that is not stable can be moved by the inputs" if a.stabilizable
              else "a mode that is not stable lies out of reach of every input", a.stabilizable),
        _tile("Detectable", _yes_no(a.detectable),
              "every mode that is not stable is seen by the outputs" if a.detectable
              else "a mode that is not stable is invisible to every output", a.detectable),
    ]
    margins = [d.margin for d in a.decisions]
    smallest = min(margins) if margins else math.inf
    tiles.append(_tile("Rank decisions", "tolerance-sensitive" if a.fragile else "clear",
                       f"smallest margin {_num(smallest)} (a factor below 100 would be fragile)",
                       not a.fragile))
    cert = c.certificate
    if cert is not None:
        if cert.verdict == "undecided":
            answer, why = ("undecided", ("a difference above the tolerance that rounding may "
                           "explain; see section 9"))
        elif cert.equivalent:
            answer = "yes"
            why = ("same transfer function as the original"
                   if cert.verdict_basis != "attainable accuracy" else
                   f"same transfer function to the attainable accuracy "
                   f"{_num(cert.attainable_accuracy)}")
        else:
            answer, why = "no", "the comparison found a difference; see section 9"
        tiles.append(_tile("Minimal model certified", answer, why, bool(cert.equivalent)))
    else:
        tiles.append(_tile("Minimal model certified", "not checked", _e(c.certificate_problem), False))
    red = c.reduction
    if red is not None:
        measured = (c.reduced_certificate.peak_error if c.reduced_certificate is not None
                    else None)
        within = measured is None or measured <= red.error_bound * (1 + 1e-6) + 1e-300
        tiles.append(_tile("Reduced model", f"{red.order} states",
                           f"guaranteed error at most {_num(red.error_bound)}; measured "
                           f"{_num(measured)}", within))
    narrow = a.narrow_modes
    tiles.append(_tile("Near cancellations", str(len(narrow)),
                       "modes that pass the controllability or observability test only "
                       f"narrowly (margin below {_num(a.narrow_margin)})", None if not narrow else False))
    body = '<div class="tiles">' + "".join(tiles) + "</div>"
    du, do = a.distance_to_uncontrollability, a.distance_to_unobservability
    body += (f"<p>Estimated distance (relative to the model's scale) to the nearest model that "
             f"is uncontrollable: {_num(du.value)}; unobservable: {_num(do.value)}. "
             "Both are upper bounds found by a local search.</p>")
    return _section("verdicts", body)


def _hidden_alert(c: ReportContents) -> str:
    """The warning about removed modes that are not stable, shown above every section."""
    removed = c.analysis.removed_unstable_modes
    if not removed:
        return ""
    text = hidden_mode_message(shown_removed_modes(removed, c.model), "the minimal realization")
    return f'<div class="alert" role="alert">WARNING: {_e(text)}</div>'


def _parts_section(c: ReportContents) -> str:
    a = c.analysis
    sizes = tuple(a.sizes)
    names = list(PART_LABELS)
    n = max(sum(sizes), 1)
    stack = "".join(
        f'<span class="p{i + 1}" style="width:{100.0 * s / n:.2f}%">{s if s else ""}</span>'
        for i, s in enumerate(sizes) if s)
    rows = []
    for i, (part, size) in enumerate(zip(names, sizes)):
        directions = a.part_directions.get(part, ())
        shown = directions[:6]
        more = len(directions) - len(shown)
        desc = "<br>".join(f"<code>{_e(d)}</code>" for d in shown)
        if more > 0:
            desc += f"<br>and {more} more"
        rows.append(f'<tr><td><span class="swatch p{i + 1}"></span>{i + 1}. {PART_LABELS[part]}'
                    f'</td><td class="n">{size}</td><td>{_PART_MEANING[part]}</td>'
                    f"<td>{desc or '&ndash;'}</td></tr>")
    table = _table(("Part", "States", "Meaning", "Spanned by (in the model's state names)"), rows)
    mr = a.minimal
    lead = (f"The {c.model.n} states split into four parts (Kalman decomposition, condition "
            f"number of the transformation {_num(a.decomposition.condition)}). The minimal "
            f"realization keeps part 1: {mr.removed_uncontrollable} uncontrollable and "
            f"{mr.removed_unobservable} unobservable states are removed.")
    return _section("part-sizes", f'<div class="stack">{stack}</div>' + table, lead)


def _decision_row(d) -> str:
    width = 100.0 if not math.isfinite(d.margin) else min(100.0, 10.0 * math.log10(max(d.margin, 1.0)))
    bar = f'<span class="bar{" fragile" if d.fragile else ""}" style="width:{width * 0.6:.1f}px"></span>'
    status = '<span class="flag">fragile</span>' if d.fragile else '<span class="ok">clear</span>'
    if d.window_outcome:
        status += f"<br><small>{_e(d.window_outcome)}</small>"
    return (f"<tr><td>{_e(d.label)}</td><td>{_e(decision_method(d))}</td>"
            f"<td class=\"n\">{d.rank} of {d.size}</td>"
            f"<td class=\"n\">{_num(shown_value(d.smallest_kept)) if d.rank else 'none'}</td>"
            f"<td class=\"n\">{_num(shown_value(d.largest_dropped))}</td>"
            f"<td class=\"n\">{_num(d.tolerance)}</td><td class=\"n\">{_num(d.margin)} {bar}</td>"
            f"<td>{status}</td></tr>")


_DECISION_HEADERS = ("Decision", "Decided by", "Rank", "Smallest kept", "Largest dropped",
                     "Tolerance", "Margin", "Status")


_DECISIONS_LEAD = ("Every rank was decided from singular values of blocks produced by orthogonal "
                   "transformations (a staircase step), or checked mode by mode (the modal "
                   "certificate, whose rank counts the modes it proved controllable or observable). "
                   "Values are relative to the model's scale; values at rounding level are shown as "
                   "0. The margin is how far the decision lies from the tolerance, as a factor; "
                   "below 100 the answer depends on the tolerance and the decision is marked fragile.")


def _decisions_section(c: ReportContents) -> str:
    lead = _DECISIONS_LEAD
    a = c.analysis
    decisions = list(a.decisions)
    if not decisions:
        return _section("rank-decisions",
                        "<p>The model has no states, so no rank was decided.</p>", lead)
    if len(decisions) <= FULL_MODE_TABLE_LIMIT:
        return _section("rank-decisions",
                        _table(_DECISION_HEADERS, [_decision_row(d) for d in decisions]), lead)
    closest = sorted(decisions, key=lambda d: (not d.fragile, d.margin))[:ATTENTION_ROWS]
    body = (f"<p>{len(decisions)} decisions, {sum(d.fragile for d in decisions)} fragile. "
            f"The {len(closest)} closest to the tolerance:</p>"
            + _table(_DECISION_HEADERS, [_decision_row(d) for d in closest])
            + f'<details class="all-decisions"><summary>All {len(decisions)} decisions</summary>'
            + _table(_DECISION_HEADERS, [_decision_row(d) for d in decisions], tall=True)
            + "</details>")
    return _section("rank-decisions", body, lead)


#: Up to this many modes the mode table is shown whole; above it the section opens with a
#: summary and the modes that deserve a look, and the full table is collapsed.
FULL_MODE_TABLE_LIMIT = 40
#: How many modes the summary lists (those nearest a cancellation or the boundary first).
ATTENTION_ROWS = 12


def _eigenvalue_scale(model) -> float:
    """The scale eigenvalues are shown against (``||A||_F``): see ``shown_eigenvalue``."""
    return frobenius(model.A) if model.n else 1.0


def _stability_cell(mode) -> str:
    if getattr(mode, "marginal", False):
        return '<span class="flag">marginal</span>'
    return "yes" if mode.stable else '<span class="flag">no</span>'


def _mode_row(c: ReportContents, k: int, scale: float) -> str:
    mode = c.analysis.modes[k]
    part = mode.part
    idx = list(PART_LABELS).index(part) + 1 if part in PART_LABELS else 0
    note = '<span class="flag">near cancellation</span>' if mode.narrow else ""
    value = shown_eigenvalue(mode.value, scale, discrete=c.model.is_discrete)
    if k < len(c.mode_zero_distances):
        zd = c.mode_zero_distances[k]
        if zd.nearest_zero is None:
            zero_cells = '<td class="n">none</td><td class="n">&ndash;</td>'
        else:
            zero = shown_eigenvalue(zd.nearest_zero, scale, discrete=c.model.is_discrete)
            zero_cells = (f'<td class="n">{_complex(zero)}</td>'
                          f'<td class="n">{_num(shown_value(zd.relative_distance))}</td>')
    else:
        zero_cells = '<td class="n">&ndash;</td><td class="n">&ndash;</td>'
    return (f'<tr><td class="n">{k + 1}</td><td class="n">{_complex(value)}</td>'
            f"<td>{_stability_cell(mode)}</td>"
            f"<td title=\"{_e(PART_LABELS.get(part, part))}\"><span class=\"swatch p{idx}\"></span>"
            f"{idx}</td>"
            f'<td class="n">{_num(shown_value(mode.controllability_margin))}</td>'
            f'<td class="n">{_num(shown_value(mode.observability_margin))}</td>'
            f"{zero_cells}<td>{note}</td></tr>")


_MODE_HEADERS = ("#", "Eigenvalue", "Stable", "Part",
                 "Controllability margin<sup>a</sup>", "Observability margin<sup>b</sup>",
                 "Nearest transmission zero", "Relative distance<sup>c</sup>", "Note")
_MODE_NOTES = ('<p class="lead"><small><sup>a</sup> on the controllable part of the model for a '
               "controllable mode, on the whole model for an uncontrollable one. "
               "<sup>b</sup> on the observable part for an observable mode, on the whole model "
               "otherwise. <sup>c</sup> |&lambda; &minus; z| / max(|&lambda;|, largest "
               "|&lambda;|).</small></p>")


def _attention_order(c: ReportContents) -> list:
    """Mode indices, those that deserve a look first: not stable, then narrow margins or a
    zero close by (smallest of the three relative measures first)."""
    a = c.analysis
    def key(k):
        m = a.modes[k]
        zd = (c.mode_zero_distances[k].relative_distance if k < len(c.mode_zero_distances)
              else math.inf)
        return (m.stable, min(m.controllability_margin, m.observability_margin, zd), k)
    return sorted(range(len(a.modes)), key=key)


def _mode_summary(c: ReportContents) -> str:
    """Counts by part and stability, for a table too long to read first."""
    a = c.analysis
    rows = []
    for i, part in enumerate(PART_LABELS):
        sel = [m for m in a.modes if m.part == part]
        if not sel:
            continue
        stable = sum(1 for m in sel if m.stable)
        marginal = sum(1 for m in sel if getattr(m, "marginal", False))
        rows.append(f'<tr><td><span class="swatch p{i + 1}"></span>{i + 1}. '
                    f'{_e(PART_LABELS[part])}</td><td class="n">{len(sel)}</td>'
                    f'<td class="n">{stable}</td><td class="n">{marginal}</td>'
                    f'<td class="n">{len(sel) - stable - marginal}</td>'
                    f'<td class="n">{sum(1 for m in sel if m.narrow)}</td></tr>')
    return _table(("Part", "Modes", "Stable", "Marginal", "Unstable", "Near cancellation"), rows)


_MODES_LEAD = ("One row per eigenvalue; the part is the Kalman part of section 3. The margins "
               "are the smallest singular values of "
               "[A &minus; &lambda;I, B] and [A &minus; &lambda;I; C] relative to the model's "
               "scale, the size of the smallest change of the data that would make the mode "
               "uncontrollable or unobservable. A controllable mode is measured on the "
               "controllable part of the model (so an uncontrollable copy of the same eigenvalue "
               "does not hide it), an uncontrollable one on the whole model; likewise for "
               "observability. The nearest transmission zero and its distance "
               "|&lambda; &minus; z| / max(|&lambda;|, largest |&lambda;|) show how close each pole "
               "comes to being cancelled. Values at rounding level are shown as 0.")


def _modes_section(c: ReportContents) -> str:
    lead = _MODES_LEAD
    a = c.analysis
    n_modes = len(a.modes)
    if not n_modes:
        return _section("modes", "<p>The model has no states.</p>", lead)
    scale = _eigenvalue_scale(c.model)
    if c.zeros is not None:
        z = c.zeros
        zeros_line = (f"<p>Transmission zeros: {z.finite_zeros.size} finite, "
                      f"{z.infinite_zero_count} at infinity; normal rank of the transfer matrix "
                      f"{z.normal_rank}{' (a rank decision near its tolerance: fragile)' if z.fragile else ''}.</p>")
    else:
        zeros_line = f"<p>{_e(c.zeros_problem or 'Transmission zeros not computed.')}</p>"
    if n_modes <= FULL_MODE_TABLE_LIMIT:
        rows = [_mode_row(c, k, scale) for k in range(n_modes)]
        return _section("modes", zeros_line + _table(_MODE_HEADERS, rows) + _MODE_NOTES, lead)
    first = _attention_order(c)[:ATTENTION_ROWS]
    summary = (_mode_summary(c) + f"<h3>The {len(first)} modes that deserve a look first</h3>"
               "<p>Modes that are not stable, then those with the smallest margin or the "
               "nearest transmission zero.</p>"
               + _table(_MODE_HEADERS, [_mode_row(c, k, scale) for k in first]))
    full = (f'<details class="all-modes"><summary>All {n_modes} modes</summary>'
            + _table(_MODE_HEADERS, [_mode_row(c, k, scale) for k in range(n_modes)], tall=True)
            + "</details>")
    return _section("modes", zeros_line + summary + full + _MODE_NOTES, lead)


def _figure_html(src_alt, caption: str) -> str:
    src, alt = src_alt
    return (f'<figure><img src="{src}" alt="{_e(alt)}">'
            f"<figcaption>{_e(caption or alt)}</figcaption></figure>")


def _hankel_section(c: ReportContents, plot) -> str:
    red = c.reduction
    parts = []
    if plot is not None:
        parts.append(_figure_html(plot, plot[1]))
    if red is not None:
        measured = c.reduced_certificate.peak_error if c.reduced_certificate is not None else None
        rows = [
            ("Order chosen by", _e(c.reduction_rule)),
            ("States", (f"{c.model.n} original &rarr; {c.analysis.minimal_order} minimal &rarr; "
                       f"{red.order} reduced")),
            ("Error bound (2 &times; sum of the distinct discarded values)", _num(red.error_bound, 4)),
            ("Measured peak error of the reduced model", _num(measured, 4)),
        ]
        if red.unstable_order:
            rows.append(("Unstable states kept unreduced", str(red.unstable_order)))
        parts.append(_key_value_table(rows))
        hsv = np.asarray(red.hankel_singular_values, dtype=float)
        cells = [
            f"<tr><td class=\"n\">{i + 1}</td><td class=\"n\">{_num(v, 4)}</td>"
            f"<td>{'kept' if i < red.stable_order else 'discarded'}</td></tr>"
            for i, v in enumerate(hsv)]
        is_open = " open" if hsv.size <= FULL_MODE_TABLE_LIMIT else ""
        parts.append(f'<details class="all-hankel"{is_open}><summary>All {hsv.size} values'
                     f"</summary>{_table(('#', 'Value', ''), cells, tall=not is_open)}</details>")
    else:
        parts.append(f"<p>No reduced model: {_e(c.reduction_problem or c.analysis.hankel_note)}</p>")
    lead = ("A balanced truncation of the minimal realization keeps the states with the largest "
            "Hankel singular values. The peak gain of the error never exceeds twice the sum of "
            "the distinct discarded values.")
    return _section("hankel-singular-values", "\n".join(parts), lead)


def _certificate_section(c: ReportContents) -> str:
    cert = c.certificate
    parts = []
    if cert is None:
        parts.append(f"<p>{_e(c.certificate_problem)}</p>")
    else:
        verdict = ('<span class="ok">equivalent</span>' if cert.equivalent
                   else f'<span class="flag">{_e(cert.verdict)}</span>')
        if cert.verdict_basis == "attainable accuracy":
            verdict += f" to the attainable accuracy {_num(cert.attainable_accuracy)}"
        parts.append(f"<p>Original ({c.model.n} states) against the minimal realization "
                     f"({c.analysis.minimal_order} states): {verdict}.</p>")
        parts.append(f"<pre>{_e(cert.to_text(caution=False))}</pre>")
    rc = c.reduced_certificate
    if rc is not None:
        parts.append("<details open><summary>Original against the reduced model</summary>"
                     f"<pre>{_e(rc.to_text(caution=False))}</pre></details>")
    lead = ("The certificate compares transfer functions, not matrices: at every frequency "
            "examined the difference of the two responses is measured and held to the "
            "tolerance and to the accuracy floating point can reach for these models there; "
            "a difference that rounding can explain is never called a difference.")
    return _section("certificate", "\n".join(parts), lead)


def render_html(contents: ReportContents, *, progress=None, fragment: bool = False) -> str:
    """The HTML text of a report.

    Parameters
    ----------
    contents : ReportContents
        From :func:`collect_report`.
    progress : bool or None, optional
        As for :func:`collect_report`.
    fragment : bool, optional
        False (default): a complete HTML document.  True: one ``<div>`` with a style sheet
        scoped to it, to embed in a notebook or another page (see
        :mod:`plantcore.reports.style`).

    Returns
    -------
    str
        Self-contained HTML (no network addresses, no scripts).
    """
    c = contents
    bar = _progress(progress, "report plots", 3)
    try:
        bar.step("eigenvalue map")
        eig = eigenvalue_plot(c)
        bar.step("frequency response")
        freq = frequency_plot(c)
        bar.step("Hankel singular values")
        hank = hankel_plot(c)
    finally:
        bar.close()
    m = c.model
    title = m.name or (os.path.basename(c.source) if c.source else "unnamed model")
    nav = " ".join(f'<a href="#{sid}">{i + 1}&nbsp;{_e(t)}</a>' for i, (sid, t) in enumerate(_SECTIONS))
    body = [
        (f'<header class="report-head"><h1>Model report: {_e(title)}</h1>'
        f"<p>{counted(m.n, 'state')} &middot; {counted(m.n_inputs, 'input')} &middot; "
        f"{counted(m.n_outputs, 'output')} &middot; "
        f"{'discrete' if m.is_discrete else 'continuous'} time</p>"
        f"<p>Made by plantcore {_e(__version__)} on {_e(c.created)}</p></header>"),
        f'<nav class="contents" aria-label="contents">{nav}</nav>',
        _hidden_alert(c),
        _model_section(c),
        _verdict_section(c),
        _parts_section(c),
        _decisions_section(c),
        _modes_section(c),
        _section("eigenvalues", _figure_html(eig, eig[1]),
                 "Where each eigenvalue lies, and which Kalman part it belongs to. Nested "
                 "symbols are repeated eigenvalues that belong to different parts."),
        _section("frequency-response", _figure_html(freq, freq[1]),
                 "The original and the minimal model must coincide"
                 + ("; the reduced model may depart from them by at most the error bound."
                    if c.reduction is not None else ".")),
        _hankel_section(c, hank),
        _certificate_section(c),
        placement_report_html(c),
        _section("caution", f"<p>{_e(SAFETY_CAUTION)}</p>"),
        "<footer>This report is self-contained: it loads nothing from any network.</footer>",
    ]
    text = "\n".join(body)
    if fragment:
        return html_fragment(text)
    return html_page(f"Model report: {title}", text)


def analysis_html(analysis, *, fragment: bool = False) -> str:
    """HTML report of an :class:`plantcore.analysis.Analysis` (used by ``Analysis.to_html``).

    The reduction follows the default rule (:data:`DEFAULT_RELATIVE_ERROR`).  With
    ``fragment=True`` the report is one embeddable ``<div>`` (see :func:`render_html`).
    """
    contents = collect_report(analysis.model, tol=analysis.tolerance, analysis=analysis,
                              progress=False)
    return render_html(contents, progress=False, fragment=fragment)


@dataclass(frozen=True)
class WrittenReport:
    """An HTML report written to a file.

    Attributes
    ----------
    path : pathlib.Path
        The file written.
    contents : ReportContents
        What the report shows (analysis, reduction, certificates).
    """

    path: object
    contents: ReportContents = field(repr=False)


def _check_output(path, protected) -> None:
    """Refuse an output that cannot be written *before* the (possibly long) work.

    The same checks are made again, authoritatively, by :func:`plantcore.files.atomic_write`
    when the file is written; this early look only spares the user a wasted run.
    """
    from plantcore.core.errors import ModelFileError

    display = os.fsdecode(os.fspath(path))
    target = os.path.realpath(display)
    if os.path.isdir(target):
        raise ModelFileError(display, "output", "is a folder; give a file name.")
    folder = os.path.dirname(target)
    if not os.path.isdir(folder):
        raise ModelFileError(display, "output", f"the folder {os.path.dirname(display) or folder} "
                                                "does not exist; create it first.")
    for item in protected:
        item = os.fsdecode(os.fspath(item))
        try:
            same = os.path.exists(target) and os.path.samefile(target, item)
        except OSError:
            same = False
        if same or os.path.realpath(item) == target:
            raise ModelFileError(display, "output", f"is the same file as the input {item}; "
                                                    "refusing to overwrite an input, choose another name.")


@threads_by_size()
def write_html_report(model, path, *, tol=None, order=None, max_error=None, source=None,
                      inputs=(), progress=None, overwrite: bool = True):
    """Write the HTML report of a model to ``path`` (atomically).

    Parameters
    ----------
    model : StateSpaceModel, python-control StateSpace, tuple (A, B, C[, D]), Analysis or ReportContents
        The model to analyse, or an :class:`~plantcore.analysis.analyze.Analysis` already
        made (its analysis is reused, not repeated), or the contents of a report already
        collected (rendered as they are; ``tol``, ``order`` and ``max_error`` must then be
        left out).
    path : str or os.PathLike
        The HTML file to write.
    tol, order, max_error : optional
        As for :func:`~plantcore.analysis.report_contents.collect_report`.
    source : str, optional
        The model's file name, shown in the report; it is also protected from being
        overwritten.
    inputs : iterable of paths, optional
        Further files that must not be overwritten.
    progress : bool or None, optional
        As for :func:`~plantcore.analysis.report_contents.collect_report`.
    overwrite : bool, default True
        False refuses an existing regular file (as :func:`~plantcore.files.atomic_write`);
        the command line passes its ``--force`` here.

    Returns
    -------
    WrittenReport
        The file written and what it shows.

    Examples
    --------
    >>> import os, tempfile
    >>> import plantcore as pc
    >>> out = os.path.join(tempfile.mkdtemp(), "r.html")
    >>> report = write_html_report(([[-1.0, 0.0], [0.0, -2.0]], [[1.0], [0.0]], [[1.0, 1.0]]),
    ...                            out, progress=False)
    >>> report.contents.analysis.minimal_order
    1
    >>> text = report.path.read_text(encoding="utf-8")
    >>> 'id="certificate"' in text and "http" not in text
    True
    """
    protected = tuple(inputs) + ((source,) if source is not None else ())
    _check_output(path, protected)
    if isinstance(model, ReportContents):
        if tol is not None or order is not None or max_error is not None:
            raise ValueError("the report contents are already collected; tol, order and "
                             "max_error cannot change them (collect new contents instead).")
        contents = model
    else:
        analysis = model if isinstance(model, Analysis) else None
        if analysis is not None and tol is not None and tol != analysis.tolerance:
            raise ValueError(f"the analysis was made with tolerance {analysis.tolerance:g}; "
                             f"tol={tol!r} would need a new analysis (pass the model instead).")
        contents = collect_report(model if analysis is None else analysis.model, tol=tol,
                                  order=order, max_error=max_error, source=source,
                                  analysis=analysis, progress=progress)
    text = render_html(contents, progress=progress)
    return WrittenReport(atomic_write_text(path, text, inputs=protected, overwrite=overwrite),
                         contents)
