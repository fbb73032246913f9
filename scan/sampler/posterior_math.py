"""Pure pieces of the posterior target (:mod:`scan.sampler.posterior`).

The total ln L of the per-term values, the mass at the peak of d f_PBH / d ln M, and the
range of ln k_peak the shared observable grids must cover.
"""
from __future__ import annotations

import numpy as np

#: Surrogate predictions used to find the range of ln k_peak the shared grids cover.
RANGE_POINTS = 1024
#: Padding of that range on each side [e-folds of k].
RANGE_PAD = 3.0


def total_of_terms(per_term: dict[str, np.ndarray], m: int) -> np.ndarray:
    """Sum of the terms, -inf where any term is -inf (shape (m,))."""
    if not per_term:
        return np.zeros(m)
    stack = np.vstack(list(per_term.values()))
    with np.errstate(invalid="ignore"):
        total = np.where(np.isneginf(stack), 0.0, stack).sum(axis=0)
    return np.where(np.isneginf(stack).any(axis=0), -np.inf, total)


#: Below this d f_PBH / d ln M everywhere, a row has no peak mass (NaN): values that
#: small are rounding in the exponential tail (subnormal numbers), not an abundance.
NO_PEAK_FPBH = 1e-200


def mass_at_peak(m_msun: np.ndarray, f_per_lnm: np.ndarray) -> np.ndarray:
    """Mass of the maximum of d f_PBH / d ln M per row (NaN where f is negligible)."""
    f = np.atleast_2d(f_per_lnm)
    return np.where(np.any(f > NO_PEAK_FPBH, axis=1),
                    np.asarray(m_msun)[np.argmax(f, axis=1)], np.nan)


def peak_range(surrogate) -> tuple[float, float]:
    """ln k_peak range the shared grids cover: a fixed quasi-random sample of the
    surrogate's box (valid predictions), padded by :data:`RANGE_PAD` e-folds."""
    from scipy.stats import qmc

    u = qmc.Sobol(surrogate.space.dim, scramble=True, seed=0).random(RANGE_POINTS)
    u = np.clip(u, 1e-6, 1.0 - 1e-6)
    pred = surrogate.predict(surrogate.space.from_unit(u))
    ln_k = pred.ln_k_peak[pred.valid & np.isfinite(pred.ln_k_peak)]
    if not ln_k.size:
        ln_k = pred.ln_k_peak[np.isfinite(pred.ln_k_peak)]
    return float(ln_k.min()) - RANGE_PAD, float(ln_k.max()) + RANGE_PAD
