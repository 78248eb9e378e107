"""Plots of the survey boat demo: heading error against each filter's own three-sigma
bound, and the pose NEES against its chi-square bounds.
"""

from __future__ import annotations

import numpy as np

from plantcore.examples.survey_boat.simulation import SurveyBoatDemo

__all__ = ["plot_heading_error", "plot_nees"]


def _axes(ax, figsize=(7.0, 3.6)):
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    return fig, fig.add_subplot(1, 1, 1)


def plot_heading_error(demo: SurveyBoatDemo, *, run: int = 0, ax=None):
    """Heading error of each filter against its own three-sigma bound, in degrees.

    Returns the matplotlib figure.
    """
    fig, ax = _axes(ax)
    t = demo.time
    for err, std, colour, label in (
            (demo.heading_error_standard, demo.heading_std_standard, "#b5562b", "standard"),
            (demo.heading_error_constrained, demo.heading_std_constrained, "#2b6f8a",
             "observability-constrained")):
        ax.plot(t, np.degrees(err[run]), color=colour, lw=1.2, label=f"{label}: error")
        ax.plot(t, 3 * np.degrees(std[run]), color=colour, lw=0.9, ls="--",
                label=f"{label}: own 3 sigma")
        ax.plot(t, -3 * np.degrees(std[run]), color=colour, lw=0.9, ls="--")
    ax.set_xlabel("time since leaving the mooring (s)")
    ax.set_ylabel("heading error (deg)")
    ax.set_title(f"Heading error against the filter's own bound (run {run})")
    ax.legend(fontsize=7, ncol=2, loc="upper left")
    ax.grid(True, lw=0.3)
    return fig


def plot_nees(demo: SurveyBoatDemo, *, ax=None):
    """Run-averaged NEES of the boat pose over time with the chi-square bounds."""
    fig, ax = _axes(ax)
    lo, hi = demo.nees_bounds
    ax.plot(demo.time, demo.average_nees_standard, color="#b5562b", lw=1.2, label="standard")
    ax.plot(demo.time, demo.average_nees_constrained, color="#2b6f8a", lw=1.2,
            label="observability-constrained")
    ax.axhline(hi, color="0.3", lw=0.8, ls=":", label="95% chi-square bounds")
    ax.axhline(lo, color="0.3", lw=0.8, ls=":")
    ax.axhline(3.0, color="0.6", lw=0.6)
    ax.set_xlabel("time since leaving the mooring (s)")
    ax.set_ylabel(f"average NEES over {demo.runs} runs")
    ax.set_title("Consistency of the boat-pose estimate")
    ax.legend(fontsize=7)
    ax.grid(True, lw=0.3)
    return fig
