"""Figure: f_PBH per ln M against M in M_sun (grams on top), bound curves, posterior bands."""
from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from scan import constants as C
from scan.curves import Curve
from scan.plots.bands import OVERLAID, draw_band
from scan.plots.curves import draw_curve, synthetic_note
from scan.plots.looks import MODEL_COLOUR, POSTERIOR_COLOUR
from scan.plots.ranges import latex_number, log_span, note_if_below, union_limits
from scan.plots.style import figure, legend_below, save
from scan.plots.visible import shown_entries
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
    for curve in pbh_curves:
        draw_curve(ax, curve, mass_unit="M_sun")
        spans.append(log_span(curve.x, curve.y))
    entries = list(zip(*ax.get_legend_handles_labels()))
    if bands is not None:
        entries = draw_band(ax, bands, POSTERIOR_COLOUR, band_label) + entries
        hi = bands.percentile(97.5)
        spans.append(log_span(bands.x, np.where(hi > bands.floor, hi, 0.0), SIGNAL_DECADES))
    if M_msun is not None:
        line, span = _model_line(ax, np.asarray(M_msun, float), np.asarray(f_pbh, float))
        entries.insert(0, (line, _model_text(total)))
        spans.append(span)
    limits = union_limits(spans, max_decades=SIGNAL_DECADES + 2)
    if limits is not None:
        ax.set_xlim(*limits[0])
        ax.set_ylim(*limits[1])
    _labels(ax)
    if M_msun is not None:
        note_if_below(ax, np.asarray(f_pbh, float), "this model", MODEL_COLOUR)
    if bands is not None:
        note_if_below(ax, bands.median, f"{band_label} median", POSTERIOR_COLOUR, row=1,
                      floor=bands.floor)
    entries = shown_entries(entries, [ax])
    handles, texts = zip(*entries) if entries else ((), ())
    legend_below(fig, list(handles), labels=list(texts), title=synthetic_note(pbh_curves),
                 handler_map={tuple: OVERLAID})
    return fig


def _model_text(total: float | None) -> str:
    return "this model" if total is None else \
        rf"this model, $f_{{\rm PBH}} = {latex_number(total)}$"


def _model_line(ax, m: np.ndarray, f: np.ndarray):
    """Draw one model's mass function; return the line and its span for the ranges."""
    positive = f > 0
    (line,) = ax.loglog(m[positive], f[positive], color=MODEL_COLOUR)
    return line, log_span(m, f, SIGNAL_DECADES)


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
