"""The high-peak block: peak and shape regressors fitted only on the models with the highest peaks.

Why
---
f_PBH is exponentially sensitive to the peak: on the wide pole boxes d log10 f_PBH /
d log10 P_peak was measured at 30-43 for every held-out model with f_PBH > 1e-10
(``docs/wide_scan_surrogate_report.txt``), so the 0.3 dex goal of issue 14 needs log10 P_peak
to ~0.008 dex there.  Those models are a thin sliver of the box (log10 P_peak >~ -1.1,
next to the stochastic limit), where the peak height changes fastest; one stationary
kernel over the whole box chooses its length scales for the bulk and is 2-3x less
accurate in the sliver than a kernel fitted to the sliver's neighbourhood alone
(measured on the p <= 1 wide box: 95th percentile |d log10 P_peak| over the 26 high-peak
hold-out models 0.0144 dex with the global block, 0.0041 with a block fitted on the
159 training models with log10 P_peak >= -2.5).

What
----
Two extra kernel regressors (:mod:`scan.surrogate.gp`, both kernels tried) on the valid
training points with log10 P_peak >= :data:`FLOOR`: one for (ln k_peak, log10 P_peak), one
for the shape coefficients.  Each is kept only if its leave-one-out error on the training
points where it takes over is lower than the global block's there (so a box without a
high-peak sliver simply has none).  The prediction blends global and high-peak values
with a weight that rises linearly from 0 to 1 as the *global* prediction of log10
P_peak goes from ``FLOOR + BLEND[0]`` to ``FLOOR + BLEND[1]``: continuous in the
parameters, and the high-peak block is used only where it has training points at least
:data:`BLEND` [0] dex below.  All functions here are pure.
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
    """The high-peak regressors (either may be None: it did not beat the global block).

    Attributes
    ----------
    peak : GPFit or None
        ln k_peak and log10 P_peak on the unit cube.
    shape : GPFit or None
        Shape coefficients on the global basis.
    floor : float
        :data:`FLOOR` when fitted [dex].
    """

    peak: GPFit | None
    shape: GPFit | None
    floor: float = FLOOR


def weight(log10_p_global: np.ndarray, floor: float) -> np.ndarray:
    """Blend weight of the high-peak block (0 .. 1) from the global log10 P_peak [dex]."""
    lo, hi = floor + BLEND[0], floor + BLEND[1]
    return np.clip((np.asarray(log10_p_global, float) - lo) / (hi - lo), 0.0, 1.0)


def _loo_error(loo: np.ndarray, scale: np.ndarray) -> float:
    """Mean squared leave-one-out residual in units of ``scale`` (per column)."""
    return float(np.mean((loo / scale) ** 2))


def _better(local: GPFit, global_loo: np.ndarray, scale: np.ndarray,
            take_over: np.ndarray) -> bool:
    """True if ``local`` predicts the take-over points better (by LOO) than the global fit."""
    if not take_over.any():
        return False
    return _loo_error(local.loo[take_over], scale) < _loo_error(global_loo[take_over], scale)


def fit_high_peak(u: np.ndarray, peak_targets: np.ndarray, shape_coefs: np.ndarray,
                  global_peak: GPFit, global_shape: GPFit, options: dict) -> HighPeak | None:
    """Fit the high-peak block on the valid training points (see the module docstring).

    Parameters
    ----------
    u : ndarray, shape (n, d)
        Unit-cube points of the valid training models (the rows of the global fits).
    peak_targets : ndarray, shape (n, 2)
        ln k_peak [ln(Mpc^-1)], log10 P_peak [dex].
    shape_coefs : ndarray, shape (n, q)
        Shape coefficients on the global basis.
    global_peak, global_shape : GPFit
        The global blocks fitted on the same rows (their LOO residuals are compared).
    options : dict
        :func:`scan.surrogate.gp.fit_best` options (its ``kernels`` are replaced by all
        :data:`scan.surrogate.gp.KERNELS`: the block is small).

    Returns
    -------
    HighPeak or None
        None with fewer than :data:`MIN_POINTS` high-peak points or when neither
        regressor beats the global one.
    """
    high = peak_targets[:, 1] >= FLOOR
    if high.sum() < MIN_POINTS:
        return None
    opts = {**options, "kernels": KERNELS}
    take_over = peak_targets[high, 1] >= FLOOR + BLEND[1]
    peak = fit_best(u[high], peak_targets[high], **opts)
    shape = fit_best(u[high], shape_coefs[high], **opts)
    peak_ok = _better(peak, global_peak.loo[high], global_peak.scale, take_over)
    shape_ok = _better(shape, global_shape.loo[high], global_shape.scale, take_over)
    if not (peak_ok or shape_ok):
        return None
    return HighPeak(peak if peak_ok else None, shape if shape_ok else None)


def blend(block: HighPeak | None, u: np.ndarray, peak: np.ndarray,
          shape_coefs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Global predictions ``peak`` (p, 2) and ``shape_coefs`` (p, q) blended with the block.

    Only rows with a positive weight evaluate the high-peak regressors.
    """
    if block is None:
        return peak, shape_coefs
    w = weight(peak[:, 1], block.floor)
    rows = np.flatnonzero(w > 0.0)
    if rows.size == 0:
        return peak, shape_coefs
    peak, shape_coefs = peak.copy(), shape_coefs.copy()
    wr = w[rows, None]
    if block.peak is not None:
        peak[rows] = (1.0 - wr) * peak[rows] + wr * predict_gp(block.peak, u[rows])
    if block.shape is not None:
        shape_coefs[rows] = ((1.0 - wr) * shape_coefs[rows]
                             + wr * predict_gp(block.shape, u[rows]))
    return peak, shape_coefs
