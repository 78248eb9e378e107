"""Text, markdown, JSON and HTML for sparse models; renders, computes nothing.

The objects come from :mod:`plantcore.large` (:class:`~plantcore.large.summary.SparseSummary`,
:class:`~plantcore.large.low_rank_balanced.LowRankReduction`,
:class:`~plantcore.large.summary.SparseReportContents`).  No dense ``n x n`` array is formed
here or there: the plant's frequency response comes from sparse solves, and the only modes
shown are the reduced model's, labelled so (a modes table of the plant would need its dense
eigen-decomposition, ``8 n^2`` bytes).
"""

from __future__ import annotations

import math
import os

import numpy as np

from plantcore.core.wording import SAFETY_CAUTION
from plantcore.files.safe_write import atomic_write_text
from plantcore.reports.plots import _figure, _png, _style_axes, hankel_plot
from plantcore.reports.style import escape, html_number, html_page

__all__ = ["sparse_reduction_lines", "sparse_summary_dict", "sparse_summary_markdown",
           "sparse_summary_text", "write_sparse_html_report"]

#: How many removed state names a text lists before "and N more".
NAMES_SHOWN = 10

#: How many leading Hankel singular values the text shows.
VALUES_SHOWN = 12

_LIN = ("structural verdicts after Lin (1974): 'yes' holds for almost every value of the "
        "nonzero entries, not necessarily for these; 'no' holds for every value")


def _names(names) -> str:
    shown = ", ".join(names[:NAMES_SHOWN])
    more = len(names) - NAMES_SHOWN
    return shown + (f" and {more:,} more" if more > 0 else "")


def _yes(flag: bool) -> str:
    return "yes" if flag else "no"


def _header(summary) -> list[str]:
    m = summary.model
    domain = "continuous time" if m.dt is None else f"discrete time, sample time {m.dt:g}"
    density = 100.0 * summary.nonzeros / max(m.n * m.n, 1)
    label = f" {m.name!r}" if m.name else ""
    return [(f"Sparse model{label}: {m.n:,} states, {m.n_inputs} inputs, {m.n_outputs} outputs, "
             f"{domain}; A has {summary.nonzeros:,} nonzeros ({density:.3g} % of n x n)")]


def _structural_lines(s) -> list[str]:
    lines = ["Structural pre-reduction (exact, from the sparsity graph of A, B, C):",
             (f"  {s.original_order:,} -> {s.order:,} states; removed {len(s.not_reached):,} "
              f"that no input reaches and {len(s.not_observed):,} that reach no output")]
    if s.not_reached:
        lines.append(f"  not reached by any input: {_names(s.not_reached)}")
    if s.not_observed:
        lines.append(f"  reaching no output: {_names(s.not_observed)}")
    lines.append(f"  structurally controllable: {_yes(s.structurally_controllable)} (generic rank "
                 f"of [A, B] = {s.controllability_generic_rank:,} of {s.order:,}); structurally "
                 f"observable: {_yes(s.structurally_observable)} (generic rank of [A; C] = "
                 f"{s.observability_generic_rank:,})")
    lines.append(f"  ({_LIN})")
    return lines


def _gramian_lines(gramians, problem) -> list[str]:
    if gramians is None:
        return [f"Low-rank Gramians: not computed: {problem}"]
    lines = [f"Low-rank Gramians (ADI iteration, {gramians.shifts.size} shifts, residual tolerance "
             f"{gramians.tolerance:.1e}"
             + (", via the Cayley transform" if gramians.discrete else "") + "):"]
    for label, f in (("controllability", gramians.controllability),
                     ("observability", gramians.observability)):
        lines.append(f"  {label}: factor rank {f.rank}, {f.iterations} steps, relative residual "
                     f"{f.relative_residual:.2e}" + ("" if f.converged else " (NOT converged)"))
    return lines


def _value_lines(hsv) -> list[str]:
    if not hsv.size:
        return []
    lines = [f"Leading Hankel singular values (approximate, {hsv.size} from the factors):"]
    for k, value in enumerate(hsv[:VALUES_SHOWN], start=1):
        lines.append(f"  {k:3d}  {value:.6e}  ({value / hsv[0]:.2e} of the largest)")
    return lines


def sparse_summary_text(summary, *, source: str | None = None) -> str:
    """The ``inspect`` text of a sparse model."""
    lines = _header(summary)
    if source:
        lines.append(f"File: {source}")
    lines += [""] + _structural_lines(summary.structural) + [""]
    lines += _gramian_lines(summary.gramians, summary.gramian_problem)
    values = _value_lines(summary.hankel_singular_values)
    if values:
        lines += [""] + values
    lines += ["", ("Dense analyses (Kalman decomposition, modes) need dense n x n arrays and "
                   "are not run on a sparse model; reduce it first (plantcore reduce --order K)."),
              "", SAFETY_CAUTION]
    return "\n".join(lines) + "\n"


def sparse_summary_markdown(summary, *, source: str | None = None) -> str:
    """The same as :func:`sparse_summary_text`, as markdown (a fenced block per section)."""
    text = sparse_summary_text(summary, source=source).rstrip("\n").split("\n\n")
    title = f"# Sparse model {summary.model.name or ''}".rstrip()
    return title + "\n\n" + "\n\n".join(f"```\n{block}\n```" for block in text[:-1]) + \
        f"\n\n*{text[-1]}*\n"


def _finite(x):
    return float(x) if x is not None and math.isfinite(x) else None


def sparse_summary_dict(summary) -> dict:
    """JSON-safe dictionary of a :class:`~plantcore.large.summary.SparseSummary`."""
    s, g, m = summary.structural, summary.gramians, summary.model
    out = {"name": m.name, "states": m.n, "inputs": list(m.inputs), "outputs": list(m.outputs),
           "sample_time": m.dt, "nonzeros": summary.nonzeros, "sparse": True,
           "structural": {"kept": s.order, "not_reached": list(s.not_reached),
                          "not_observed": list(s.not_observed),
                          "structurally_controllable": s.structurally_controllable,
                          "structurally_observable": s.structurally_observable,
                          "controllability_generic_rank": s.controllability_generic_rank,
                          "observability_generic_rank": s.observability_generic_rank},
           "gramians": None, "gramian_problem": summary.gramian_problem,
           "hankel_singular_values": [float(x) for x in summary.hankel_singular_values],
           "caution": SAFETY_CAUTION}
    if g is not None:
        out["gramians"] = {
            "tolerance": g.tolerance, "shifts": g.shifts.size, "discrete": g.discrete,
            **{label: {"rank": f.rank, "steps": f.iterations, "converged": f.converged,
                       "relative_residual": _finite(f.relative_residual)}
               for label, f in (("controllability", g.controllability),
                                ("observability", g.observability))}}
    return out


def sparse_reduction_lines(reduction) -> list[str]:
    """What ``reduce`` prints of a :class:`~plantcore.large.low_rank_balanced.LowRankReduction`."""
    s = reduction.structural
    hsv = reduction.hankel_singular_values
    lines = [(f"structural pre-reduction: {s.original_order:,} -> {s.order:,} states "
              f"({len(s.not_reached):,} not reached by any input, {len(s.not_observed):,} "
              "reaching no output; exact)")]
    lines += _gramian_lines(reduction.gramians, None)
    shown = ", ".join(f"{x:.4e}" for x in hsv[:min(VALUES_SHOWN, hsv.size)])
    lines.append(f"leading Hankel singular values (approximate): {shown}")
    lines.append(f"balanced truncation from the low-rank factors: {s.order:,} -> "
                 f"{reduction.order} states")
    lines.append(f"error bound (2 x sum of discarded computed Hankel singular values): "
                 f"{reduction.error_bound:.6g}")
    peak = reduction.peak_error
    if peak is not None:
        unit = "rad/sample" if reduction.model.is_discrete else "rad/s"
        lines.append(f"measured error (peak of original - reduced over {peak.evaluations} "
                     f"frequencies, sparse solves; a lower bound of the true peak): "
                     f"{peak.value:.6g} at {peak.frequency:.6g} {unit}")
    return lines


def _frequency_figure(contents) -> tuple[str, str]:
    fig = _figure(6.8, 3.8)
    ax = fig.add_subplot()
    _style_axes(ax)
    w = contents.frequencies
    floor = np.finfo(float).tiny
    ax.loglog(w, np.maximum(contents.gain, floor), color="#2c5d8a", linewidth=1.6,
              label="model (sparse solves)")
    if contents.reduced_gain.size:
        ax.loglog(w, np.maximum(contents.reduced_gain, floor), color="#c98a1b",
                  linestyle=(0, (4, 3)), linewidth=1.4,
                  label=f"reduced model ({contents.reduction.order} states)")
    unit = "rad/sample" if contents.summary.model.is_discrete else "rad/s"
    ax.set_xlabel(f"frequency ({unit})")
    ax.set_ylabel("largest singular value of G")
    ax.legend(fontsize=8, framealpha=0.9)
    return _png(fig), ("Largest singular value of the frequency response of the model and of "
                       "the reduced model.")


def _pre(lines) -> str:
    return "<pre>" + escape("\n".join(lines)) + "</pre>"


def _figure_html(figure) -> str:
    if figure is None:
        return ""
    src, alt = figure
    return f'<figure><img src="{src}" alt="{escape(alt)}"><figcaption>{escape(alt)}</figcaption></figure>'


def _poles_table(contents) -> str:
    poles = contents.reduced_poles
    if not poles.size:
        return ""
    rows = "".join(f"<tr><td class=\"n\">{k}</td><td class=\"n\">{html_number(p.real, 5)}</td>"
                   f"<td class=\"n\">{html_number(p.imag, 5)}</td></tr>"
                   for k, p in enumerate(sorted(poles, key=lambda z: (-z.real, z.imag)), start=1))
    return ("<h3>Poles of the reduced model (not of the plant)</h3>"
            "<div class=\"table-wrap\"><table><thead><tr><th>#</th><th>real part</th>"
            f"<th>imaginary part</th></tr></thead><tbody>{rows}</tbody></table></div>")


def _html_body(contents, source) -> str:
    summary = contents.summary
    title = summary.model.name or (os.path.basename(source) if source else "sparse model")
    parts = [f"<header class=\"report-head\"><h1>{escape(title)}</h1>"
             f"<p>{escape(_header(summary)[0])}</p>"
             + (f"<p>File: {escape(source)}</p>" if source else "") + "</header>",
             f"<p><strong>{escape(SAFETY_CAUTION)}</strong></p>",
             "<section id=\"structure\"><h2>Structural pre-reduction</h2>"
             + _pre(_structural_lines(summary.structural)) + "</section>",
             "<section id=\"gramians\"><h2>Low-rank Gramians and Hankel singular values</h2>"
             + _pre(_gramian_lines(summary.gramians, summary.gramian_problem)
                    + [""] + _value_lines(summary.hankel_singular_values))
             + (_figure_html(hankel_plot(contents)) if contents.reduction is not None else "")
             + "</section>"]
    if contents.reduction is not None:
        parts.append("<section id=\"reduction\"><h2>Balanced truncation</h2>"
                     + _pre(sparse_reduction_lines(contents.reduction)) + _poles_table(contents)
                     + "</section>")
    else:
        parts.append("<section id=\"reduction\"><h2>Balanced truncation</h2><p>Not made: "
                     f"{escape(contents.reduction_problem)}</p></section>")
    parts.append("<section id=\"frequency\"><h2>Frequency response</h2>"
                 + _figure_html(_frequency_figure(contents))
                 + "<p>No modes table of the plant: it would need the dense eigen-decomposition "
                   "of A. The poles above are the reduced model's.</p></section>")
    return "\n".join(parts)


def write_sparse_html_report(contents, path, *, source: str | None = None, inputs=(),
                             overwrite: bool = True):
    """Write the self-contained HTML report of a sparse model (atomically)."""
    title = contents.summary.model.name or "sparse model"
    return atomic_write_text(path, html_page(f"plantcore report: {title}",
                                             _html_body(contents, source)), inputs=inputs,
                             overwrite=overwrite)
