"""Figure: the exclusion map of a 2-D grid — one shaded, hatched region per constraint.

Drawn, bottom to top: points not computed (white, hatched) and invalid models (grey);
every excluding constraint's region (status 1: filled with transparency and its own
hatch, legend text from the term's ``label``); every sensitivity's detectable region
(status 2) faintly tinted inside its boundary line; decades of P_peak as thin dotted contours;
and, when a chain is given, the posterior's 68 % and 95 % regions (mass fractions of its
smoothed 2-D histogram, :mod:`scan.plots.levels`).  Constraints that exclude no grid
point are named together in one legend entry.
"""
from __future__ import annotations

import re

import numpy as np
from matplotlib.colors import to_rgb
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from scan.grid.verdict import DETECTABLE, EXCLUDED
from scan.plots.grid_data import EXCLUDING_KINDS, GridData
from scan.plots.levels import Histogram2D
from scan.plots.style import COLUMN_WIDTH_IN, PALETTE, figure, legend_below

HATCHES: tuple[str, ...] = ("////", "\\\\\\\\", "xxx", "||||", "----", "++", "**")
INVALID_GREY = "#bdbdbd"
#: Legend labels up to this length fit two legend columns under a column-wide map.
SHORT_LABEL: int = 34
UNIT_TEXT = {"M_p": r"$M_p$", "Mpc^-1": r"Mpc$^{-1}$"}
_DISFAVOURING = ("prior", "detection")


def exclusion_figure(grid: GridData, posterior: Histogram2D | None = None, *,
                     p_peak_contours: bool = True, width: float = COLUMN_WIDTH_IN):
    """Build the exclusion map of ``grid``; returns the matplotlib Figure.

    Parameters
    ----------
    grid : GridData
        The scan (:func:`scan.plots.grid_data.exclusion_data`).
    posterior : Histogram2D, optional
        A chain's 2-D histogram in the grid's axes (log10 of log-scaled axes), with its
        68 % / 95 % thresholds.
    p_peak_contours : bool
        Draw decades of P_peak.
    width : float
        Figure width [in].
    """
    fig, ax = figure(width=width, aspect=0.9)
    X, Y = np.meshgrid(grid.x, grid.y)
    handles = _coverage(ax, grid, X, Y)
    excluding = [t for t in grid.terms if t.kind in EXCLUDING_KINDS
                 and (t.status == EXCLUDED).any()]
    for i, term in enumerate(excluding):
        handles.append(_region(ax, X, Y, term.status == EXCLUDED, PALETTE[i % len(PALETTE)],
                               HATCHES[i % len(HATCHES)], _verdict(term)))
    sensitivities = [t for t in grid.terms if t.kind == "sensitivity"]
    for j, term in enumerate(sensitivities):
        color = PALETTE[(len(excluding) + j) % len(PALETTE)]
        snr = "" if term.snr_threshold is None else f" (SNR ≥ {term.snr_threshold:g})"
        handles.append(_detectable(ax, X, Y, term.status == DETECTABLE, color,
                                   f"{term.label}: detectable{snr}"))
    quiet = [t.label for t in grid.terms if t.kind in EXCLUDING_KINDS and t not in excluding]
    if quiet:
        handles.append(Patch(visible=False, label="no excluded points: " + ", ".join(quiet)))
    if p_peak_contours:
        _p_peak(ax, grid, X, Y)
    if posterior is not None:
        handles += _posterior(ax, posterior, grid)
    ax.set_xscale(grid.x_scale)
    ax.set_yscale(grid.y_scale)
    ax.set_xlim(grid.x.min(), grid.x.max())
    ax.set_ylim(grid.y.min(), grid.y.max())
    ax.set_xlabel(axis_label(grid.x_label, grid.x_units))
    ax.set_ylabel(axis_label(grid.y_label, grid.y_units))
    short = all(len(h.get_label()) <= SHORT_LABEL for h in handles)
    legend_below(fig, handles, ncols=2 if short else 1, wrap=60)
    return fig


def axis_label(label: str, units: str) -> str:
    """``label [units]`` unless the label already ends in units or the axis has none."""
    has_units = label.rstrip().endswith("]") and not re.search(r"\[\d+\]$", label.rstrip())
    if has_units or units in ("", "1"):
        return label
    return f"{label} [{UNIT_TEXT.get(units, units)}]"


def _verdict(term) -> str:
    return f"{term.label}: {'disfavoured' if term.kind in _DISFAVOURING else 'excluded'}"


def _coverage(ax, grid: GridData, X, Y) -> list:
    """Grey out invalid models and hatch points not computed; their legend handles."""
    handles = []
    invalid = grid.done & ~grid.valid
    if invalid.any():
        ax.contourf(X, Y, invalid.astype(float), levels=[0.5, 1.5], colors=[INVALID_GREY])
        handles.append(Patch(facecolor=INVALID_GREY, label="invalid model"))
    if (~grid.done).any():
        cs = ax.contourf(X, Y, (~grid.done).astype(float), levels=[0.5, 1.5],
                         colors=["none"], hatches=["...."])
        cs.set_edgecolor(PALETTE[7])
        handles.append(Patch(facecolor="none", edgecolor=PALETTE[7], hatch="....",
                             label=f"not computed ({int((~grid.done).sum())} of "
                                   f"{grid.done.size} points)"))
    return handles


def _region(ax, X, Y, mask: np.ndarray, color: str, hatch: str, label: str) -> Patch:
    """A filled, hatched region where ``mask`` holds; its legend patch."""
    if mask.any():
        cs = ax.contourf(X, Y, mask.astype(float), levels=[0.5, 1.5], colors=[color],
                         alpha=0.28, hatches=[hatch])
        cs.set_edgecolor(color)
        _contour_indicator(ax, X, Y, mask, color, "-", 0.8)
    return Patch(facecolor=color, alpha=0.28, edgecolor=color, hatch=hatch, label=label)


def _detectable(ax, X, Y, mask: np.ndarray, color: str, label: str) -> Patch:
    """A sensitivity's detectable region: faintly tinted inside a solid boundary."""
    if mask.any():
        ax.contourf(X, Y, mask.astype(float), levels=[0.5, 1.5], colors=[color], alpha=0.10)
        _contour_indicator(ax, X, Y, mask, color, "-", 1.3)
    return Patch(facecolor=(*to_rgb(color), 0.10), edgecolor=color, lw=1.3, label=label)


def _contour_indicator(ax, X, Y, mask: np.ndarray, color: str, style: str,
                       lw: float) -> bool:
    """Boundary line of ``mask``; False when the mask is empty or everywhere true."""
    if not mask.any() or mask.all():
        return False
    ax.contour(X, Y, mask.astype(float), levels=[0.5], colors=[color], linestyles=[style],
               linewidths=lw)
    return True


def _p_peak(ax, grid: GridData, X, Y) -> None:
    """Dotted contours at decades of P_peak (valid models only), labelled."""
    with np.errstate(divide="ignore", invalid="ignore"):
        log_p = np.where(grid.valid & (grid.P_peak > 0), np.log10(grid.P_peak), np.nan)
    if np.sum(np.isfinite(log_p)) < 4:
        return
    lo, hi = np.nanmin(log_p), np.nanmax(log_p)
    decades = np.arange(np.ceil(lo), np.floor(hi) + 1)
    if not decades.size:
        return
    cs = ax.contour(X, Y, log_p, levels=decades, colors=[PALETTE[7]], linestyles=[":"],
                    linewidths=0.6)
    ax.clabel(cs, fmt=lambda v: rf"$\mathcal{{P}}_{{\rm peak}}=10^{{{v:.0f}}}$",
              fontsize=5.5, inline=True)


def _posterior(ax, post: Histogram2D, grid: GridData) -> list:
    """68 % (solid) and 95 % (dashed) posterior contours; their legend handles."""
    x = 10.0 ** post.x if grid.x_scale == "log" else post.x
    y = 10.0 ** post.y if grid.y_scale == "log" else post.y
    order = np.argsort(post.thresholds)  # contour levels must increase
    levels = post.thresholds[order]
    styles = {0.68: "-", 0.95: "--"}
    fractions = [post.fractions[i] for i in order]
    if np.unique(levels).size < levels.size:
        return []
    ax.contour(x, y, post.density, levels=levels, colors=["k"],
               linestyles=[styles.get(f, "-.") for f in fractions], linewidths=1.0)
    return [Line2D([], [], color="k", lw=1.0, ls=styles.get(f, "-."),
                   label=f"posterior {f:.0%}".replace("%", " %")) for f in post.fractions]
