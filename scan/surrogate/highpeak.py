"""The high-peak shape block: a shape regressor fitted only on the models with the highest peaks.

Why
---
The models where f_PBH and the loudest GW signals are decided (log10 P_peak >~ -1.5, next
to the stochastic limit) are a thin sliver of a scan box, and their spectra have shapes
the bulk does not: for p > 1 the largest peaks are plateaus (P within 2x of its maximum over
>= 1 in ln k).  One stationary kernel over the whole box chooses its length scales for the
bulk; fitted on the sliver's neighbourhood alone, the shape is far more accurate there
(measured on ``configs/wide_scan_high.toml``, 57 high-peak hold-out models: 95th
percentile of the shape error near the peak 0.115 dex with the global block, 0.050 with
this block, and of |d log10 f_PBH| over the 35 models with f_PBH > 1e-10 0.42 -> 0.33 dex;
docs/wide_scan_surrogate_report.txt).

A high-peak regressor of (ln k_peak, log10 P_peak) was measured as well and is *not* used:
its leave-one-out error beat the global block's on one box, yet on held-out models it made
ln k_peak and f_PBH worse (95th percentiles 0.073 -> 0.089 and 0.81 -> 1.38 dex), and on the
other box its leave-one-out error did not beat the global block's.

What
----
A kernel regressor (:mod:`scan.surrogate.gp`, both kernels tried) of the shape
coefficients on the valid training points with log10 P_peak >= :data:`FLOOR`, kept only if
its leave-one-out error on the training points where it takes over is lower than the
global shape block's there (a box without a high-peak sliver simply has none).  The
prediction blends global and high-peak coefficients with a weight that rises linearly
from 0 to 1 as the *global* prediction of log10 P_peak goes from ``FLOOR + BLEND[0]`` to
``FLOOR + BLEND[1]``: continuous in the parameters, and used only where the block has
training points at least ``BLEND[0]`` dex below.  All functions here are pure.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.surrogate.gp import KERNELS, GPFit, fit_best, predict_gp

#: log10 P_peak above which a valid training point enters the high-peak block [dex].
FLOOR = -2.5
#: The block's weight rises from 0 to 1 between FLOOR + BLEND[0] and FLOOR + BLEND[1] of
#: the global block's predicted log10 P_peak [dex].
BLEND = (0.5, 1.0)
#: Fewest training points with log10 P_peak >= FLOOR needed to fit the block.
MIN_POINTS = 20


@dataclass(frozen=True)
class HighPeak:
    """The high-peak shape regressor.

    Attributes
    ----------
    shape : GPFit
        Shape coefficients (on the global basis) over the unit cube.
    floor : float
        :data:`FLOOR` when fitted [dex].
    """

    shape: GPFit
    floor: float = FLOOR


def weight(log10_p_global: np.ndarray, floor: float) -> np.ndarray:
    """Blend weight of the high-peak block (0 .. 1) from the global log10 P_peak [dex]."""
    lo, hi = floor + BLEND[0], floor + BLEND[1]
    return np.clip((np.asarray(log10_p_global, float) - lo) / (hi - lo), 0.0, 1.0)


def _loo_error(loo: np.ndarray, scale: np.ndarray) -> float:
    """Mean squared leave-one-out residual in units of ``scale`` (per column)."""
    return float(np.mean((loo / scale) ** 2))


def fit_high_peak(u: np.ndarray, log10_p: np.ndarray, shape_coefs: np.ndarray,
                  global_shape: GPFit, options: dict) -> HighPeak | None:
    """Fit the high-peak shape block on the valid training points (module docstring).

    Parameters
    ----------
    u : ndarray, shape (n, d)
        Unit-cube points of the valid training models (the rows of the global fit).
    log10_p : ndarray, shape (n,)
        Their log10 P_peak [dex].
    shape_coefs : ndarray, shape (n, q)
        Their shape coefficients on the global basis.
    global_shape : GPFit
        The global shape block fitted on the same rows (its LOO residuals are compared).
    options : dict
        :func:`scan.surrogate.gp.fit_best` options (its ``kernels`` are replaced by all
        :data:`scan.surrogate.gp.KERNELS`: the block is small).

    Returns
    -------
    HighPeak or None
        None with fewer than :data:`MIN_POINTS` high-peak points, none where it would take
        over, or when it does not beat the global block there.
    """
    high = np.asarray(log10_p) >= FLOOR
    take_over = np.asarray(log10_p)[high] >= FLOOR + BLEND[1]
    if high.sum() < MIN_POINTS or not take_over.any():
        return None
    shape = fit_best(u[high], shape_coefs[high], **{**options, "kernels": KERNELS})
    local = _loo_error(shape.loo[take_over], global_shape.scale)
    if local >= _loo_error(global_shape.loo[high][take_over], global_shape.scale):
        return None
    return HighPeak(shape)


def blend(block: HighPeak | None, u: np.ndarray, log10_p_global: np.ndarray,
          shape_coefs: np.ndarray) -> np.ndarray:
    """Global shape coefficients (p, q) blended with the block's where the peak is high.

    Only rows with a positive weight evaluate the high-peak regressor.
    """
    if block is None:
        return shape_coefs
    w = weight(log10_p_global, block.floor)
    rows = np.flatnonzero(w > 0.0)
    if rows.size == 0:
        return shape_coefs
    out = shape_coefs.copy()
    wr = w[rows, None]
    out[rows] = (1.0 - wr) * out[rows] + wr * predict_gp(block.shape, u[rows])
    return out
