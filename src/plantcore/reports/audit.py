"""Text and HTML reports of an estimator observability audit.

Display only: the functions here read an :class:`plantcore.estimation.ObservabilityAudit` and
format it; they compute nothing numerical beyond choosing what to show.  The HTML report is
one self-contained file: plots are embedded as base64 PNG images drawn with matplotlib's Agg
renderer, there are no scripts, fonts or other network requests, and every name that came
from the user is HTML-escaped.
"""

from __future__ import annotations

import base64
import html
import io
import math

import numpy as np

from plantcore.core.wording import SAFETY_CAUTION, counted, describe_direction
from plantcore.reports.style import html_fragment, html_number, html_page
from plantcore.reports.text import _num

__all__ = ["audit_html", "audit_text"]


def _names(audit) -> list:
    if audit.state_names is not None:
        return list(audit.state_names)
    return [f"x{i + 1}" for i in range(audit.n)]


def _verdict(audit) -> str:
    d = audit.n - audit.expected_rank
    if audit.spurious_dimension:
        return (f"SPURIOUS OBSERVABILITY: the linearized model sees {audit.spurious_dimension} of "
                f"the {counted(d, 'direction')} the real system cannot see.")
    if d == 0:
        return "No expected unobservable directions were given; only the rank is reported."
    return (f"Consistent: none of the {d} expected unobservable "
            f"{'direction' if d == 1 else 'directions'} is seen beyond the "
            f"tolerance {audit.tolerance:.1e}.")


def _direction_rows(audit):
    names = _names(audit)
    rows = []
    for i in range(audit.expected_basis.shape[1]):
        leak = float(audit.leakage[i])
        rows.append((i + 1, describe_direction(audit.expected_basis[:, i], names), leak,
                     float(audit.implied_std[i]), leak <= audit.tolerance))
    return rows


def audit_text(audit, *, source=None) -> str:
    """Plain-text summary of an audit, ending with the safety caution.

    Parameters
    ----------
    audit : ObservabilityAudit
    source : str, optional
        Where the Jacobians came from (shown in the heading).

    Examples
    --------
    >>> import numpy as np
    >>> from plantcore.estimation.audit import audit_linearized_observability
    >>> F = np.repeat(np.eye(2)[None], 3, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.0]]]), 3, axis=0)
    >>> text = audit_text(audit_linearized_observability(F, H, [[1.0], [1.0]]))
    >>> text.splitlines()[2].startswith("verdict: Consistent: none of the 1 expected")
    True
    >>> "Caution" in text
    True
    """
    head = "Observability audit of a linearized estimator"
    if source is not None:
        head += f" ({source})"
    scale = "scaled states (x / state_scale)" if audit.state_scale is not None else "given units"
    lines = [
        head,
        (f"horizon {counted(audit.horizon, 'step')}, {counted(audit.n, 'state')}, "
         f"{counted(audit.n_measurements, 'measurement')} per step, {scale}"),
        f"verdict: {_verdict(audit)}",
        (f"rank of the observability matrix: {audit.rank} (the real system allows "
        f"{audit.expected_rank}); expected directions seen: {audit.spurious_dimension}"),
    ]
    rows = _direction_rows(audit)
    if rows:
        unit = "" if audit.noise_given else " (unit measurement noise)"
        lines.append(f"expected directions (orthonormalized): leakage relative to the largest "
                     f"singular value, implied standard deviation{unit}")
        for i, text, leak, std, roundoff in rows:
            flag = "round-off" if roundoff else "SEEN"
            lines.append(f"  {i}. {text}")
            lines.append(f"     leakage {_num(leak)} [{flag}], implied std {_num(std)}")
    if audit.principal_angles.size:
        angles = ", ".join(f"{math.degrees(a):.3g}" for a in audit.principal_angles)
        lines.append(f"principal angles between numerical null space and expected span (deg): "
                     f"{angles}")
    lines.append("rank decisions:")
    for decision in audit.decisions:
        lines.append("  " + decision.describe())
    if audit.fragile:
        lines.append("warning: a rank decision lies within a factor 100 of the tolerance; the "
                     "result depends on the tolerance.")
    for note in audit.notes:
        lines.append("note: " + note)
    lines.append("")
    lines.append(SAFETY_CAUTION)
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------------------------

def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _positive(values):
    v = np.array(values, dtype=float)
    v[~(v > 0) | ~np.isfinite(v)] = np.nan
    return v


def _axes(height: float):
    """A new one-panel figure and its axes."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, height), layout="constrained")
    return fig, fig.add_subplot(1, 1, 1)


def _dress(ax, audit, ylabel: str, title: str) -> None:
    """The common layout of the audit plots: a log scale over the steps of the horizon."""
    ax.set_yscale("log")
    ax.set_xlabel("steps in the horizon")
    ax.set_xlim(1, max(audit.horizon, 2))
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.grid(True, lw=0.3)


def _plots(audit) -> list:
    """Return a list of (caption, base64 PNG)."""
    steps = np.arange(1, audit.horizon + 1)
    out = []
    colours = ["#2b6f8a", "#b5562b", "#5f7f3a", "#7a4f8c", "#8a7a2b", "#3a3a3a"]

    fig, ax = _axes(3.4)
    growth = _positive(audit.singular_value_growth)
    for j in range(growth.shape[1]):
        ax.plot(steps, growth[:, j], color="#5b6b73", lw=0.9,
                marker="." if audit.horizon < 30 else None)
    largest = audit.singular_value_growth[:, 0] if audit.n else np.zeros(audit.horizon)
    ax.plot(steps, _positive(largest * audit.tolerance), color="#b5562b", ls="--", lw=1.0,
            label="rank tolerance")
    _dress(ax, audit, "singular value", "Singular values of the observability matrix")
    ax.legend(fontsize=8)
    out.append((("Singular values of the observability matrix of steps 1..k. Values below the "
                "dashed line count as zero; the number of values above it is the rank."), _png(fig)))

    d = audit.expected_basis.shape[1]
    if d:
        fig, ax = _axes(3.4)
        for i in range(d):
            finite = bool(np.isfinite(audit.implied_std_growth[:, i]).any())
            label = f"direction {i + 1}" + ("" if finite else " (infinite: not drawn)")
            ax.plot(steps, _positive(audit.implied_std_growth[:, i]), color=colours[i % 6], lw=1.2,
                    label=label)
        _dress(ax, audit, "implied standard deviation",
               "Standard deviation implied along each expected direction")
        if np.isfinite(audit.implied_std_growth).any():
            ax.legend(fontsize=8)
        else:
            ax.text(0.5, 0.5, "no information claimed along any expected direction (infinite)",
                    transform=ax.transAxes, ha="center", va="center", fontsize=9)
        out.append((("Implied standard deviation along each expected unobservable direction from "
                    "the information of steps 1..k. For a consistent estimator it is infinite "
                    "(not drawn); a curve that falls marks information that does not exist."),
                    _png(fig)))

        fig, ax = _axes(3.0)
        for i in range(d):
            ax.plot(steps, _positive(audit.leakage_growth[:, i]), color=colours[i % 6], lw=1.2,
                    label=f"direction {i + 1}")
        ax.axhline(audit.tolerance, color="#b5562b", ls="--", lw=1.0, label="rank tolerance")
        _dress(ax, audit, "leakage", "Leakage of each expected direction")
        ax.legend(fontsize=8)
        out.append(("Leakage ||O v|| / sigma_max(O) over steps 1..k (zero values not drawn).",
                    _png(fig)))
    return out


def audit_html(audit, *, source=None, title=None, fragment: bool = False) -> str:
    """Self-contained HTML report of an audit (no network requests), with the safety caution.

    Parameters
    ----------
    audit : ObservabilityAudit
    source : str, optional
        Where the Jacobians came from.
    title : str, optional
        Page title; default "Observability audit".
    fragment : bool, optional
        False (default): a complete HTML document.  True: one ``<div>`` with a style sheet
        scoped to it, to embed in a notebook or another page
        (:func:`plantcore.reports.style.html_fragment`).

    Examples
    --------
    >>> import numpy as np
    >>> from plantcore.estimation.audit import audit_linearized_observability
    >>> F = np.repeat(np.eye(2)[None], 3, axis=0)
    >>> H = np.repeat(np.array([[[-1.0, 1.0]]]), 3, axis=0)
    >>> page = audit_html(audit_linearized_observability(F, H, [[1.0], [1.0]]), source="<a&b>")
    >>> "&lt;a&amp;b&gt;" in page and "<a&b>" not in page and "://" not in page
    True
    """
    esc = html.escape
    title = title or "Observability audit"
    d = audit.n - audit.expected_rank
    seen = " seen" if audit.spurious_dimension else ""
    parts = [(f'<header class="report-head"><h1>{esc(title)}</h1>'
              f"<p>{counted(audit.horizon, 'step')} &middot; {counted(audit.n, 'state')} &middot; "
              f"{counted(audit.n_measurements, 'measurement')} per step</p></header>")]
    if source is not None:
        parts.append(f"<p>Jacobian sequences from <code>{esc(str(source))}</code>.</p>")
    parts.append(f'<p class="verdict{seen}" role="status">{esc(_verdict(audit))}</p>')
    scale = ("scaled states (x / state_scale)" if audit.state_scale is not None
             else "the given units")
    facts = [
        ("horizon", f"{audit.horizon} steps"),
        ("states / measurements per step", f"{audit.n} / {audit.n_measurements}"),
        ("coordinates", scale),
        ("rank of the observability matrix", str(audit.rank)),
        ("rank the real system allows (n - d)", f"{audit.expected_rank} (d = {d})"),
        ("expected directions the model sees", str(audit.spurious_dimension)),
        ("relative rank tolerance", f"{audit.tolerance:.1e}"),
        ("depends on the tolerance (fragile)", "yes" if audit.fragile else "no"),
    ]
    parts.append('<section id="summary"><h2>Summary</h2><div class="table-wrap"><table>')
    for key, value in facts:
        parts.append(f"<tr><th>{esc(key)}</th><td>{esc(value)}</td></tr>")
    parts.append("</table></div></section>")

    rows = _direction_rows(audit)
    if rows:
        unit = "" if audit.noise_given else " (unit measurement noise)"
        parts.append('<section id="directions"><h2>Expected unobservable directions</h2>')
        parts.append('<p class="lead">Orthonormalized in the given order; leakage is relative '
                     "to the largest singular value of the observability matrix.</p>"
                     '<div class="table-wrap"><table>')
        parts.append(f"<tr><th>#</th><th>direction</th><th>leakage</th><th>implied std{esc(unit)}"
                     "</th><th>reading</th></tr>")
        for i, text, leak, std, roundoff in rows:
            reading = "at round-off" if roundoff else "seen by the model"
            parts.append(f"<tr><td>{i}</td><td><code>{esc(text)}</code></td>"
                         f"<td class=\"num\">{html_number(leak)}</td>"
                         f"<td class=\"num\">{html_number(std)}</td><td>{reading}</td></tr>")
        parts.append("</table></div>")
        if audit.principal_angles.size:
            angles = ", ".join(f"{math.degrees(a):.3g}" for a in audit.principal_angles)
            parts.append(f"<p>Principal angles between the numerical null space and the expected "
                         f"span: {esc(angles)} degrees.</p>")
        parts.append("</section>")

    parts.append('<section id="plots"><h2>Plots</h2>')
    for caption, data in _plots(audit):
        parts.append(f'<figure><img alt="{esc(caption)}" src="data:image/png;base64,{data}">'
                     f"<figcaption>{esc(caption)}</figcaption></figure>")

    parts.append("</section>")
    parts.append('<section id="rank-decisions"><h2>Rank decisions</h2><pre>')
    parts.append(esc("\n".join(dec.describe() for dec in audit.decisions)))
    parts.append("</pre></section>")
    if audit.notes:
        parts.append('<section id="notes"><h2>Notes</h2><ul>')
        parts.extend(f"<li>{esc(note)}</li>" for note in audit.notes)
        parts.append("</ul></section>")
    parts.append(f'<section id="caution"><h2>Validation and safety</h2><p>{esc(SAFETY_CAUTION)}'
                 "</p></section>")
    if fragment:
        return html_fragment("\n".join(parts))
    return html_page(title, "\n".join(parts))
