"""Importance weights of posterior samples: normalisation, Kish ESS, weighted quantiles.

Samples ``x_i`` drawn from a density q (the surrogate posterior) are reweighted to a
density p (the exact posterior) with ``w_i ∝ p(x_i) / q(x_i)``; a sample where p = 0
(the exact model is invalid or excluded) has weight 0.  The effective sample size is
Kish's ``ESS = (Σ w)² / Σ w²`` (Kish 1965, *Survey Sampling*, Wiley): M for equal
weights, 1 when one sample carries all the weight.

Weighted quantiles interpolate the sorted values at the mid-points of their cumulative
weights, ``c_i = (Σ_{j<i} w_j + w_i / 2) / Σ w``; for equal weights this is the
Hazen quantile (Hyndman & Fan 1996, The American Statistician 50, 361, definition 5),
so weighted and unweighted summaries use one estimator.
"""
from __future__ import annotations

import numpy as np


def normalised_weights(log_w: np.ndarray) -> np.ndarray:
    """Weights ``exp(log_w)`` normalised to sum 1; non-finite or -inf entries get 0.

    Parameters
    ----------
    log_w : ndarray, shape (m,) [1]
        Log importance ratios ln p - ln q (-inf where p = 0; NaN is treated as -inf).

    Returns
    -------
    ndarray, shape (m,) [1]
        Non-negative weights summing to 1, or all zeros when no entry is finite.

    Raises
    ------
    ValueError
        If an entry is +inf (the proposal density vanishes where the target does not).
    """
    log_w = np.asarray(log_w, float)
    if np.any(log_w == np.inf):
        raise ValueError("a log importance ratio is +inf: the sampling density is zero "
                         "where the target is not")
    finite = np.isfinite(log_w)
    w = np.zeros(log_w.shape)
    if not finite.any():
        return w
    w[finite] = np.exp(log_w[finite] - log_w[finite].max())
    return w / w.sum()


def kish_ess(weights: np.ndarray) -> float:
    """Kish's effective sample size ``(Σ w)² / Σ w²`` of non-negative weights.

    Parameters
    ----------
    weights : ndarray [1]
        Any normalisation.

    Returns
    -------
    float
        Between 1 and the number of samples; 0 when every weight is 0.
    """
    w = np.asarray(weights, float)
    if np.any(w < 0) or not np.all(np.isfinite(w)):
        raise ValueError("weights must be finite and non-negative")
    total = float(w.sum())
    return 0.0 if total == 0.0 else total ** 2 / float(np.sum(w ** 2))


def weighted_quantiles(values: np.ndarray, weights: np.ndarray | None,
                       quantiles: np.ndarray) -> np.ndarray:
    """Quantiles of weighted samples (Hazen for equal weights; see the module docstring).

    Parameters
    ----------
    values : ndarray, shape (m,)
    weights : ndarray, shape (m,), or None
        Non-negative weights (None: equal).  Samples with weight 0 or a non-finite value
        are left out.
    quantiles : array_like
        Probabilities in [0, 1].

    Returns
    -------
    ndarray
        The quantiles (NaN when no sample is left).
    """
    x = np.asarray(values, float)
    w = np.ones(x.shape) if weights is None else np.asarray(weights, float)
    keep = np.isfinite(x) & (w > 0)
    q = np.asarray(quantiles, float)
    if not keep.any():
        return np.full(q.shape, np.nan)
    x, w = x[keep], w[keep]
    order = np.argsort(x, kind="stable")
    x, w = x[order], w[order]
    c = (np.cumsum(w) - 0.5 * w) / w.sum()
    return np.interp(q, c, x)


def median_shift(unweighted: dict[str, float], reweighted: dict[str, float]) -> float:
    """(reweighted median - unweighted median) in units of the unweighted 68 % half-width.

    Parameters
    ----------
    unweighted, reweighted : dict
        ``{"q16", "median", "q84"}`` of the same quantity (same scale).

    Returns
    -------
    float
        NaN when either summary is missing or the half-width is zero.
    """
    half = 0.5 * (unweighted["q84"] - unweighted["q16"])
    diff = reweighted["median"] - unweighted["median"]
    if not (np.isfinite(half) and np.isfinite(diff)) or half <= 0.0:
        return float("nan")
    return float(diff / half)
