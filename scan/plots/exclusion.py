"""Figure: the exclusion map of a 2-D grid — one outlined region per constraint.

Drawn, bottom to top: invalid models (grey) and points not computed (dotted hatch); every
excluding constraint's region (status 1) as its boundary in the constraint's fixed colour
(:mod:`scan.plots.looks`), ticks on the excluded side — outlines do not mix into new
colours where regions overlap; every sensitivity's detectable region (status 2) faintly
tinted inside a solid boundary; decades of P_peak as thin dotted contours; and, when a
chain is given, the posterior's 68 % and 95 % regions (mass fractions of its smoothed 2-D
histogram, :mod:`scan.plots.levels`).  The legend lists only what is drawn: constraints
that exclude no grid point and sensitivities that detect none are named in its title.
"""
from __future__ import annotations

import re

import numpy as np
from matplotlib import patheffects
from matplotlib.colors import to_rgb
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from scan.plots.grid_data import DETECTABLE, EXCLUDED, EXCLUDING_KINDS, GridData
from scan.plots.levels import Histogram2D
from scan.plots.looks import GUIDE_GREY, POSTERIOR_COLOUR, look_of, readable
from scan.plots.style import COLUMN_WIDTH_IN, figure, legend_below, wrap_text

INVALID_GREY = "#bdbdbd"
#: Legend labels up to this length fit two legend columns under a column-wide map.
SHORT_LABEL: int = 34
UNIT_TEXT = {"M_p": r"$M_p$", "Mpc^-1": r"Mpc$^{-1}$"}
_DISFAVOURING = ("prior", "detection")


def ticked(angle: float = 45.0):
    """Path effect: a line with short ticks on its right-hand side (matplotlib contours
    of a 0/1 mask at 0.5 keep the 1 side there)."""
    return [patheffects.withTickedStroke(angle=angle, spacing=6, length=0.5)]


def exclusion_figure(grid: GridData, posterior: Histogram2D | None = None, *,
                     p_peak_contours: bool = True, width: float = COLUMN_WIDTH_IN):
    """Build the exclusion map of ``grid``; returns the matplotlib Figure.

    Parameters
    ----------
    grid : GridData
        The scan (:func:`scan.plots.grid_data.read_grid`).
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
    for term in excluding:
        handles.append(_region(ax, X, Y, term.status == EXCLUDED, look_of(term.name).colour,
                               _verdict(term)))
    sensitivities = [t for t in grid.terms if t.kind == "sensitivity"]
    for term in sensitivities:
        if (term.status == DETECTABLE).any():
            snr = "" if term.snr_threshold is None else f" (SNR ≥ {term.snr_threshold:g})"
            handles.append(_detectable(ax, X, Y, term.status == DETECTABLE,
                                       look_of(term.name).colour,
                                       f"{_name(term)}: detectable{snr}"))
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
    legend_below(fig, handles, ncols=2 if short else 1, wrap=60,
                 title=_nowhere_text(grid, excluding, sensitivities))
    return fig


def _name(term) -> str:
    return readable(term.name, term.label)


def _nowhere_text(grid: GridData, excluding, sensitivities) -> str | None:
    """Legend title naming constraints without excluded and sensitivities without
    detectable points (they have nothing drawn, so no legend entry)."""
    lines = ["ticks on an outline point into the region it rules out"] if excluding else []
    quiet = [_name(t) for t in grid.terms if t.kind in EXCLUDING_KINDS and t not in excluding]
    if quiet:
        lines.append("excluding no grid point: " + ", ".join(quiet))
    blind = [_name(t) for t in sensitivities if not (t.status == DETECTABLE).any()]
    if blind:
        lines.append("detecting no grid point: " + ", ".join(blind))
    if not lines:
        return None
    return "\n".join(wrap_text(line, 62) for line in lines)


def axis_label(label: str, units: str) -> str:
    """``label [units]`` unless the label already ends in units or the axis has none."""
    has_units = label.rstrip().endswith("]") and not re.search(r"\[\d+\]$", label.rstrip())
    if has_units or units in ("", "1"):
        return label
    return f"{label} [{UNIT_TEXT.get(units, units)}]"


def _verdict(term) -> str:
    return f"{_name(term)}: {'disfavoured' if term.kind in _DISFAVOURING else 'excluded'}"


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
        cs.set_edgecolor(GUIDE_GREY)
        handles.append(Patch(facecolor="none", edgecolor=GUIDE_GREY, hatch="....",
                             label=f"not computed ({int((~grid.done).sum())} of "
                                   f"{grid.done.size} points)"))
    return handles


def _region(ax, X, Y, mask: np.ndarray, color: str, label: str):
    """The boundary of ``mask`` with ticks on its inside; its legend handle.

    A region covering the whole grid has no boundary inside it: it is hatched instead.
    """
    if mask.all():
        cs = ax.contourf(X, Y, np.ones(mask.shape), levels=[0.5, 1.5], colors=["none"],
                         hatches=["////"])
        cs.set_edgecolor(color)
        return Patch(facecolor="none", edgecolor=color, hatch="////",
                     label=f"{label} (whole grid)")
    ax.contour(X, Y, mask.astype(float), levels=[0.5], colors=[color], linewidths=1.1
               ).set(path_effects=ticked())
    return Line2D([], [], color=color, lw=1.1, path_effects=ticked(), label=label)


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
    cs = ax.contour(X, Y, log_p, levels=decades, colors=[GUIDE_GREY], linestyles=[":"],
                    linewidths=0.6)
    ax.clabel(cs, fmt=lambda v: rf"$\mathcal{{P}}_{{\rm peak}}=10^{{{v:.0f}}}$",
              fontsize=5.5, inline=True)


def _posterior(ax, post: Histogram2D, grid: GridData) -> list:
    """68 % (solid) and 95 % (dashed) posterior contours in the posterior colour (as the
    bands of the other figures); their legend handles."""
    x = 10.0 ** post.x if grid.x_scale == "log" else post.x
    y = 10.0 ** post.y if grid.y_scale == "log" else post.y
    order = np.argsort(post.thresholds)  # contour levels must increase
    levels = post.thresholds[order]
    styles = {0.68: "-", 0.95: "--"}
    fractions = [post.fractions[i] for i in order]
    if np.unique(levels).size < levels.size:
        return []
    ax.contour(x, y, post.density, levels=levels, colors=[POSTERIOR_COLOUR],
               linestyles=[styles.get(f, "-.") for f in fractions], linewidths=1.0)
    return [Line2D([], [], color=POSTERIOR_COLOUR, lw=1.0, ls=styles.get(f, "-."),
                   label=f"posterior {f:.0%}".replace("%", " %")) for f in post.fractions]
