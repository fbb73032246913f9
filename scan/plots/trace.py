"""Figure: ln p of every walker against the step — burn-in and stray walkers at a glance.

Kept walkers are drawn in the posterior colour, walkers dropped as strays
(:func:`scan.sampler.convergence.settle`) in vermillion; dotted lines mark the τ-based
burn-in and the burn-in after the ln p check, a dashed line the typical-set floor.  The
y axis starts a few floor depths below the best ln p, so the first steps of a chain
started far away do not flatten the rest (the text in the corner says so).
"""
from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D

from scan.plots.looks import GUIDE_GREY, OKABE_ITO, POSTERIOR_COLOUR
from scan.plots.style import figure, legend_below
from scan.sampler.convergence import Settled

STRAY_COLOUR: str = OKABE_ITO["vermillion"]
#: The y axis reaches this many floor depths (ln p_max − floor) below ln p_max.
DEPTHS_SHOWN: float = 3.0


def trace_figure(log_prob: np.ndarray, settled: Settled, burn_in_tau: int):
    """ln p (steps, walkers) against the step; returns the matplotlib Figure.

    Parameters
    ----------
    log_prob : ndarray, shape (steps, walkers)
        The chain's stored ln p.
    settled : Settled
        Burn-in and kept walkers after the ln p check.
    burn_in_tau : int
        The τ-based burn-in [steps] (negative: none stored).
    """
    fig, ax = figure(aspect=0.6)
    log_prob = np.asarray(log_prob, float)
    steps = np.arange(log_prob.shape[0])
    shown = np.where(np.isfinite(log_prob), log_prob, np.nan)
    handles = []
    for kept, colour, text in ((True, POSTERIOR_COLOUR, "walkers kept"),
                               (False, STRAY_COLOUR, "stray walkers, dropped")):
        columns = np.flatnonzero(settled.kept == kept)
        if columns.size:
            ax.plot(steps, shown[:, columns], color=colour, lw=0.4, alpha=0.6)
            handles.append(Line2D([], [], color=colour, lw=0.8,
                                  label=f"{text} ({columns.size})"))
    handles += _guides(ax, settled, burn_in_tau)
    _limits(ax, log_prob, settled)
    ax.set_xlabel("step")
    ax.set_ylabel(r"$\ln p$ (log posterior)")
    legend_below(fig, handles, ncols=2)
    return fig


def _guides(ax, settled: Settled, burn_in_tau: int) -> list:
    """Burn-in lines and the typical-set floor; their legend handles."""
    handles = []
    if burn_in_tau > 0:
        ax.axvline(burn_in_tau, color=GUIDE_GREY, lw=0.8, ls=":")
        handles.append(Line2D([], [], color=GUIDE_GREY, lw=0.8, ls=":",
                              label=rf"burn-in from $\tau$ ({burn_in_tau})"))
    if settled.burn_in > max(burn_in_tau, 0):
        ax.axvline(settled.burn_in, color="k", lw=0.8, ls=":")
        handles.append(Line2D([], [], color="k", lw=0.8, ls=":",
                              label=rf"burn-in after the $\ln p$ check ({settled.burn_in})"))
    if np.isfinite(settled.floor):
        ax.axhline(settled.floor, color=GUIDE_GREY, lw=0.8, ls="--")
        handles.append(Line2D([], [], color=GUIDE_GREY, lw=0.8, ls="--",
                              label="typical-set floor"))
    return handles


def _limits(ax, log_prob: np.ndarray, settled: Settled) -> None:
    """y from a few floor depths below the best ln p; a note if values lie below."""
    finite = log_prob[np.isfinite(log_prob)]
    if not finite.size or not np.isfinite(settled.floor):
        return
    top = float(finite.max())
    depth = max(top - settled.floor, 1e-3)
    low = settled.floor - (DEPTHS_SHOWN - 1.0) * depth
    ax.set_ylim(low, top + 0.15 * depth)
    ax.set_xlim(0, max(log_prob.shape[0] - 1, 1))
    below = int(np.sum(finite < low))
    if below:
        ax.text(0.98, 0.04, f"{below} values below the axis", transform=ax.transAxes,
                ha="right", fontsize=6.5, color=GUIDE_GREY)
