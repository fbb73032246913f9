"""CMB normalisation at the pivot from the exact modes: V0, n_s, alpha_s, r.

With the map k = aH and k_* exiting at N_pivot = N_end - N_*, the spectra at V0 = 1 are
computed for a five-mode stencil ln(k/k_*) in {-2, -1, 0, 1, 2} * step.  Since the
background in N does not depend on V0 and P scales as V0, V0 = A_s / P_zeta(k_*; V0 = 1).
When N_* depends on V0 (reheating matching, ``scan.background.pivot``) the pair is iterated.
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

#: Planck 2018 ln(10^10 A_s) = 3.044 (Planck 2018 VI, arXiv:1807.06209, Table 2).
LN10_AS_PLANCK18 = 3.044
#: Pivot scale [Mpc^-1] (Planck 2018 convention).
K_STAR_MPC = 0.05
#: Stencil spacing in ln k and half-width (points -2..2).
STENCIL_STEP = 0.1
STENCIL = STENCIL_STEP * np.arange(-2, 3, dtype=float)


@dataclass(frozen=True)
class PivotValues:
    """Observables at the pivot for V0 = 1 (P scales with V0; n_s, alpha_s, r do not).

    Attributes
    ----------
    N_pivot : float
        Exit e-fold of k_* [e-folds].
    P_zeta, P_tensor : float
        Spectra at k_* for V0 = 1.
    n_s, alpha_s, r : float
        Tilt, running d n_s/d ln k and tensor-to-scalar ratio at k_*.
    """

    N_pivot: float
    P_zeta: float
    P_tensor: float
    n_s: float
    alpha_s: float
    r: float


def tilt_and_running(x: np.ndarray, ln_P: np.ndarray) -> tuple[float, float]:
    """n_s - 1 and alpha_s at x = 0 from the degree-4 polynomial through five points.

    Parameters
    ----------
    x : ndarray, shape (5,)
        ln(k/k_*).
    ln_P : ndarray, shape (5,)

    Returns
    -------
    (n_s - 1, alpha_s)
    """
    c = np.polyfit(x, ln_P, x.size - 1)
    return float(c[-2]), float(2.0 * c[-3])


def pivot_values(N_pivot: float, ln_aH_offsets: np.ndarray, P_zeta: np.ndarray,
                 P_tensor: np.ndarray) -> PivotValues:
    """Assemble PivotValues from the stencil modes (middle one is the pivot)."""
    tilt, run = tilt_and_running(ln_aH_offsets, np.log(P_zeta))
    mid = ln_aH_offsets.size // 2
    return PivotValues(N_pivot, float(P_zeta[mid]), float(P_tensor[mid]), 1.0 + tilt, run,
                       float(P_tensor[mid] / P_zeta[mid]))


def iterate_normalisation(pivot_at: Callable[[float], PivotValues], N_end: float,
                          n_star_of_V0: Callable[[float], float], A_s: float,
                          N_star_guess: float = 55.0, tol: float = 1e-6,
                          max_iter: int = 12) -> tuple[float, float, PivotValues, bool]:
    """Solve V0 = A_s/P_zeta(k_*; V0 = 1, N_*) together with N_* = n_star_of_V0(V0).

    Parameters
    ----------
    pivot_at : callable
        ``pivot_at(N_pivot) -> PivotValues`` (V0 = 1).
    N_end : float
        End of inflation [e-folds].
    n_star_of_V0 : callable
        The matching N_*(V0) (e.g. reheating, ``scan.background.pivot``).
    A_s : float
        Target amplitude.
    N_star_guess : float
        First guess for N_*.
    tol : float
        Convergence in N_* [e-folds].
    max_iter : int

    Returns
    -------
    V0, N_star, pivot values, converged
    """
    N_star = float(N_star_guess)
    for _ in range(max_iter):
        pv = pivot_at(N_end - N_star)
        V0 = A_s / pv.P_zeta
        N_new = float(n_star_of_V0(V0))
        if abs(N_new - N_star) < tol:
            pv = pivot_at(N_end - N_new) if N_new != N_star else pv
            return A_s / pv.P_zeta, N_new, pv, True
        N_star = N_new
    return V0, N_star, pv, False


def as_from_ln10(ln10As: float) -> float:
    """A_s from ln(10^10 A_s)."""
    return float(np.exp(ln10As) * 1e-10)
