"""Output of an envelope sweep: the table, plots over the parameters and a written summary.

Display only: everything here reads a :class:`plantcore.SweepResult` (and, when there is
one, the :class:`plantcore.sweeps.spec.SweepSpec` it came from) and formats it.

:func:`write_sweep_folder` writes a *new* folder:

``table.csv``
    One line per operating point (see :meth:`plantcore.SweepResult.to_csv_text`).
``table.parquet``
    The same table, when pyarrow is installed.
``margins.png``
    The smallest PBH margins and the distance estimates over the parameters: curves for one
    parameter, maps for two, and the points ranked from weakest for more.
``structure.png``
    The Kalman part sizes (one parameter) or the minimal order (two), and the stabilizable
    and detectable verdicts; for more parameters the distribution of the minimal order.
``summary.md``
    What was swept, the findings, where the structure changes, the weakest points, the
    failed points and the caution that goes with every plantcore report.
``index.html``
    The same summary as a page in the style of the model report
    (:mod:`plantcore.reports.style`): a contents bar, the findings and tables, the two plots
    with their captions, links to the other files, and the caution.  It needs no network
    and shows the plots from the folder, so keep the folder together.

The folder is first written under a hidden name next to it and then renamed, so it appears
complete or not at all (:func:`plantcore.files.output_folder.write_output_folder`).  An
existing, non-empty folder is refused; with ``force=True`` (``plantcore sweep --force``) a
folder holding nothing but files named in :data:`OUTPUT_FILES` (an earlier sweep's output) is
replaced whole, and one holding anything else, or the specification file, is still refused.
"""

from __future__ import annotations

import itertools
import math
import os
from collections import Counter
from numbers import Real
from pathlib import Path

import numpy as np

from plantcore.core.wording import SAFETY_CAUTION
from plantcore.files.output_folder import check_output_folder_policy, write_output_folder

__all__ = ["OUTPUT_FILES", "check_output_folder", "plot_sweep_map", "summary_html",
           "summary_markdown", "write_sweep_folder"]

OUTPUT_FILES = ("table.csv", "table.parquet", "margins.png", "structure.png", "summary.md",
                "index.html")

_LOG_FLOOR = 1e-17          # margins are drawn on a log axis; exact zeros are drawn here
_WORST_LISTED = 10
_FAILED_LISTED = 20
_CHANGES_LISTED = 30

# Our own palette: deep teal, burnt orange, slate violet, olive; verdict colours below.
_COLOURS = ("#1b6f7a", "#c8662a", "#5b5a8f", "#7d8c2f")
_YES, _NO, _FAILED = "#2f7d4f", "#b8323a", "#8a8a8a"


# --- the folder ---------------------------------------------------------------------------------

def check_output_folder(folder, *, force: bool = False, inputs=()) -> Path:
    """Refuse an output folder the sweep may not write (a file, or a folder not allowed).

    Parameters
    ----------
    folder : str or os.PathLike
        The output folder; missing parent folders will be created.
    force : bool, default False
        False: the folder must not exist or be empty.  True: it may also hold an earlier
        sweep's output (regular files named in :data:`OUTPUT_FILES`, nothing else), which
        will be replaced whole.
    inputs : iterable of paths, optional
        Input files of the run (the specification); a folder holding one is always refused.

    Returns
    -------
    pathlib.Path
        The folder.  Called before the sweep runs, so bad output settings cost nothing.

    Raises
    ------
    ValueError
        One line naming the folder, and with ``force`` the first entry that is not a file of
        a sweep's own.
    """
    return check_output_folder_policy(folder, OUTPUT_FILES, force=force, inputs=inputs,
                                      owner="a sweep", make_parents=True)


def write_sweep_folder(result, folder, *, spec=None, force: bool = False) -> list[Path]:
    """Write the table, plots and summary of a sweep into a new folder.

    Parameters
    ----------
    result : SweepResult
    folder : str or os.PathLike
        Must not exist, or be empty (unless ``force``).  Missing parent folders are created.
    spec : SweepSpec, optional
        The specification the sweep came from (for the summary; its file is never inside a
        folder that is replaced).
    force : bool, default False
        Replace an existing folder whole when it holds only an earlier sweep's output (see
        :func:`check_output_folder`); files of the old run that this one does not write (a
        plot, the Parquet table) do not survive.  The old folder is put back if writing or
        the replacement fails or is interrupted.

    Returns
    -------
    list of pathlib.Path
        The files written, in the order of :data:`OUTPUT_FILES`.
    """
    def fill(staging: Path) -> list[str]:
        names = []
        (staging / "table.csv").write_text(result.to_csv_text(), encoding="utf-8")
        names.append("table.csv")
        parquet_note = None
        try:
            result.to_parquet(staging / "table.parquet")
            names.append("table.parquet")
        except ImportError:
            parquet_note = "Parquet table not written: pyarrow is not installed."
        plots = _plots(result, staging)
        names.extend(plots)
        plot_note = None if plots else "No plots: no point could be analyzed."
        names.extend(["summary.md", "index.html"])
        text = summary_markdown(result, spec=spec, files=names, notes=[parquet_note, plot_note])
        (staging / "summary.md").write_text(text, encoding="utf-8")
        (staging / "index.html").write_text(summary_html(text, plots=plots), encoding="utf-8")
        return names

    inputs = () if spec is None else (spec.path,)
    names = write_output_folder(folder, fill, OUTPUT_FILES, force=force, inputs=inputs,
                                owner="a sweep", make_parents=True)
    target = Path(os.fspath(folder))
    return [target / name for name in names]


# --- helpers over rows --------------------------------------------------------------------------

def _is_number(value) -> bool:
    return isinstance(value, Real) and not isinstance(value, bool)


def _numeric_parameters(result) -> list[str]:
    return [p for p in result.parameters
            if all(_is_number(row[p]) for row in result.rows)]


def _relative_shown(value):
    """A margin or distance (relative to the model's scale) as text shows it: 0 at rounding
    level (:func:`plantcore.core.wording.shown_value`); the CSV keeps the raw value."""
    from plantcore.core.wording import shown_value

    return value if value is None else shown_value(value)


def _fmt(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if math.isinf(value):
            return "inf"
        return f"{value:.4g}"
    return str(value)


def _point_text(result, row) -> str:
    return ", ".join(f"{p} = {_fmt(row[p])}" for p in result.parameters) or "(no parameters)"


def _ok(result):
    return [row for row in result.rows if row["error"] is None]


def _weakest_margin(row) -> float:
    values = [row["smallest_controllability_margin"], row["smallest_observability_margin"]]
    values = [v for v in values if v is not None]
    return min(values) if values else math.inf


def _verdict_code(row) -> int:
    """0 both verdicts hold, 1 not stabilizable, 2 not detectable, 3 neither, 4 failed."""
    if row["error"] is not None:
        return 4
    return (0 if row["stabilizable"] else 1) + (0 if row["detectable"] else 2)


_VERDICT_LABELS = ("stabilizable and detectable", "not stabilizable", "not detectable",
                   "neither", "failed")


# --- the summary --------------------------------------------------------------------------------

def summary_markdown(result, *, spec=None, files=(), notes=()) -> str:
    """The sweep summary as markdown (what was swept, findings, weakest and failed points).

    Examples
    --------
    >>> import plantcore as pc
    >>> from plantcore.reports.sweep_folder import summary_markdown
    >>> result = pc.sweep(lambda p: ([[-p["a"]]], [[1.0]], [[1.0]]), pc.grid(a=[1.0, 2.0]),
    ...                   executor="serial")
    >>> text = summary_markdown(result)
    >>> "Stabilizable at 2 of 2" in text and "Caution" in text
    True
    """
    rows = result.rows
    ok = _ok(result)
    lines = []
    title = getattr(spec, "name", None) or "model family"
    lines.append(f"# Envelope sweep: {title}")
    lines.append("")
    source = f" of `{spec.path}`" if spec is not None else ""
    sampling = f" ({spec.sampling})" if spec is not None else ""
    lines.append(f"{len(rows)} operating points{sampling}{source}, analyzed with the "
                 f"{result.executor} executor in {result.elapsed_seconds:.1f} s.")
    if result.tol is not None:
        lines.append(f"Relative rank tolerance: {result.tol:g}.")
    lines.append("")
    if result.parameters:
        lines.append("| parameter | lowest | highest | distinct values |")
        lines.append("| --- | --- | --- | --- |")
        for p in result.parameters:
            values = [row[p] for row in rows]
            distinct = len(set(values))
            if all(_is_number(v) for v in values) and values:
                lines.append(f"| {p} | {_fmt(float(min(values)))} | {_fmt(float(max(values)))} "
                             f"| {distinct} |")
            else:
                lines.append(f"| {p} | - | - | {distinct} |")
        lines.append("")

    lines.append("## Findings")
    lines.append("")
    failed = result.failed
    lines.append(f"- Points analyzed: {len(ok)} of {len(rows)}"
                 + (f"; {len(failed)} failed (listed below)." if failed else "."))
    if ok:
        orders = [row["minimal_order"] for row in ok]
        states = [row["states"] for row in ok]
        lines.append(f"- Minimal order: {min(orders)} to {max(orders)} "
                     f"(model order {min(states)}" + (f" to {max(states)}" if max(states) != min(states) else "")
                     + ").")
        stab = sum(bool(row["stabilizable"]) for row in ok)
        det = sum(bool(row["detectable"]) for row in ok)
        lines.append(f"- Stabilizable at {stab} of {len(ok)} points; detectable at {det} of {len(ok)}.")
        fragile = sum(bool(row["fragile"]) for row in ok)
        lines.append(f"- Points whose answer depends on the rank tolerance (a decision within a "
                     f"factor 100 of it): {fragile}.")
        for column, what in (("smallest_controllability_margin", "Smallest controllability margin"),
                             ("smallest_observability_margin", "Smallest observability margin"),
                             ("distance_to_uncontrollability", "Smallest distance to uncontrollability (estimate)"),
                             ("distance_to_unobservability", "Smallest distance to unobservability (estimate)")):
            candidates = [row for row in ok if row[column] is not None]
            if candidates:
                worst = min(candidates, key=lambda r: r[column])
                lines.append(f"- {what}: {_fmt(_relative_shown(worst[column]))} at "
                             f"{_point_text(result, worst)}.")
        if result.reduced_order is not None:
            candidates = [row for row in ok if row["reduced_peak_error"] is not None]
            if candidates:
                worst = max(candidates, key=lambda r: r["reduced_peak_error"])
                lines.append(f"- Balanced truncation to order {result.reduced_order}: largest "
                             f"measured peak error {_fmt(worst['reduced_peak_error'])} (a-priori "
                             f"bound {_fmt(worst['reduced_error_bound'])}) at "
                             f"{_point_text(result, worst)}.")
    lines.append("")

    changes = _changes(result)
    if changes:
        lines.append("## Where the structure changes")
        lines.append("")
        lines.extend(changes)
        lines.append("")

    if ok:
        lines.append(f"## Weakest points (smallest PBH margin, up to {_WORST_LISTED})")
        lines.append("")
        header = list(result.parameters) + ["minimal order", "stabilizable", "detectable",
                                            "controllability margin", "observability margin",
                                            "distance to uncontrollability"]
        lines.append("| " + " | ".join(header) + " |")
        lines.append("|" + " --- |" * len(header))
        for row in sorted(ok, key=_weakest_margin)[:_WORST_LISTED]:
            cells = [_fmt(row[p]) for p in result.parameters] + [
                _fmt(row["minimal_order"]), _fmt(row["stabilizable"]), _fmt(row["detectable"]),
                _fmt(_relative_shown(row["smallest_controllability_margin"])),
                _fmt(_relative_shown(row["smallest_observability_margin"])),
                _fmt(_relative_shown(row["distance_to_uncontrollability"]))]
            lines.append("| " + " | ".join(cells) + " |")
        lines.append("")
        lines.append("Margins are the smallest singular values of [A - λI, B] and [A - λI; C] "
                     "over the eigenvalues λ, relative to the model's scale: the relative size "
                     "of the smallest change of the model data that makes a mode uncontrollable "
                     "or unobservable.")
        lines.append("")

    if failed:
        lines.append(f"## Failed points ({len(failed)}; up to {_FAILED_LISTED} listed)")
        lines.append("")
        for row in failed[:_FAILED_LISTED]:
            lines.append(f"- {_point_text(result, row)}: {row['error']}")
        lines.append("")

    if files:
        lines.append("## Files")
        lines.append("")
        for name in files:
            lines.append(f"- `{name}`")
        for note in notes:
            if note:
                lines.append(f"- {note}")
        lines.append("")

    lines.append("## Caution")
    lines.append("")
    lines.append(SAFETY_CAUTION)
    lines.append("")
    return "\n".join(lines)


# --- the index page -----------------------------------------------------------------------------

_PLOT_CAPTIONS = {
    "margins.png": ("Smallest PBH margins and distance estimates over the parameters",
                    ("Smallest controllability and observability margins (PBH) and the distance "
                    "estimates at every point, on a log axis; exact zeros are drawn at the "
                    "bottom of the axis.")),
    "structure.png": ("Kalman part sizes or minimal order, and the verdicts",
                      ("Minimal order (or the four Kalman part sizes over one parameter) and "
                      "where the model is stabilizable and detectable; failed points in grey.")),
}


def _slug(title: str, taken: set) -> str:
    base = "".join(ch if ch.isalnum() else "-" for ch in title.lower()).strip("-")
    base = "-".join(part for part in base.split("-") if part) or "section"
    sid, k = base, 2
    while sid in taken:
        sid, k = f"{base}-{k}", k + 1
    taken.add(sid)
    return sid


def _inline(text: str) -> str:
    """Escaped text with our markdown's inline code (```name```) as ``<code>``."""
    from plantcore.reports.style import escape

    pieces = text.split("`")
    return "".join(f"<code>{escape(piece)}</code>" if k % 2 else escape(piece)
                   for k, piece in enumerate(pieces))


def _cells(line: str) -> list:
    return [cell.strip() for cell in line.strip().strip("|").split("|")]


def _html_blocks(lines: list) -> str:
    """Our summary's markdown (paragraphs, ``- `` lists, ``|`` tables) as HTML."""
    out, k = [], 0
    while k < len(lines):
        line = lines[k]
        if not line.strip():
            k += 1
        elif line.startswith("|"):
            block = []
            while k < len(lines) and lines[k].startswith("|"):
                block.append(lines[k])
                k += 1
            head = _cells(block[0])
            body = [_cells(row) for row in block[2:]]
            rows = "".join("<tr>" + "".join(f"<td>{_inline(c)}</td>" for c in row) + "</tr>"
                           for row in body)
            out.append('<div class="table-wrap"><table><thead><tr>'
                       + "".join(f"<th>{_inline(c)}</th>" for c in head)
                       + f"</tr></thead><tbody>{rows}</tbody></table></div>")
        elif line.startswith("- "):
            items = []
            while k < len(lines) and lines[k].startswith("- "):
                items.append(f"<li>{_inline(lines[k][2:])}</li>")
                k += 1
            out.append("<ul>" + "".join(items) + "</ul>")
        else:
            para = []
            while k < len(lines) and lines[k].strip() and not lines[k].startswith(("|", "- ")):
                para.append(lines[k])
                k += 1
            out.append(f"<p>{_inline(' '.join(para))}</p>")
    return "\n".join(out)


def summary_html(summary: str, *, plots=()) -> str:
    """The sweep's ``index.html``: the summary (:func:`summary_markdown`) as a page in the
    model report's style, with the plots of the folder and a contents bar.

    Display only: the page is built from the summary text and the names of the plot files,
    so it says exactly what ``summary.md`` says.

    Examples
    --------
    >>> page = summary_html("# Envelope sweep: tank\\n\\n2 points.\\n\\n## Findings\\n\\n- a `x`\\n")
    >>> '<nav class="contents"' in page and '<code>x</code>' in page
    True
    """
    from plantcore.reports.style import escape, html_page

    lines = summary.splitlines()
    title = "Envelope sweep"
    if lines and lines[0].startswith("# "):
        title = lines[0][2:].strip()
        lines = lines[1:]
    sections, current = [], ("", [])
    for line in lines:
        if line.startswith("## "):
            sections.append(current)
            current = (line[3:].strip(), [])
        else:
            current[1].append(line)
    sections.append(current)
    lead_lines = sections[0][1]
    named = [s for s in sections[1:] if s[0]]
    if plots:    # the plots go after the findings and the structure changes
        where = next((i + 1 for i, (t, _) in enumerate(named)
                      if t.startswith("Where the structure changes")), 1 if named else 0)
        named.insert(where, ("Plots", None))
    taken = {"caution"}
    ids = ["caution" if t == "Caution" else _slug(t, taken) for t, _ in named]
    nav = " ".join(f'<a href="#{sid}">{i + 1}&nbsp;{escape(t)}</a>'
                   for i, (sid, (t, _)) in enumerate(zip(ids, named)))
    body = [f'<header class="report-head"><h1>{escape(title)}</h1>'
            + "".join(f"<p>{_inline(x)}</p>" for x in lead_lines if x.strip()
                      and not x.startswith("|"))
            + "</header>",
            f'<nav class="contents" aria-label="contents">{nav}</nav>']
    table = [x for x in lead_lines if x.startswith("|")]
    if table:
        body.append(_html_blocks(table))
    for i, (sid, (t, content)) in enumerate(zip(ids, named)):
        if content is None:
            inner = "".join(
                f'<figure><img src="{escape(name)}" alt="{escape(_PLOT_CAPTIONS[name][0])}">'
                f"<figcaption>{escape(_PLOT_CAPTIONS[name][1])}</figcaption></figure>"
                for name in plots if name in _PLOT_CAPTIONS)
        elif t == "Files":
            inner = "<ul>" + "".join(
                f'<li><a href="{escape(x[3:-1])}"><code>{escape(x[3:-1])}</code></a></li>'
                if x.startswith("- `") and x.endswith("`") else f"<li>{_inline(x[2:])}</li>"
                for x in content if x.startswith("- ")) + "</ul>"
        else:
            inner = _html_blocks(content)
        body.append(f'<section id="{sid}">\n<h2><span class="num">{i + 1}</span>'
                    f"{escape(t)}</h2>\n{inner}\n</section>")
    return html_page(title, "\n".join(body))


def _structure_key(row):
    if row["error"] is not None:
        return ("failed",)
    return (row["minimal_order"], row["controllable_observable"], row["controllable_unobservable"],
            row["uncontrollable_observable"], row["uncontrollable_unobservable"],
            row["stabilizable"], row["detectable"])


def _describe_structure(row) -> str:
    if row["error"] is not None:
        return "failed"
    sizes = (row["controllable_observable"], row["controllable_unobservable"],
             row["uncontrollable_observable"], row["uncontrollable_unobservable"])
    verdicts = []
    if not row["stabilizable"]:
        verdicts.append("not stabilizable")
    if not row["detectable"]:
        verdicts.append("not detectable")
    text = f"minimal order {row['minimal_order']}, parts {sizes}"
    return text + (", " + ", ".join(verdicts) if verdicts else "")


def _changes(result) -> list[str]:
    """One parameter: the intervals where the structure changes.  More: points that differ
    from the most common structure."""
    rows = result.rows
    if not rows:
        return []
    numeric = _numeric_parameters(result)
    out = []
    if len(result.parameters) == 1 and numeric:
        p = result.parameters[0]
        ordered = sorted(rows, key=lambda r: r[p])
        for a, b in itertools.pairwise(ordered):
            if _structure_key(a) != _structure_key(b):
                out.append(f"- between {p} = {_fmt(a[p])} and {_fmt(b[p])}: "
                           f"{_describe_structure(a)} -> {_describe_structure(b)}")
        if out:
            out.insert(0, "Part sizes are (controllable and observable, controllable only, "
                          "observable only, neither).")
            out.insert(1, "")
    else:
        common, count = Counter(_structure_key(r) for r in rows).most_common(1)[0]
        if count < len(rows):
            example = next(r for r in rows if _structure_key(r) == common)
            out.append(f"Most points ({count} of {len(rows)}): {_describe_structure(example)}. "
                       "The others:")
            out.append("")
            others = [r for r in rows if _structure_key(r) != common]
            for row in others[:_CHANGES_LISTED]:
                out.append(f"- {_point_text(result, row)}: {_describe_structure(row)}")
            if len(others) > _CHANGES_LISTED:
                out.append(f"- ... and {len(others) - _CHANGES_LISTED} more (see table.csv).")
    return out[:_CHANGES_LISTED + 2]


# --- plots --------------------------------------------------------------------------------------

def _figure(rows: int, cols: int = 1, height: float = 3.0):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5 if cols == 1 else 11.0, height * rows), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(rows, cols, squeeze=False)
    return fig, axes


def _positive(values):
    out = np.array([np.nan if v is None else float(v) for v in values], dtype=float)
    return np.where(np.isfinite(out) | np.isnan(out), np.maximum(out, _LOG_FLOOR), np.nan)


def _tolerance(result) -> float:
    from plantcore.core.rank import resolve_tolerance

    states = max((row["states"] or 0 for row in _ok(result)), default=0)
    return resolve_tolerance(result.tol, states)


def _plots(result, folder: Path) -> list[str]:
    numeric = _numeric_parameters(result)
    if not _ok(result):
        return []
    if len(result.parameters) == 1 and numeric:
        _plot_one(result, folder, numeric[0])
    elif len(result.parameters) == 2 and len(numeric) == 2:
        _plot_two(result, folder, *numeric)
    else:
        _plot_many(result, folder)
    return ["margins.png", "structure.png"]


_MARGIN_CURVES = (("smallest_controllability_margin", "controllability margin (PBH)"),
                  ("smallest_observability_margin", "observability margin (PBH)"),
                  ("distance_to_uncontrollability", "distance to uncontrollability (estimate)"),
                  ("distance_to_unobservability", "distance to unobservability (estimate)"))


def _plot_one(result, folder, p):
    rows = sorted(result.rows, key=lambda r: r[p])
    x = np.array([float(r[p]) for r in rows])
    ok = np.array([r["error"] is None for r in rows])
    fig, axes = _figure(1, height=4.0)
    ax = axes[0, 0]
    for k, (column, label) in enumerate(_MARGIN_CURVES):
        y = _positive([r[column] for r in rows])
        style = "-" if k < 2 else "--"
        ax.plot(x[ok], y[ok], style, color=_COLOURS[k], label=label, marker="." if len(x) < 80 else None)
    ax.axhline(_tolerance(result), color="black", linestyle=":", linewidth=1.0,
               label="rank tolerance")
    if (~ok).any():
        ax.plot(x[~ok], np.full((~ok).sum(), _LOG_FLOOR * 10), "x", color=_FAILED,
                label="failed point")
    ax.set_yscale("log")
    ax.set_xlabel(p)
    ax.set_ylabel("relative to the model's scale")
    ax.set_title("Margins over the sweep (low: a mode nearly lost)")
    ax.legend(fontsize=8, loc="best")
    ax.grid(True, which="major", alpha=0.3)
    fig.savefig(folder / "margins.png", dpi=110)

    fig, axes = _figure(2, height=3.0)
    ax = axes[0, 0]
    from plantcore.structure.kalman import PART_NAMES

    sizes = np.array([[np.nan if r["error"] is not None else r[name] for name in PART_NAMES]
                      for r in rows], dtype=float)
    bottom = np.zeros(len(rows))
    for k, name in enumerate(PART_NAMES):
        top = bottom + np.nan_to_num(sizes[:, k])
        ax.fill_between(x, bottom, top, where=ok, step="mid", color=_COLOURS[k], alpha=0.75,
                        label=name.replace("_", " "))
        bottom = top
    if (~ok).any():
        ax.plot(x[~ok], np.zeros((~ok).sum()), "x", color=_FAILED, label="failed point")
    ax.set_ylabel("states")
    ax.yaxis.get_major_locator().set_params(integer=True)
    ax.set_title("Kalman part sizes (bottom band: the minimal order)")
    ax.legend(fontsize=8, loc="upper right")
    ax = axes[1, 0]
    for level, column in ((1.0, "stabilizable"), (0.0, "detectable")):
        yes = np.array([r["error"] is None and bool(r[column]) for r in rows])
        no = np.array([r["error"] is None and not bool(r[column]) for r in rows])
        ax.plot(x[yes], np.full(yes.sum(), level), "o", color=_YES, markersize=4,
                label="holds" if level == 1.0 else None)
        ax.plot(x[no], np.full(no.sum(), level), "s", color=_NO, markersize=6,
                label="fails" if level == 1.0 else None)
    if (~ok).any():
        ax.plot(x[~ok], np.full((~ok).sum(), 0.5), "x", color=_FAILED, label="failed point")
    ax.set_yticks([0.0, 1.0], ["detectable", "stabilizable"])
    ax.set_ylim(-0.5, 1.5)
    ax.set_xlabel(p)
    ax.legend(fontsize=8, loc="center right")
    fig.savefig(folder / "structure.png", dpi=110)


def _as_grid(rows, p, q):
    """(xs, ys, index) when the points form a full grid in (p, q), else None."""
    xs = sorted({float(r[p]) for r in rows})
    ys = sorted({float(r[q]) for r in rows})
    if len(xs) * len(ys) != len(rows) or len(xs) < 2 or len(ys) < 2:
        return None
    where = {}
    for k, r in enumerate(rows):
        where[(float(r[p]), float(r[q]))] = k
    if len(where) != len(rows):
        return None
    index = np.array([[where[(x, y)] for x in xs] for y in ys])
    return np.array(xs), np.array(ys), index


def _map(ax, fig, rows, p, q, values, grid, *, label, cmap="viridis", norm=None, ticks=None,
         integer=False):
    if grid is not None:
        # One equal cell per grid value, labelled with the value: a parameter swept over
        # {500, 1500, 3000} is three cells, not bands stretched from 0 to 3750.
        xs, ys, index = grid
        image = ax.pcolormesh(np.arange(xs.size), np.arange(ys.size), values[index],
                              shading="nearest", cmap=cmap, norm=norm, edgecolors="white",
                              linewidth=0.6)
        for axis, grid_values in ((ax.xaxis, xs), (ax.yaxis, ys)):
            step = max(1, math.ceil(grid_values.size / 12))
            places = np.arange(0, grid_values.size, step)
            axis.set_ticks(places, labels=[_fmt(grid_values[k]) for k in places])
    else:
        x = [float(r[p]) for r in rows]
        y = [float(r[q]) for r in rows]
        image = ax.scatter(x, y, c=values, cmap=cmap, norm=norm, s=18)
    bar = fig.colorbar(image, ax=ax, label=label)
    if ticks is not None:
        bar.set_ticks(list(range(len(ticks))), labels=list(ticks))
    elif integer:
        from matplotlib.ticker import MaxNLocator

        bar.locator = MaxNLocator(integer=True)
        bar.update_ticks()
    ax.set_xlabel(p)
    ax.set_ylabel(q)


def _plot_two(result, folder, p, q):
    from matplotlib.colors import BoundaryNorm, ListedColormap

    rows = list(result.rows)
    grid = _as_grid(rows, p, q)
    fig, axes = _figure(1, 2, height=4.2)
    for k, (column, label) in enumerate(_MARGIN_CURVES[:2]):
        values = np.log10(_positive([r[column] for r in rows]))
        _map(axes[0, k], fig, rows, p, q, values, grid, label=f"log10 {label}")
        axes[0, k].set_title(label)
    fig.savefig(folder / "margins.png", dpi=110)

    fig, axes = _figure(1, 2, height=4.2)
    orders = np.array([np.nan if r["error"] is not None else r["minimal_order"] for r in rows],
                      dtype=float)
    _map(axes[0, 0], fig, rows, p, q, orders, grid, label="minimal order", cmap="cividis",
         integer=True)
    axes[0, 0].set_title("Minimal order")
    codes = np.array([_verdict_code(r) for r in rows], dtype=float)
    cmap = ListedColormap([_YES, _NO, "#d9a227", "#5a1f2b", _FAILED])
    norm = BoundaryNorm(np.arange(-0.5, 5.5), cmap.N)
    _map(axes[0, 1], fig, rows, p, q, codes, grid, label="verdict", cmap=cmap, norm=norm,
         ticks=_VERDICT_LABELS)
    axes[0, 1].set_title("Stabilizable and detectable")
    fig.savefig(folder / "structure.png", dpi=110)


def _plot_many(result, folder):
    rows = _ok(result)
    fig, axes = _figure(1, height=4.0)
    ax = axes[0, 0]
    for k, (column, label) in enumerate(_MARGIN_CURVES):
        y = np.sort(_positive([r[column] for r in rows]))
        ax.plot(np.arange(1, len(y) + 1), y, "-" if k < 2 else "--", color=_COLOURS[k], label=label)
    ax.axhline(_tolerance(result), color="black", linestyle=":", linewidth=1.0,
               label="rank tolerance")
    ax.set_yscale("log")
    ax.set_xlabel("points, weakest first (see the summary for their parameters)")
    ax.set_ylabel("relative to the model's scale")
    ax.set_title("Margins over the sweep, sorted")
    ax.legend(fontsize=8)
    fig.savefig(folder / "margins.png", dpi=110)

    fig, axes = _figure(1, height=3.5)
    ax = axes[0, 0]
    orders = Counter(r["minimal_order"] for r in rows)
    keys = sorted(orders)
    codes = Counter(_verdict_code(r) for r in result.rows)
    ax.bar([str(k) for k in keys], [orders[k] for k in keys], color=_COLOURS[0])
    ax.set_xlabel("minimal order")
    ax.set_ylabel("points")
    verdicts = "; ".join(f"{_VERDICT_LABELS[c]}: {codes[c]}" for c in sorted(codes))
    ax.set_title(f"Minimal order over the points ({verdicts})", fontsize=9)
    fig.savefig(folder / "structure.png", dpi=110)


def plot_sweep_map(result, quantity="minimal_order", *, x=None, y=None):
    """One quantity of a sweep over one or two of its parameters, as a matplotlib figure.

    Parameters
    ----------
    result : SweepResult
    quantity : str
        A numeric column of ``result.rows`` (``"minimal_order"``, a part size,
        ``"smallest_controllability_margin"``, ...).  Margins and distances are drawn on a
        logarithmic scale.
    x, y : str, optional
        The parameters on the axes; default the sweep's first one or two numeric
        parameters.  With ``y``, a map: one equal cell per value when the points form a
        full grid (labelled with the values, never stretched into bands), otherwise a
        scatter of the points.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import plantcore as pc
    >>> result = pc.sweep(lambda p: ([[-p["a"]]], [[1.0]], [[1.0]]), pc.grid(a=[1.0, 2.0]),
    ...                   executor="serial")
    >>> plot_sweep_map(result).axes[0].get_xlabel()
    'a'
    """
    numeric = _numeric_parameters(result)
    rows = _ok(result)
    if not rows:
        raise ValueError("every point of the sweep failed; there is nothing to draw.")
    if quantity not in rows[0]:
        raise ValueError(f"quantity {quantity!r} is not a column of the sweep; choose one of "
                         f"{', '.join(sorted(k for k, v in rows[0].items() if _is_number(v)))}.")
    for name in (x, y):
        if name is not None and name not in numeric:
            raise ValueError(f"{name!r} is not a numeric parameter of the sweep; choose one of "
                             f"{', '.join(numeric) or '(none)'}.")
    if x is None:
        if not numeric:
            raise ValueError("the sweep has no numeric parameter to put on an axis.")
        x = numeric[0]
        if y is None and len(numeric) > 1:
            y = numeric[1]
    logarithmic = "margin" in quantity or "distance" in quantity
    values = np.array([np.nan if r[quantity] is None else float(r[quantity]) for r in rows])
    if logarithmic:
        values = np.log10(_positive(values))
    label = f"log10 {quantity}" if logarithmic else quantity
    fig, axes = _figure(1, height=4.2)
    ax = axes[0, 0]
    if y is None:
        order = np.argsort([float(r[x]) for r in rows])
        ax.plot(np.array([float(rows[k][x]) for k in order]), values[order], "o-",
                color=_COLOURS[0])
        ax.set_xlabel(x)
        ax.set_ylabel(label)
    else:
        _map(ax, fig, rows, x, y, values, _as_grid(rows, x, y), label=label,
             integer=not logarithmic)
    ax.set_title(quantity.replace("_", " "))
    return fig
