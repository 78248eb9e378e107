"""The report's plots: eigenvalue map, frequency response and Hankel singular values.

Each ``*_figure`` function draws what a
:class:`~plantcore.analysis.report_contents.ReportContents` holds on a matplotlib figure;
the ``*_plot`` functions turn it into the PNG ``data:`` address the HTML report embeds, with
its alternative text.  Nothing here computes a model quantity.  Model names never enter a
plot (matplotlib would read ``$`` as mathematics).

For scripts and notebooks, ``plot_eigenvalue_map``, ``plot_frequency_response`` and
``plot_hankel_singular_values`` (public as ``plantcore.plot_*``) return the same figures
for a model, an analysis, a report's contents or a written report; a model or an analysis
is first run through :func:`~plantcore.analysis.report_contents.collect_report` (the
analysis layer does the numerics, these functions only draw).
"""

from __future__ import annotations

import base64
import io
import math

import numpy as np

from plantcore.core.safe_norms import frobenius
from plantcore.core.wording import counted, shown_eigenvalue

__all__ = ["PART_LABELS", "eigenvalue_plot", "frequency_plot", "hankel_plot",
           "plot_eigenvalue_map", "plot_frequency_response", "plot_hankel_singular_values"]

#: Plain-language labels of the four Kalman parts, in state order.
PART_LABELS = {
    "controllable_observable": "controllable and observable",
    "controllable_unobservable": "controllable, unobservable",
    "uncontrollable_observable": "uncontrollable, observable",
    "uncontrollable_unobservable": "uncontrollable and unobservable",
}
# Our own palette: a slate blue, an ochre, a brick red and a warm grey, distinguishable in
# print and for the common colour-vision deficiencies; marker shapes repeat the information.
_PART_STYLE = {
    "controllable_observable": {"color": "#2c5d8a", "marker": "o", "size": 7, "filled": True},
    "controllable_unobservable": {"color": "#c98a1b", "marker": "s", "size": 11, "filled": False},
    "uncontrollable_observable": {"color": "#a3362c", "marker": "^", "size": 13, "filled": False},
    "uncontrollable_unobservable": {"color": "#6f6a62", "marker": "D", "size": 15, "filled": False},
}
_MODEL_STYLE = {
    "original": {"color": "#262626"},
    "minimal": {"color": "#2c5d8a"},
    "reduced": {"color": "#c98a1b"},
}


def _png(fig) -> str:
    """A matplotlib figure as an ``<img>`` source (base64 PNG, no metadata)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _figure(width=7.0, height=4.2):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _style_axes(ax) -> None:
    ax.grid(True, which="major", color="#d9d4c7", linewidth=0.7)
    ax.grid(True, which="minor", color="#ece8de", linewidth=0.4)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=9)
    ax.set_axisbelow(True)


def plotted_eigenvalues(model, modes) -> np.ndarray:
    """The eigenvalues as the map places them: as text and HTML show them
    (:func:`plantcore.core.wording.shown_eigenvalue`), so a part at rounding level relative
    to ``||A||_F`` is drawn at exactly 0 (an integrator computed as ``2.7e-17`` sits on the
    imaginary axis and sets no scale)."""
    scale = frobenius(model.A) if model.n else 1.0
    return np.array([shown_eigenvalue(m.value, scale, discrete=model.is_discrete)
                     for m in modes], dtype=complex)


def _decade_ticks(magnitudes, most: int = 5) -> np.ndarray:
    """Powers of ten inside the range of ``magnitudes`` (positive), at most ``most`` of them,
    evenly strided so labels never crowd (the decade just outside is used when the range
    holds no power of ten)."""
    lo = math.ceil(math.log10(float(magnitudes.min())))
    hi = math.floor(math.log10(float(magnitudes.max())))
    if hi < lo:
        lo = hi = round(math.log10(float(np.sqrt(magnitudes.min() * magnitudes.max()))))
    stride = max(1, math.ceil((hi - lo + 1) / most))
    return 10.0 ** np.arange(hi, lo - 1, -stride)[::-1]


def _power_label(x, _pos=None) -> str:
    if x == 0:
        return "0"
    k = round(math.log10(abs(x)))
    if -2 <= k <= 3:
        text = f"{abs(x):g}"
    else:
        text = f"10$^{{{k}}}$"
    return ("−" if x < 0 else "") + text


def _signed_log_axis(axis, coordinates, setter) -> bool:
    """Put one axis on a signed logarithmic scale when its nonzero values spread over more
    than a factor 50; ticks at strided powers of ten (both signs) and 0.  Returns whether
    the scale was changed."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullLocator

    nz = np.abs(coordinates[coordinates != 0])
    if not nz.size or nz.max() / nz.min() <= 50:
        return False
    linthresh = float(nz.min())
    setter("symlog", linthresh=linthresh, linscale=0.6)
    ticks = _decade_ticks(nz)
    signs = []
    if (coordinates < 0).any():
        signs.append(-1.0)
    if (coordinates > 0).any():
        signs.append(1.0)
    values = sorted({0.0} | {sg * t for sg in signs for t in ticks})
    axis.set_major_locator(FixedLocator(values))
    axis.set_major_formatter(FuncFormatter(_power_label))
    axis.set_minor_locator(NullLocator())
    return True


def drop_overlapping_labels(fig, ax) -> None:
    """Remove tick labels that would overlap their neighbours (kept from the outermost
    inwards on a signed log axis, left to right otherwise), so no label is ever drawn over
    another whatever the spread of the data."""
    from matplotlib.ticker import FixedLocator

    renderer = fig.canvas.get_renderer()
    fig.draw_without_rendering()
    for axis in (ax.xaxis, ax.yaxis):
        ticks = [t for t in axis.get_major_ticks() if t.label1.get_visible() and t.label1.get_text()]
        lo, hi = sorted(axis.get_view_interval())
        ticks = [t for t in ticks if lo <= t.get_loc() <= hi]
        if len(ticks) < 2:
            continue
        # zero first, then by decreasing magnitude: the ends of the axis and 0 are kept
        ticks.sort(key=lambda t: (t.get_loc() != 0, -abs(t.get_loc())))
        kept, boxes = [], []
        for t in ticks:
            box = t.label1.get_window_extent(renderer).expanded(1.15, 1.15)
            if any(box.overlaps(b) for b in boxes):
                continue
            kept.append(t.get_loc())
            boxes.append(box)
        axis.set_major_locator(FixedLocator(sorted(kept)))


def draw_eigenvalue_map(ax, model, modes) -> str:
    """Draw the eigenvalue map on ``ax``; returns a note on the scales used (may be "")."""
    values = plotted_eigenvalues(model, modes)
    note = ""
    if model.is_discrete:
        t = np.linspace(0.0, 2.0 * np.pi, 361)
        ax.plot(np.cos(t), np.sin(t), color="#8c8577", linewidth=1.0, zorder=1,
                label="unit circle (stability boundary)")
        ax.set_aspect("equal", adjustable="datalim")
        ax.set_xlabel("real part")
        ax.set_ylabel("imaginary part")
    else:
        ax.axvline(0.0, color="#8c8577", linewidth=1.0, zorder=1,
                   label="imaginary axis (stability boundary)")
        ax.set_xlabel("real part (1 / time unit)")
        ax.set_ylabel("imaginary part (rad / time unit)")
        if values.size and _signed_log_axis(ax.xaxis, values.real, ax.set_xscale):
            note = (" The real axis is on a signed logarithmic scale (linear between the "
                    "smallest nonzero values and zero) so that slow and fast modes both show.")
        if values.size and _signed_log_axis(ax.yaxis, values.imag, ax.set_yscale):
            note += " The imaginary axis is on a signed logarithmic scale too."
    if values.size and (values == 0).any() and not model.is_discrete:
        note += (" Eigenvalues at rounding level of zero are integrators and are drawn at 0.")
    for part in ("uncontrollable_unobservable", "uncontrollable_observable",
                 "controllable_unobservable", "controllable_observable"):
        sel = np.array([k for k, m in enumerate(modes) if m.part == part], dtype=int)
        if not sel.size:
            continue
        st = _PART_STYLE[part]
        z = values[sel]
        ax.scatter(z.real, z.imag, s=st["size"] ** 2, marker=st["marker"],
                   facecolors=st["color"] if st["filled"] else "none", edgecolors=st["color"],
                   linewidths=1.6, zorder=3 if st["filled"] else 2,
                   label=f"{PART_LABELS[part]} ({sel.size})")
    narrow = np.array([k for k, m in enumerate(modes) if m.narrow], dtype=int)
    if narrow.size:
        z = values[narrow]
        ring = 22 if narrow.size <= 30 else 14      # many rings would black out the map
        ax.scatter(z.real, z.imag, s=ring ** 2, marker="o", facecolors="none",
                   edgecolors="#262626", linewidths=0.9 if narrow.size <= 30 else 0.5,
                   linestyle=(0, (2, 2)), zorder=4,
                   label=f"near cancellation ({narrow.size})")
    if not len(modes):
        ax.text(0.5, 0.5, "the model has no states", transform=ax.transAxes, ha="center")
    ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False,
              borderaxespad=0.0, markerscale=0.7, labelspacing=1.0)
    return note


def eigenvalue_figure(contents):
    """The eigenvalue map of a report's contents as a matplotlib figure, and its note."""
    fig = _figure(8.0, 4.4)
    ax = fig.add_subplot()
    _style_axes(ax)
    note = draw_eigenvalue_map(ax, contents.model, contents.analysis.modes)
    drop_overlapping_labels(fig, ax)
    return fig, note


def eigenvalue_plot(contents) -> tuple[str, str]:
    """Eigenvalues in the complex plane, marked by Kalman part."""
    fig, note = eigenvalue_figure(contents)
    alt = "Eigenvalues of the original model in the complex plane, marked by Kalman part."
    return _png(fig), alt + note


def frequency_figure(contents):
    """Singular values of original (sampled), minimal and reduced models, overlaid, as a
    matplotlib figure, with its alternative text."""
    model = contents.model
    fig = _figure(7.0, 4.2)
    ax = fig.add_subplot()
    _style_axes(ax)
    positive = []
    for response in contents.responses:   # the original is sampled coarsely, as markers
        label, w = response.label, response.frequencies
        sv = np.where(response.singular_values > 0, response.singular_values, np.nan)
        st = _MODEL_STYLE[label]
        text = f"{label}, {counted(response.states, 'state')}"
        for j in range(sv.shape[1]):
            name = text if j == 0 else None
            if label == "original":
                ax.plot(w, sv[:, j], linestyle="none", marker="o", markersize=4.5,
                        markerfacecolor="none", markeredgecolor=st["color"],
                        markeredgewidth=0.9, label=name, zorder=3)
            else:
                ax.plot(w, sv[:, j], color=st["color"], linewidth=1.8 if label == "minimal" else 1.6,
                        linestyle="-" if label == "minimal" else (0, (5, 3)), label=name, zorder=2)
        positive.append(sv[np.isfinite(sv)])
    ax.set_xscale("log")
    allv = np.concatenate(positive) if positive else np.array([])
    if allv.size and allv.min() > 0:
        ax.set_yscale("log")
    if model.is_discrete:
        ax.axvline(np.pi / model.dt, color="#8c8577", linewidth=1.0, linestyle=":")
        ax.set_xlabel("frequency (rad/s; dotted line: half the sampling rate)")
    else:
        ax.set_xlabel("frequency (rad / time unit)")
    ax.set_ylabel("gain (singular values)" if min(model.n_inputs, model.n_outputs) > 1 else "gain")
    if model.n_inputs and model.n_outputs:
        ax.legend(fontsize=8, loc="best", framealpha=0.9)
    alt = ("Frequency response of the original model (markers) and its minimal realization "
           "(solid line)" + (" and the balanced-truncated model (dashed line)."
                             if contents.reduction is not None else "."))
    if min(model.n_inputs, model.n_outputs) > 1:
        alt += " Each model shows all singular values of its transfer matrix."
    return fig, alt


def frequency_plot(contents) -> tuple[str, str]:
    """The frequency-response figure as a PNG ``data:`` address and its alternative text."""
    fig, alt = frequency_figure(contents)
    return _png(fig), alt


def hankel_plot(contents) -> tuple[str, str] | None:
    """The Hankel-singular-value figure as a PNG ``data:`` address and its alternative
    text, or None when there are no values to draw."""
    drawn = hankel_figure(contents)
    return None if drawn is None else (_png(drawn[0]), drawn[1])


def hankel_figure(contents):
    """Hankel singular values with the truncation's cut, as a matplotlib figure and its
    alternative text; None without values."""
    red = contents.reduction
    if red is not None:
        hsv = np.asarray(red.hankel_singular_values, dtype=float)
        cut = red.stable_order
    else:
        hsv = contents.analysis.hankel_singular_values
        if hsv is None:
            return None
        hsv = np.asarray(hsv, dtype=float)
        cut = None
    if not hsv.size:
        return None
    fig = _figure(6.8, 3.6)
    ax = fig.add_subplot()
    _style_axes(ax)
    idx = np.arange(1, hsv.size + 1)
    floor = max(hsv[0] * 1e-17, np.finfo(float).tiny)
    shown = np.maximum(hsv, floor)
    kept = idx <= cut if cut is not None else np.ones(hsv.size, dtype=bool)
    ax.bar(idx[kept], shown[kept], color="#2c5d8a", width=0.6, label="kept")
    if (~kept).any():
        ax.bar(idx[~kept], shown[~kept], color="#e0b8a8", edgecolor="#a3362c", width=0.6,
               label="discarded")
    ax.set_yscale("log")
    ax.set_xlabel("state of the balanced minimal model")
    ax.set_ylabel("Hankel singular value")
    ax.set_xticks(idx if hsv.size <= 30 else idx[:: max(1, hsv.size // 15)])
    if cut is not None and cut < hsv.size:
        ax.axvline(cut + 0.5, color="#a3362c", linestyle=(0, (4, 3)), linewidth=1.2)
        ax.text(cut + 0.6, shown[0], f"cut after {cut}; error bound {red.error_bound:.3g}",
                fontsize=8, color="#a3362c", va="top")
    ax.legend(fontsize=8, loc="lower left", framealpha=0.9)
    alt = ("Hankel singular values of the minimal model, largest first; bars right of the "
           "dashed line are discarded by the balanced truncation.")
    return fig, alt


# =============================================================================================
# Public plotting functions (notebooks and scripts)
# =============================================================================================

def _contents(source, **options):
    """The report contents to draw: given, held by a written report, or collected."""
    from plantcore.analysis.analyze import Analysis
    from plantcore.analysis.report_contents import ReportContents, collect_report

    if isinstance(source, ReportContents):
        if options:
            raise ValueError(f"the report contents are already collected; "
                             f"{', '.join(sorted(options))} cannot change them.")
        return source
    contents = getattr(source, "contents", None)
    if isinstance(contents, ReportContents):
        return _contents(contents, **options)
    if isinstance(source, Analysis):
        return collect_report(source.model, tol=source.tolerance, analysis=source,
                              progress=False, **options)
    return collect_report(source, progress=False, **options)


def plot_frequency_response(source, *, order=None, max_error=None):
    """Frequency response of a model, its minimal realization and its balanced truncation.

    Parameters
    ----------
    source : model, Analysis, ReportContents or WrittenReport
        What to draw (a model is analysed first; an analysis is reused).
    order, max_error : optional
        The truncation, as for :func:`~plantcore.analysis.report_contents.collect_report`.

    Returns
    -------
    matplotlib.figure.Figure
        The original sampled as markers on the minimal model's frequency grid, the minimal
        and the reduced models as lines (singular values for several inputs and outputs).

    Examples
    --------
    >>> fig = plot_frequency_response(([[-1.0]], [[1.0]], [[2.0]]))
    >>> [line.get_label() for line in fig.axes[0].get_lines()][:2]
    ['original, 1 state', 'minimal, 1 state']
    """
    options = {k: v for k, v in (("order", order), ("max_error", max_error)) if v is not None}
    return frequency_figure(_contents(source, **options))[0]


def plot_hankel_singular_values(source, *, order=None, max_error=None):
    """Hankel singular values of the minimal model, with the truncation's cut.

    Parameters and the model sources as for :func:`plot_frequency_response`.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ValueError
        When the model has no Hankel singular values to draw (a mode on the stability
        boundary, or no states); the message says why.
    """
    options = {k: v for k, v in (("order", order), ("max_error", max_error)) if v is not None}
    contents = _contents(source, **options)
    drawn = hankel_figure(contents)
    if drawn is None:
        reason = contents.reduction_problem or contents.analysis.hankel_note or "none computed"
        raise ValueError(f"no Hankel singular values to draw: {reason}")
    return drawn[0]


def plot_eigenvalue_map(source):
    """The eigenvalues in the complex plane, marked by Kalman part (integrators at rounding
    level drawn at 0, signed logarithmic axes for wide spreads, no overlapping labels).

    Returns
    -------
    matplotlib.figure.Figure
    """
    return eigenvalue_figure(_contents(source))[0]
