"""Posterior bands on an axis: 95 % and 68 % intervals shaded, the median as a line."""
from __future__ import annotations

import numpy as np
from matplotlib.legend_handler import HandlerTuple

from scan.sampler.bands import Bands

#: Legend handler drawing a band's patches and median as one overlaid key.
OVERLAID = HandlerTuple(ndivide=1)


def draw_band(ax, bands: Bands, color: str, label: str | None = "posterior") -> list:
    """Shade the central 95 % and 68 % intervals of ``bands`` and draw its median.

    Where not every sample was computed (``bands.coverage < 1``) the percentiles are lower
    bounds and the median is dotted there.  Values at the bands' floor run off the bottom
    of the axis.

    Returns
    -------
    list of (handle, text)
        Legend entries (none when ``label`` is None): one overlaid key
        ``"<label>: median, 68 %, 95 %"`` and, if a dotted part is drawn,
        ``"<label> median, dotted: lower bound"``.
    """
    x = bands.x
    wide = ax.fill_between(x, bands.percentile(2.5), bands.percentile(97.5), color=color,
                           alpha=0.18, lw=0)
    core = ax.fill_between(x, bands.percentile(16.0), bands.percentile(84.0), color=color,
                           alpha=0.40, lw=0)
    full = bands.coverage >= 1.0
    partial = ~full | np.convolve(~full, [1, 1, 1], mode="same").astype(bool)  # joined
    median = dotted = None
    if full.any():
        (median,) = ax.plot(x, np.where(full, bands.median, np.nan), color=color, lw=1.0)
    if not full.all():
        (dotted,) = ax.plot(x, np.where(partial, bands.median, np.nan), color=color, lw=1.0,
                            ls=":")
    if label is None:
        return []
    what = "median" if median is not None else "median (dotted: lower bound)"
    entries = [((wide, core, median or dotted), f"{label}: {what}, 68 %, 95 %")]
    if dotted is not None and median is not None:
        entries.append((dotted, f"{label} median, dotted: lower bound"))
    return entries
