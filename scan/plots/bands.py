"""Posterior bands on an axis: 95 % and 68 % intervals shaded, the median as a line."""
from __future__ import annotations

import numpy as np

from scan.sampler.bands import Bands


def draw_band(ax, bands: Bands, color: str, label: str = "posterior") -> None:
    """Shade the central 95 % and 68 % intervals of ``bands`` and draw its median.

    Legend entries: ``"<label> 95 %"``, ``"<label> 68 %"``, ``"<label> median"``.  Where
    not every sample was computed (``bands.coverage < 1``) the percentiles are lower
    bounds: the median is dotted there (legend entry ``"<label> median, dotted: lower
    bound"``).  Values at the bands' floor run off the bottom of the axis.
    """
    x = bands.x
    ax.fill_between(x, bands.percentile(2.5), bands.percentile(97.5), color=color,
                    alpha=0.18, lw=0, label=f"{label} 95 %")
    ax.fill_between(x, bands.percentile(16.0), bands.percentile(84.0), color=color,
                    alpha=0.40, lw=0, label=f"{label} 68 %")
    full = bands.coverage >= 1.0
    partial = ~full | np.convolve(~full, [1, 1, 1], mode="same").astype(bool)  # joined
    if full.any():
        ax.plot(x, np.where(full, bands.median, np.nan), color=color, lw=1.0,
                label=f"{label} median")
    if not full.all():
        ax.plot(x, np.where(partial, bands.median, np.nan), color=color, lw=1.0, ls=":",
                label=f"{label} median, dotted: lower bound")
