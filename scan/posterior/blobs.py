"""Pure pieces of the posterior target (:mod:`scan.posterior.target`).

The total ln L of the per-term values, the blob records (empty, filled, and the log
posterior with its ``excluded`` reason), the mass at the peak of d f_PBH / d ln M, and the
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


def mass_at_peak(m_msun: np.ndarray, f_per_lnm: np.ndarray,
                 ln_mass_shift: np.ndarray | None = None) -> np.ndarray:
    """Mass of the maximum of d f_PBH / d ln M per row [M_sun] (NaN where f is
    negligible); row i on the masses ``m_msun * exp(ln_mass_shift[i])`` if given."""
    f = np.atleast_2d(f_per_lnm)
    peak = np.where(np.any(f > NO_PEAK_FPBH, axis=1),
                    np.asarray(m_msun)[np.argmax(f, axis=1)], np.nan)
    return peak if ln_mass_shift is None else peak * np.exp(ln_mass_shift)


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


def empty_blobs(dtype: np.dtype, p: int) -> np.ndarray:
    """p blob records of ``dtype``: NaN in every field but the last (the reason, 0)."""
    blobs = np.zeros(p, dtype=dtype)
    for name in dtype.names[:-1]:
        blobs[name] = np.nan
    return blobs


def store_blobs(blobs: np.ndarray, rows: np.ndarray, per_term: dict, total: np.ndarray,
                snr: dict, derived: dict) -> None:
    """Write the derived fields, ``log_like``, ``snr_<curve>`` and ``lnL_<term>`` of
    ``rows`` into ``blobs`` (in place)."""
    for name, value in derived.items():
        blobs[name][rows] = value
    blobs["log_like"][rows] = total
    for name, value in snr.items():
        blobs[f"snr_{name}"][rows] = value
    for name, value in per_term.items():
        blobs[f"lnL_{name}"][rows] = value


def finish_log_posterior(log_p: np.ndarray, reason: np.ndarray, rows: np.ndarray,
                         total: np.ndarray, log_prior: np.ndarray, excluded_code: int) -> None:
    """``log_p[rows]`` = log-prior + ln L where ln L > -inf; ``reason[rows]`` =
    ``excluded_code`` where a bound rules the model out (both in place)."""
    excluded = total == -np.inf
    reason[rows[excluded]] = excluded_code
    log_p[rows[~excluded]] = log_prior[rows[~excluded]] + total[~excluded]


#: Blob field of the Gaussian-zeta total beside a non-Gaussian ``f_pbh_total``.
GAUSSIAN_TOTAL = "f_pbh_total_gaussian"


def extra_fields(observables) -> tuple[str, ...]:
    """Blob fields beyond the fixed ones: ``f_pbh_total_gaussian`` when the
    ``[observables]`` section's zeta is non-Gaussian."""
    return () if observables.non_gaussianity == "gaussian" else (GAUSSIAN_TOTAL,)


def extra_values(fields: tuple[str, ...], obs) -> dict:
    """The values of the extra blob ``fields`` from observables ``obs``."""
    return {GAUSSIAN_TOTAL: obs.f_pbh_total_gaussian} if GAUSSIAN_TOTAL in fields else {}
