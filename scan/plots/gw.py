"""Figure: Ω_GW h² against frequency, with bound curves, posterior bands and a mass axis.

The top axis gives the horizon mass M_H [M_sun] when the mode k = 2π f / c re-enters
the horizon (:func:`scan.observables.cosmo.horizon_mass_of_f`): the mass scale of the PBHs the same
curvature peak forms (M_PBH = γ M_H, or K M_H (C − C_th)^γc for critical collapse).
"""
from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from scan.curves import Curve
from scan.observables import cosmo
from scan.plots.bands import OVERLAID, draw_band
from scan.plots.curves import draw_curve, synthetic_note
from scan.plots.looks import MODEL_COLOUR, POSTERIOR_COLOUR
from scan.plots.ranges import log_span, note_if_below, union_limits
from scan.plots.style import figure, legend_below, save
from scan.plots.visible import shown_entries
from scan.sampler.bands import Bands

#: Decades below a signal's peak that the axis ranges keep.
SIGNAL_DECADES: float = 7.0
#: Frequencies of the pulsar-timing panel [Hz] (PTA band ~1-100 nHz, common practice).
PTA_BAND_HZ: tuple[float, float] = (10**-9.5, 10**-6.5)
#: The panel is added (``pta_panel=None``) when the main axis spans more decades than this.
PTA_PANEL_MIN_DECADES: float = 6.0
#: Fraction of a free-spectrum bin's peak density below which its violin is too thin to
#: see (width 0.08 dex x fraction); the PTA panel's range ignores those tails.
VISIBLE_DENSITY: float = 0.05
_TINY = 1e-300


def omega_gw_figure(f_Hz=None, omega_h2=None, label: str | None = None, *,
                    curves: Sequence[Curve] = (), bands: Bands | None = None,
                    band_label: str = "posterior", n_eff: float = cosmo.N_EFF_DEFAULT,
                    pta_panel: bool | None = None):
    """Build the figure (log-log); returns the matplotlib Figure.

    Parameters
    ----------
    f_Hz : array_like [Hz], optional
        Frequencies of one solved spectrum.
    omega_h2 : array_like [1], optional
        Its Ω_GW,0 h².
    label : str, optional
        Legend text of that line.
    curves : sequence of Curve
        Bound and sensitivity curves; only the Ω_GW h² curves are drawn, each in its
        fixed look (:mod:`scan.plots.looks`).
    bands : Bands, optional
        Posterior bands of Ω_GW h² (:mod:`scan.sampler.bands`).
    band_label : str
        Legend prefix of the bands.
    n_eff : float
        N_eff of the re-entry relation of the mass axis (Standard-Model g_*).
    pta_panel : bool, optional
        A second panel zoomed on the pulsar-timing band :data:`PTA_BAND_HZ`; None adds it
        when something is drawn there and the main axis spans more than
        :data:`PTA_PANEL_MIN_DECADES` decades.
    """
    gw_curves = [c for c in curves if c.y_quantity == "omega_gw_h2"]
    model = None if f_Hz is None else (np.asarray(f_Hz, float), np.asarray(omega_h2, float))
    spans = _spans(gw_curves, bands, model)
    limits = union_limits(spans)
    if pta_panel is None:
        pta_panel = limits is not None and _pta_content(gw_curves, bands, model) and \
            np.log10(limits[0][1] / limits[0][0]) > PTA_PANEL_MIN_DECADES
    fig, axes = figure(aspect=1.25 if pta_panel else 0.8, nrows=2 if pta_panel else 1,
                       squeeze=False, gridspec_kw={"height_ratios": (1.7, 1)} if pta_panel
                       else None)
    ax = axes[0, 0]
    entries = _draw(ax, gw_curves, bands, model, label, band_label)
    _finish(ax, limits, n_eff)
    if pta_panel:
        zoom = axes[1, 0]
        _draw(zoom, gw_curves, bands, model, label, band_label)
        _finish_pta(zoom, gw_curves, bands, model)
    model_text = label or "this model"
    if model is not None:
        note_if_below(ax, model[1], model_text, MODEL_COLOUR)
    if bands is not None:
        note_if_below(ax, bands.median, f"{band_label} median", POSTERIOR_COLOUR, row=1,
                      floor=bands.floor)
    entries = shown_entries(entries, list(axes[:, 0]))
    handles, texts = zip(*entries) if entries else ((), ())
    legend_below(fig, list(handles), ncols=1, labels=list(texts),
                 title=synthetic_note(gw_curves), handler_map={tuple: OVERLAID})
    return fig


def _spans(gw_curves, bands, model) -> list:
    spans = [log_span(c.x, c.y) for c in gw_curves]
    if bands is not None:
        hi = bands.percentile(97.5)
        spans.append(log_span(bands.x, np.where(hi > bands.floor, hi, 0.0), SIGNAL_DECADES))
    if model is not None:
        spans.append(log_span(*model, SIGNAL_DECADES))
    return spans


def _draw(ax, gw_curves, bands, model, label, band_label) -> list:
    """Curves, bands and the model line on ``ax``; legend entries (handle, text)."""
    for curve in gw_curves:
        draw_curve(ax, curve)
    entries = list(zip(*ax.get_legend_handles_labels()))
    if bands is not None:
        entries = draw_band(ax, bands, POSTERIOR_COLOUR, band_label) + entries
    if model is not None:
        f, om = model
        (line,) = ax.loglog(f[om > 0], om[om > 0], color=MODEL_COLOUR)
        entries.insert(0, (line, label or "this model"))
    return entries


def _in_pta_band(x, y) -> np.ndarray:
    x, y = np.asarray(x, float), np.asarray(y, float)
    return (x >= PTA_BAND_HZ[0]) & (x <= PTA_BAND_HZ[1]) & (y > 0) & np.isfinite(y)


def _pta_content(gw_curves, bands, model) -> bool:
    """True if a curve, the bands' upper edge or the model has points in the PTA band."""
    pairs = [(c.x, c.y) for c in gw_curves]
    if bands is not None:
        pairs.append((bands.x, np.where(bands.percentile(97.5) > bands.floor,
                                        bands.percentile(97.5), 0.0)))
    if model is not None:
        pairs.append(model)
    return any(_in_pta_band(x, y).any() for x, y in pairs)


def _finish_pta(ax, gw_curves, bands, model) -> None:
    """The PTA panel's ranges (what is drawn in the band) and labels."""
    spans = []
    for x, y in [(c.x, c.y) for c in gw_curves if c.kind != "posterior_grid"] + \
            ([model] if model is not None else []):
        keep = _in_pta_band(x, y)
        spans.append(log_span(np.asarray(x)[keep], np.asarray(y)[keep], SIGNAL_DECADES))
    for c in gw_curves:
        if c.kind == "posterior_grid":  # where the drawn density is visible (≥ 5 % of
            keep = _in_pta_band(c.x, c.y)  # its bin's maximum), not only its mode
            seen = [g[d >= VISIBLE_DENSITY * d.max()]
                    for g, d, k in zip(c.grid_log10_y, c.grid_density, keep) if k]
            lo = [10.0 ** g.min() for g in seen if g.size]
            hi = [10.0 ** g.max() for g in seen if g.size]
            if lo:
                spans.append((float(c.x[keep].min()), float(c.x[keep].max()), min(lo),
                              max(hi)))
    if bands is not None:
        hi = bands.percentile(97.5)
        keep = _in_pta_band(bands.x, np.where(hi > bands.floor, hi, 0.0))
        spans.append(log_span(bands.x[keep], hi[keep], 4.0))
    limits = union_limits(spans, x_pad=1.0, y_pad=(3.0, 3.0), max_decades=6.0)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(*PTA_BAND_HZ)
    if limits is not None:
        ax.set_ylim(*limits[1])
    ax.set_xlabel(r"frequency $f$ [Hz] (pulsar-timing band)")
    ax.set_ylabel(r"$\Omega_{\rm GW}h^2$")


def _finish(ax, limits, n_eff: float) -> None:
    """Log axes, ranges, labels and the horizon-mass axis on top."""
    ax.set_xscale("log")
    ax.set_yscale("log")
    if limits is not None:
        ax.set_xlim(*limits[0])
        ax.set_ylim(*limits[1])
    ax.set_xlabel(r"frequency $f$ [Hz]")
    ax.set_ylabel(r"$\Omega_{\rm GW}h^2$")

    def to_mass(f):
        return cosmo.horizon_mass_of_f(np.maximum(f, _TINY), n_eff=n_eff)

    def to_f(m):
        return cosmo.f_of_horizon_mass(np.maximum(m, _TINY), n_eff=n_eff)

    top = ax.secondary_xaxis("top", functions=(to_mass, to_f))
    top.set_xlabel(r"horizon mass $M_H$ at re-entry of $k = 2\pi f/c$ [$M_\odot$]")


def save_omega_gw(f_Hz, omega_h2, path_stem: str | Path) -> list[Path]:
    """Build and save the figure as PDF and PNG; return the paths."""
    return save(omega_gw_figure(f_Hz, omega_h2), path_stem)
