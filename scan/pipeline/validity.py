"""The one validity rule of an exact solve that the stages alone do not apply.

Every command that solves a model exactly (``solve``, ``train``, ``verify``, ``grid
--exact``, ``tune``) goes through :func:`scan.pipeline.solve_config`, which calls
:func:`feature_at_pivot` on a valid spectrum: a feature of the kinetic pole on CMB
scales makes the model invalid with the reason :data:`FEATURE_REASON` (reason code
``feature_at_pivot`` in :mod:`scan.posterior.reasons`).

A feature is on CMB scales when

* the exact tilt at the pivot is far from slow roll, |n_s − 1| > :data:`TILT_LIMIT`, or
* a pole's phase overlaps the e-folds in which the CMB window k ∈ [:data:`K_CMB_MIN`,
  :data:`K_CMB_MAX`] leaves the horizon: its crossing, its ultra-slow-roll window
  (ε2 < −3) or its near-pole window (|φ − φᵢ| < wᵢ, where the pole's term dominates K;
  near the stall of a pole with p > 1 the field creeps there for hundreds of e-folds and
  the spectrum's maximum sits on the pivot).
"""
from __future__ import annotations

import math

import numpy as np

#: Largest |n_s − 1| of a model whose pivot exits in slow roll.  Planck 2018 measures
#: n_s = 0.9649 ± 0.0042 (Planck 2018 X, arXiv:1807.06211), so |n_s − 1| = 0.2 lies ~40σ
#: away: no model the CMB prior could accept is called invalid.  On the pole scan every
#: model with its feature away from the pivot has |n_s − 1| < 0.06, every one with its
#: stall at the pivot > 0.38 (measured: n_s = 0.62, −0.46, −0.28, 2.2 … 4.2).
TILT_LIMIT = 0.2
#: The CMB window: multipoles 2 ≤ ℓ ≤ 2500 of the Planck likelihood (Planck 2015 XI,
#: arXiv:1507.02704, from memory) at k ≈ ℓ/D_rec with D_rec ≈ 13.9 Gpc the comoving distance
#: to recombination (Planck 2018 X, arXiv:1807.06211, Fig. 24 caption; value from memory)
#: [Mpc^-1].
K_CMB_MIN = 1.4e-4
K_CMB_MAX = 0.18
#: The reason text (the part every such model shares).
FEATURE_REASON = "feature at CMB scales"


def tilt_off(n_s: np.ndarray | float) -> np.ndarray:
    """True where the pivot tilt is outside slow roll, |n_s − 1| > :data:`TILT_LIMIT`."""
    with np.errstate(invalid="ignore"):
        return np.abs(np.asarray(n_s, float) - 1.0) > TILT_LIMIT


def cmb_exit_window(N_end: float, N_star: float, k_star: float) -> tuple[float, float]:
    """E-folds (background clock) at which K_CMB_MIN and K_CMB_MAX exit, taking H constant
    over the window (ln k = ln(aH) + const; H changes by ε1 per e-fold, ε1 < 1e-2 there).

    Parameters
    ----------
    N_end, N_star : float
        End of inflation and e-folds from pivot exit to the end [e-folds].
    k_star : float
        Pivot [Mpc^-1].
    """
    N_pivot = N_end - N_star
    return (N_pivot + math.log(K_CMB_MIN / k_star), N_pivot + math.log(K_CMB_MAX / k_star))


def feature_at_pivot(spectrum, background) -> str:
    """Why a valid spectrum has its feature on CMB scales ("" if it has not).

    Parameters
    ----------
    spectrum : Spectrum
        The exact spectrum (``n_s``, ``N_star``, ``k_star``).
    background : Background
        Its background (``N_end``, ``crossings`` with the config's pole numbers).

    Returns
    -------
    str
        ``"feature at CMB scales: ..."`` naming the tilt or the pole, or "".
    """
    if tilt_off(spectrum.n_s):
        return (f"{FEATURE_REASON}: the pivot exits outside slow roll (n_s = "
                f"{spectrum.n_s:.3g}, |n_s - 1| > {TILT_LIMIT:g})")
    return poles_on_cmb_scales(background, spectrum.N_star, spectrum.k_star)


def poles_on_cmb_scales(background, N_star: float, k_star: float) -> str:
    """Why a pole's phase overlaps the exit of the CMB window ("" if none does).

    Parameters
    ----------
    background : Background
        ``N_end`` and ``crossings`` (with the config's pole numbers).
    N_star : float
        E-folds from pivot exit to the end of inflation.
    k_star : float
        Pivot [Mpc^-1].
    """
    lo, hi = cmb_exit_window(background.N_end, N_star, k_star)
    for c in background.crossings:
        start = min(c.N_cross, c.N_usr_start, c.N_near_start)
        stop = max(c.N_cross, c.N_usr_end, c.N_near_end)
        if start <= hi and stop >= lo:
            end = background.N_end
            return (f"{FEATURE_REASON}: pole {c.index} (phi = {c.position:g}) shapes the "
                    f"background from {end - start:.2f} to {end - stop:.2f} e-folds before "
                    f"the end, while the CMB scales {K_CMB_MIN:g}-{K_CMB_MAX:g} Mpc^-1 exit "
                    f"({end - lo:.2f} to {end - hi:.2f}; N* = {N_star:.2f})")
    return ""
