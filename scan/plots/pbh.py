"""Figure: f_PBH per ln M against M in M_sun (grams on top), bound curves, posterior bands."""
from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from scan import constants as C
from scan.curves import Curve
from scan.plots.bands import draw_band
from scan.plots.curves import draw_curve
from scan.plots.ranges import latex_number, log_span, note_if_below, union_limits
from scan.plots.style import PALETTE, figure, legend_below, save
from scan.sampler.bands import Bands

#: Decades below the mass function's peak that the axis ranges keep.
SIGNAL_DECADES: float = 12.0


def f_pbh_figure(M_msun=None, f_pbh=None, total: float | None = None, *,
                 curves: Sequence[Curve] = (), bands: Bands | None = None,
                 band_label: str = "posterior"):
    """Build the figure (log-log); returns the matplotlib Figure.

    Parameters
    ----------
    M_msun : array_like [M_sun], optional
        Masses of one solved model.
    f_pbh : array_like [1], optional
        Its fraction of dark matter per ln M.
    total : float [1], optional
        f_PBH integrated over ln M, shown in the legend.
    curves : sequence of Curve
        Bound curves; only the f_PBH curves are drawn (bounds on a monochromatic
        population, shaded above).
    bands : Bands, optional
        Posterior bands of d f_PBH / d ln M.
    band_label : str
        Legend prefix of the bands.
    """
    fig, ax = figure(aspect=0.8)
    spans = []
    pbh_curves = [c for c in curves if c.y_quantity == "f_pbh"]
    for i, curve in enumerate(pbh_curves):
        draw_curve(ax, curve, PALETTE[(i + 2) % len(PALETTE)], mass_unit="M_sun")
        spans.append(log_span(curve.x, curve.y))
    band_color = PALETTE[1] if M_msun is not None else PALETTE[0]
    if bands is not None:
        draw_band(ax, bands, band_color, band_label)
        hi = bands.percentile(97.5)
        spans.append(log_span(bands.x, np.where(hi > bands.floor, hi, 0.0), SIGNAL_DECADES))
    if M_msun is not None:
        spans.append(_model_line(ax, np.asarray(M_msun, float), np.asarray(f_pbh, float),
                                 total))
    limits = union_limits(spans, max_decades=SIGNAL_DECADES + 2)
    if limits is not None:
        ax.set_xlim(*limits[0])
        ax.set_ylim(*limits[1])
    _labels(ax)
    if M_msun is not None:
        note_if_below(ax, np.asarray(f_pbh, float), "this model", PALETTE[0])
    if bands is not None:
        note_if_below(ax, bands.median, f"{band_label} median", band_color, row=1,
                      floor=bands.floor)
    legend_below(fig)
    return fig


def _model_line(ax, m: np.ndarray, f: np.ndarray, total: float | None):
    """Draw one model's mass function; return its span for the axis ranges."""
    positive = f > 0
    label = "this model" if total is None else \
        rf"this model, $f_{{\rm PBH}} = {latex_number(total)}$"
    ax.loglog(m[positive], f[positive], color=PALETTE[0], label=label)
    return log_span(m, f, SIGNAL_DECADES)


def _labels(ax) -> None:
    """Log axes, labels, grams on top."""
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(r"PBH mass $M$ [$M_\odot$]")
    ax.set_ylabel(r"$\mathrm{d}f_{\rm PBH}/\mathrm{d}\ln M$; bounds on $f_{\rm PBH}$")
    top = ax.secondary_xaxis("top", functions=(lambda x: x * C.M_SUN_G,
                                               lambda g: g / C.M_SUN_G))
    top.set_xlabel(r"$M$ [g]")


def save_f_pbh(M_msun, f_pbh, path_stem: str | Path, total: float | None = None) -> list[Path]:
    """Build and save the figure as PDF and PNG; return the paths."""
    return save(f_pbh_figure(M_msun, f_pbh, total), path_stem)
