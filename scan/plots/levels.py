"""Credible regions of 2-D posteriors: the contour levels every zetascan figure uses.

The levels are *mass fractions*: the 68 % region is the smallest set of histogram bins
holding 68 % of the samples (highest density first).  corner's own default is
different — the 2-D Gaussian "sigma" levels 1 − exp(−n²/2) for n = 0.5 … 2 (39 % for
1σ) — so figures pass :data:`CREDIBLE_MASS` to corner explicitly and say which levels
they show with :data:`LEVELS_TEXT`.
"""
from __future__ import annotations

import dataclasses

import numpy as np

#: 2-D credible regions drawn: fractions of the posterior mass.
CREDIBLE_MASS: tuple[float, float] = (0.68, 0.95)
#: Caption text naming them.
LEVELS_TEXT: str = "contours: 68 % and 95 % of the 2-D posterior mass"


@dataclasses.dataclass(frozen=True)
class Histogram2D:
    """A normalised 2-D histogram and the densities bounding its credible regions.

    Attributes
    ----------
    x, y : ndarray
        Bin centres (in the histogram's coordinates, e.g. log10 of a log-scaled axis).
    density : ndarray, shape (len(y), len(x))
        Fraction of the samples per bin (sums to 1), after optional smoothing.
    thresholds : ndarray
        Density thresholds of ``fractions``, in the same order.
    fractions : tuple of float
    """

    x: np.ndarray
    y: np.ndarray
    density: np.ndarray
    thresholds: np.ndarray
    fractions: tuple[float, ...]


def mass_thresholds(density: np.ndarray, fractions=CREDIBLE_MASS) -> np.ndarray:
    """Density thresholds t_m with ``sum(density[density >= t_m]) >= m`` minimal.

    Parameters
    ----------
    density : ndarray
        Non-negative values (any shape), not all zero.
    fractions : sequence of float
        Mass fractions in (0, 1).

    Returns
    -------
    ndarray
        One threshold per fraction (larger fraction, lower threshold).
    """
    flat = np.sort(np.ravel(density))[::-1]
    mass = np.cumsum(flat) / flat.sum()
    index = np.minimum(np.searchsorted(mass, np.asarray(fractions, float)), flat.size - 1)
    return flat[index]


def default_bins(n: int) -> int:
    """Bins per axis for ``n`` samples: sqrt(n) / 1.5, kept within [10, 40].

    A rule of thumb (common practice: bins growing like sqrt(n)); a few hundred samples
    get 10-13 bins, so the 95 % contour is not broken up by empty bins.
    """
    return int(np.clip(np.sqrt(max(n, 1)) / 1.5, 10, 40))


def histogram2d(x: np.ndarray, y: np.ndarray, bins: int | None = None,
                ranges: tuple[tuple[float, float], tuple[float, float]] | None = None,
                smooth: float = 1.0, fractions=CREDIBLE_MASS) -> Histogram2D:
    """Histogram samples ``(x, y)``, smooth by ``smooth`` bins (Gaussian), find the levels.

    ``bins`` defaults to :func:`default_bins`.  Smoothing (``scipy.ndimage.gaussian_filter``,
    0 for none) steadies the contours of a few hundred samples; the thresholds are mass
    fractions of the smoothed histogram.
    """
    from scipy.ndimage import gaussian_filter

    bins = default_bins(len(x)) if bins is None else bins
    counts, x_edges, y_edges = np.histogram2d(x, y, bins=bins, range=ranges)
    density = counts.T / max(counts.sum(), 1.0)
    if smooth > 0:
        density = gaussian_filter(density, smooth, mode="constant")
        density /= density.sum()
    return Histogram2D(0.5 * (x_edges[1:] + x_edges[:-1]), 0.5 * (y_edges[1:] + y_edges[:-1]),
                       density, mass_thresholds(density, fractions), tuple(fractions))
