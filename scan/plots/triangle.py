"""Figure: the posterior triangle (corner), with its contour levels stated on the figure."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from scan.plots.levels import CREDIBLE_MASS, LEVELS_TEXT, default_bins
from scan.plots.looks import POSTERIOR_COLOUR
from scan.plots.style import COLUMN_WIDTH_IN, PAGE_WIDTH_IN, style_context

#: Parameters up to which the triangle fits one journal column.
COLUMN_DIM: int = 3


def triangle_figure(samples: np.ndarray, labels: Sequence[str], *,
                    levels: tuple[float, ...] = CREDIBLE_MASS, bins: int | None = None,
                    smooth: float = 1.0, note: str = ""):
    """Corner plot of ``samples`` (n, dim) with 2-D contours at mass fractions ``levels``.

    Parameters
    ----------
    samples : ndarray, shape (n, dim)
        Posterior samples (e.g. log10 of log-uniform parameters already taken).
    labels : sequence of str
        Axis labels (mathtext), with units.
    levels : tuple of float
        Fractions of the 2-D posterior mass enclosed by the contours (passed to corner as
        ``levels``; corner's default would be sigma levels).
    bins, smooth : int, float
        Histogram bins (default :func:`scan.plots.levels.default_bins`) and Gaussian
        smoothing [bins] of corner's histograms.
    note : str
        Extra caption text (e.g. the number of samples, burn-in and thinning).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import corner
    import matplotlib.pyplot as plt

    samples, labels = scaled_columns(np.asarray(samples, float), labels)
    dim = samples.shape[1]
    bins = default_bins(len(samples)) if bins is None else bins
    width = COLUMN_WIDTH_IN if dim <= COLUMN_DIM else PAGE_WIDTH_IN
    with style_context():
        fig, _ = plt.subplots(dim, dim, figsize=(width, width))
        corner.corner(samples, fig=fig, labels=list(labels), levels=tuple(levels), bins=bins,
                      smooth=smooth, color=POSTERIOR_COLOUR, plot_datapoints=False,
                      fill_contours=True, quantiles=(0.16, 0.5, 0.84), show_titles=True,
                      title_fmt=".3g", title_kwargs={"fontsize": 6.5},
                      label_kwargs={"fontsize": 7.5}, max_n_ticks=3, labelpad=-0.04)
        for ax in fig.axes:
            ax.tick_params(labelsize=6.0)
        lines = [LEVELS_TEXT, "1-D: 16, 50, 84 % quantiles"] + ([note] if note else [])
        fig.text(0.97, 0.97, "\n".join(lines), ha="right", va="top", fontsize=6.5,
                 linespacing=1.4)
    return fig


#: Columns whose typical magnitude lies outside [10^-LARGEST_EXPONENT, 10^LARGEST_EXPONENT)
#: are shown in units of a power of ten (stated in the label) instead of an offset text.
LARGEST_EXPONENT: int = 3


def decade_exponent(values: np.ndarray) -> int:
    """Power of ten to divide ``values`` by (0 when their 84th-percentile magnitude is
    within [10^-3, 10^3)): ticks and titles then need no "1e-16" offset text, which
    collides with the neighbouring panel."""
    finite = np.abs(values[np.isfinite(values)])
    if not finite.size or not np.any(finite > 0):
        return 0
    exponent = int(np.floor(np.log10(np.percentile(finite[finite > 0], 84.0))))
    return exponent if abs(exponent) >= LARGEST_EXPONENT else 0


def scaled_columns(samples: np.ndarray, labels: Sequence[str]) -> tuple[np.ndarray, list[str]]:
    """Samples with tiny or huge columns divided by 10^p, ``[10^p ...]`` in their labels."""
    samples = samples.copy()
    out = list(labels)
    for i, label in enumerate(labels):
        p = decade_exponent(samples[:, i])
        if p:
            samples[:, i] /= 10.0**p
            power = rf"$10^{{{p}}}$"
            if label.endswith("]") and "[" in label:
                cut = label.rindex("[")
                out[i] = f"{label[:cut]}[{power} {label[cut + 1:-1]}]"
            else:
                out[i] = f"{label} [{power}]"
    return samples, out
