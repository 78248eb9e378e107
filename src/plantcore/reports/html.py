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

import html
import math
import os
from dataclasses import dataclass, field

import numpy as np

from plantcore.analysis.analyze import Analysis
from plantcore.analysis.report_contents import (DEFAULT_RELATIVE_ERROR, ReportContents,
                                                _progress, collect_report)
from plantcore.core.version import __version__
from plantcore.core.wording import SAFETY_CAUTION
from plantcore.files.safe_write import atomic_write_text
from plantcore.reports.plots import PART_LABELS, eigenvalue_plot, frequency_plot, hankel_plot
from plantcore.structure.removed_modes import hidden_mode_message

__all__ = [
    "DEFAULT_RELATIVE_ERROR",
    "PART_LABELS",
    "ReportContents",
    "WrittenReport",
    "collect_report",
    "render_html",
    "analysis_html",
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

def _e(value) -> str:
    """HTML-escaped text (quotes too)."""
    return html.escape(str(value), quote=True)


def _num(x, digits: int = 3) -> str:
    if x is None:
        return "&ndash;"
    x = float(x)
    if math.isnan(x):
        return "&ndash;"
    if math.isinf(x):
        return "&infin;" if x > 0 else "&minus;&infin;"
    if x == 0:
        return "0"
    text = f"{x:.{digits}g}"
    if "e" in text:
        mant, exp = text.split("e")
        mant = mant.replace("-", "&minus;")
        return f"{mant}&times;10<sup>{int(exp)}</sup>".replace("<sup>-", "<sup>&minus;")
    return text.replace("-", "&minus;")


def _complex(z, digits: int = 4) -> str:
    z = complex(z)
    re, im = z.real, z.imag
    if im == 0:
        return _num(re, digits)
    sign = "+" if im > 0 else "&minus;"
    return f"{_num(re, digits)} {sign} {_num(abs(im), digits)}j"


def _yes_no(flag: bool) -> str:
    return "yes" if flag else "no"


# =============================================================================================
# HTML
# =============================================================================================

_CSS = """
:root { --ink:#1f2328; --muted:#5b5f66; --rule:#d9d4c7; --paper:#fffdf8; --band:#f3efe4;
        --slate:#2c5d8a; --ochre:#c98a1b; --brick:#a3362c; --stone:#6f6a62;
        --good:#2f6b3a; --good-bg:#e6f0e2; --warn:#8a4b08; --warn-bg:#fbecd6; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font: 15px/1.5 "Segoe UI", "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; }
main { max-width: 62rem; margin: 0 auto; padding: 1.2rem 1.6rem 3rem; }
header.report-head { border-left: 0.55rem solid var(--slate); background: var(--band);
       padding: 0.9rem 1.2rem; margin: 0 0 1.2rem; }
header.report-head h1 { margin: 0 0 0.2rem; font-size: 1.55rem; font-weight: 600; }
header.report-head p { margin: 0.1rem 0; color: var(--muted); }
nav.contents { font-size: 0.9rem; margin: 0 0 1.4rem; color: var(--muted); }
nav.contents a { color: var(--slate); text-decoration: none; margin-right: 0.9rem;
       white-space: nowrap; }
section { margin: 0 0 2rem; }
h2 { font-size: 1.2rem; font-weight: 600; border-bottom: 2px solid var(--rule);
     padding-bottom: 0.2rem; margin: 0 0 0.7rem; }
h2 .num { color: var(--slate); margin-right: 0.4rem; }
p.lead { color: var(--muted); margin-top: 0; }
table { border-collapse: collapse; width: 100%; font-size: 0.9rem; margin: 0.4rem 0 0.8rem; }
th, td { text-align: left; padding: 0.28rem 0.55rem; border-bottom: 1px solid var(--rule);
         vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tbody tr:nth-child(even) td { background: #faf7f0; }
.tiles { display: grid; grid-template-columns: repeat(auto-fill, minmax(13.5rem, 1fr));
         gap: 0.7rem; }
.tile { border: 1px solid var(--rule); border-top: 0.35rem solid var(--stone);
        padding: 0.55rem 0.75rem; background: #fff; }
.tile.good { border-top-color: var(--good); }
.tile.warn { border-top-color: var(--warn); }
.tile .q { font-size: 0.82rem; color: var(--muted); text-transform: uppercase;
           letter-spacing: 0.04em; }
.tile .a { font-size: 1.25rem; font-weight: 600; }
.tile.good .a { color: var(--good); }
.tile.warn .a { color: var(--warn); }
.tile .why { font-size: 0.85rem; color: var(--muted); }
.stack { display: flex; height: 1.6rem; border: 1px solid var(--rule); margin: 0.3rem 0 0.6rem; }
.stack span { display: block; height: 100%; color: #fff; font-size: 0.8rem;
              line-height: 1.6rem; text-align: center; overflow: hidden; }
.swatch { display: inline-block; width: 0.8rem; height: 0.8rem; margin-right: 0.35rem;
          vertical-align: -0.05rem; }
.p1 { background: var(--slate); } .p2 { background: var(--ochre); }
.p3 { background: var(--brick); } .p4 { background: var(--stone); }
.bar { display: inline-block; height: 0.6rem; background: var(--slate); vertical-align: middle; }
.bar.fragile { background: var(--brick); }
.flag { color: var(--warn); font-weight: 600; }
.ok { color: var(--good); font-weight: 600; }
figure { margin: 0.4rem 0 0.8rem; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); background: #fff; }
figcaption { font-size: 0.85rem; color: var(--muted); }
pre { background: var(--band); padding: 0.7rem 0.9rem; overflow-x: auto; font-size: 0.82rem;
      line-height: 1.4; white-space: pre-wrap; }
code, pre, .mono { font-family: "DejaVu Sans Mono", Consolas, "Liberation Mono", monospace; }
ul.names { columns: 2; font-size: 0.88rem; padding-left: 1.1rem; }
details summary { cursor: pointer; color: var(--slate); }
div.alert { border: 2px solid var(--brick); background: #fbf1ee; padding: 0.6rem 0.9rem;
            margin: 0 0 1.2rem; font-weight: 600; color: var(--brick); }
section#caution { border: 2px solid var(--brick); background: #fbf1ee; padding: 0.8rem 1rem; }
section#caution h2 { border: none; color: var(--brick); }
footer { color: var(--muted); font-size: 0.8rem; border-top: 1px solid var(--rule);
         padding-top: 0.5rem; }
@media print {
  body { background: #fff; font-size: 10.5pt; }
  main { max-width: none; padding: 0; }
  nav.contents { display: none; }
  section, figure, table, .tile { break-inside: avoid; }
  h2 { break-after: avoid; }
  .tile, header.report-head, .stack span, .bar, .swatch, section#caution {
      -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  a { color: inherit; text-decoration: none; }
}
"""

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


def _table(headers, rows) -> str:
    """A table with a header row (``headers``: HTML cells' contents) over rendered rows."""
    head = "".join(f"<th>{h}</th>" for h in headers)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


def _key_value_table(pairs) -> str:
    """A two-column table of (label, value) pairs, labels as row headers."""
    return ("<table><tbody>" + "".join(f"<tr><th>{a}</th><td>{b}</td></tr>" for a, b in pairs)
            + "</tbody></table>")


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
            answer, why = ("undecided", "a difference above the tolerance that rounding may "
                           "explain; see section 9")
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
    text = hidden_mode_message(removed, "the minimal realization")
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


def _decisions_section(c: ReportContents) -> str:
    a = c.analysis
    rows = []
    for d in a.decisions:
        width = 0.0 if not math.isfinite(d.margin) else min(100.0, 10.0 * math.log10(max(d.margin, 1.0)))
        if not math.isfinite(d.margin):
            width = 100.0
        bar = f'<span class="bar{" fragile" if d.fragile else ""}" style="width:{width * 0.6:.1f}px"></span>'
        status = '<span class="flag">fragile</span>' if d.fragile else '<span class="ok">clear</span>'
        rows.append(
            f"<tr><td>{_e(d.label)}</td><td class=\"n\">{d.rank} of {d.size}</td>"
            f"<td class=\"n\">{_num(d.smallest_kept) if d.rank else 'none'}</td>"
            f"<td class=\"n\">{_num(d.largest_dropped)}</td>"
            f"<td class=\"n\">{_num(d.tolerance)}</td><td class=\"n\">{_num(d.margin)} {bar}</td>"
            f"<td>{status}</td></tr>")
    table = _table(("Decision", "Rank", "Smallest kept", "Largest dropped", "Tolerance", "Margin",
                    "Status"), rows)
    if not rows:
        table = "<p>The model has no states, so no rank was decided.</p>"
    lead = ("Every rank was decided from singular values of blocks produced by orthogonal "
            "transformations. Values are relative to the model's scale. The margin is how far "
            "the decision lies from the tolerance, as a factor; below 100 the answer depends on "
            "the tolerance and the decision is marked fragile.")
    return _section("rank-decisions", table, lead)


def _modes_section(c: ReportContents) -> str:
    a = c.analysis
    rows = []
    for k, mode in enumerate(a.modes, start=1):
        stable = "marginal" if getattr(mode, "marginal", False) else _yes_no(mode.stable)
        note = '<span class="flag">near cancellation</span>' if mode.narrow else ""
        part = mode.part
        idx = list(PART_LABELS).index(part) + 1 if part in PART_LABELS else 0
        rows.append(
            f"<tr><td class=\"n\">{k}</td><td class=\"n\">{_complex(mode.value)}</td>"
            f"<td>{stable}</td><td><span class=\"swatch p{idx}\"></span>"
            f"{_e(PART_LABELS.get(part, part))}</td>"
            f"<td class=\"n\">{_num(mode.controllability_margin)}</td>"
            f"<td class=\"n\">{_num(mode.observability_margin)}</td><td>{note}</td></tr>")
    table = _table(("#", "Eigenvalue", "Stable", "Part", "Controllability margin",
                    "Observability margin", "Note"), rows)
    if not rows:
        table = "<p>The model has no states.</p>"
    lead = ("One row per eigenvalue. The margins are the smallest singular values of "
            "[A &minus; &lambda;I, B] and [A &minus; &lambda;I; C], relative to the model's scale: "
            "the size of the smallest change of the data that would make the mode "
            "uncontrollable or unobservable.")
    return _section("modes", table, lead)


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
            ("States", f"{c.model.n} original &rarr; {c.analysis.minimal_order} minimal &rarr; "
                       f"{red.order} reduced"),
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
        parts.append(f"<details open><summary>All {hsv.size} values</summary>"
                     f"{_table(('#', 'Value', ''), cells)}</details>")
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


def render_html(contents: ReportContents, *, progress=None) -> str:
    """The HTML text of a report.

    Parameters
    ----------
    contents : ReportContents
        From :func:`collect_report`.
    progress : bool or None, optional
        As for :func:`collect_report`.

    Returns
    -------
    str
        A complete HTML document, self-contained (no network addresses, no scripts).
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
    nav = "".join(f'<a href="#{sid}">{i + 1} {_e(t)}</a>' for i, (sid, t) in enumerate(_SECTIONS))
    body = [
        f'<header class="report-head"><h1>Model report: {_e(title)}</h1>'
        f"<p>{m.n} states &middot; {m.n_inputs} inputs &middot; {m.n_outputs} outputs &middot; "
        f"{'discrete' if m.is_discrete else 'continuous'} time</p>"
        f"<p>Made by plantcore {_e(__version__)} on {_e(c.created)}</p></header>",
        f'<nav class="contents">{nav}</nav>',
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
                 "The original and the minimal model must coincide; the reduced model may "
                 "depart from them by at most the error bound."),
        _hankel_section(c, hank),
        _certificate_section(c),
        _section("caution", f"<p>{_e(SAFETY_CAUTION)}</p>"),
        "<footer>This report is self-contained: it loads nothing from any network.</footer>",
    ]
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>Model report: {_e(title)}</title>\n<style>{_CSS}</style>\n</head>\n"
            "<body>\n<main>\n" + "\n".join(body) + "\n</main>\n</body>\n</html>\n")


def analysis_html(analysis) -> str:
    """HTML report of an :class:`plantcore.analysis.Analysis` (used by ``Analysis.to_html``).

    The reduction follows the default rule (:data:`DEFAULT_RELATIVE_ERROR`).
    """
    contents = collect_report(analysis.model, tol=analysis.tolerance, analysis=analysis)
    return render_html(contents)


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
