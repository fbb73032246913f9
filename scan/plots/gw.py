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
from scan.plots.bands import draw_band
from scan.plots.curves import draw_curve
from scan.plots.ranges import log_span, note_if_below, union_limits
from scan.plots.style import PALETTE, figure, legend_below, save
from scan.sampler.bands import Bands

#: Decades below a signal's peak that the axis ranges keep.
SIGNAL_DECADES: float = 7.0
_TINY = 1e-300


def omega_gw_figure(f_Hz=None, omega_h2=None, label: str | None = None, *,
                    curves: Sequence[Curve] = (), bands: Bands | None = None,
                    band_label: str = "posterior", n_eff: float = cosmo.N_EFF_DEFAULT):
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
        Bound and sensitivity curves; only the Ω_GW h² curves are drawn.
    bands : Bands, optional
        Posterior bands of Ω_GW h² (:mod:`scan.sampler.bands`).
    band_label : str
        Legend prefix of the bands.
    n_eff : float
        N_eff of the re-entry relation of the mass axis (Standard-Model g_*).
    """
    fig, ax = figure(aspect=0.8)
    spans = []
    gw_curves = [c for c in curves if c.y_quantity == "omega_gw_h2"]
    for i, curve in enumerate(gw_curves):
        draw_curve(ax, curve, PALETTE[(i + 2) % len(PALETTE)])
        spans.append(log_span(curve.x, curve.y))
    band_color = PALETTE[1] if f_Hz is not None else PALETTE[0]
    if bands is not None:
        draw_band(ax, bands, band_color, band_label)
        spans.append(log_span(bands.x, np.where(bands.percentile(97.5) > bands.floor,
                                                bands.percentile(97.5), 0.0), SIGNAL_DECADES))
    if f_Hz is not None:
        f, om = np.asarray(f_Hz, float), np.asarray(omega_h2, float)
        positive = om > 0
        ax.loglog(f[positive], om[positive], color=PALETTE[0], label=label or "this model")
        spans.append(log_span(f, om, SIGNAL_DECADES))
    _finish(ax, union_limits(spans), n_eff)
    if f_Hz is not None:
        note_if_below(ax, omega_h2, label or "this model", PALETTE[0])
    if bands is not None:
        note_if_below(ax, bands.median, f"{band_label} median", band_color, row=1,
                      floor=bands.floor)
    legend_below(fig)
    return fig


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
