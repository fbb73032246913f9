"""The k grid: log-spaced from the pivot to the last mode that freezes before the end.

Modes are labelled by their exit e-fold N_k (k = a H at N_k, a = e^N, Planck units);
ln(k/k_*) = ln(aH)(N_k) - ln(aH)(N_pivot).
"""
from __future__ import annotations

import numpy as np

from scan.modes.table import BackgroundTable

#: Safety margin [e-folds] kept between the last grid mode's freeze-out and N_stop.
_END_MARGIN = 0.05


def ln_aH_range(table: BackgroundTable, N_pivot: float, N_stop: float,
                x_out: float) -> tuple[float, float]:
    """ln(aH) of the pivot and of the last mode with k/(aH) <= x_out at N_stop."""
    lo = float(table.ln_aH(np.array([N_pivot]))[0])
    hi = float(table.ln_aH(np.array([N_stop - _END_MARGIN]))[0]) + np.log(x_out)
    return lo, hi


def log_grid(table: BackgroundTable, N_pivot: float, N_stop: float, x_out: float,
             n_modes: int) -> np.ndarray:
    """Exit e-folds of ``n_modes`` modes log-spaced in k from k_* to the last frozen mode."""
    lo, hi = ln_aH_range(table, N_pivot, N_stop, x_out)
    if not hi > lo:
        return np.empty(0)
    return table.N_of_ln_aH(np.linspace(lo, hi, n_modes))


def k_mpc(table: BackgroundTable, N_k: np.ndarray, N_pivot: float, k_star: float) -> np.ndarray:
    """Wavenumbers [Mpc^-1] of modes exiting at N_k, with k_* exiting at N_pivot."""
    ref = table.ln_aH(np.array([N_pivot]))[0]
    return k_star * np.exp(table.ln_aH(np.asarray(N_k, float)) - ref)


def efolds_below(table: BackgroundTable, threshold: float, step: float = 1e-3) -> float:
    """Total e-folds with eps2 < threshold (e.g. -3: the super-horizon growth regime).

    eps2 is sampled every ``step`` e-folds from the table's interpolant and the crossings
    are located by linear interpolation between samples (error ~ step^2).
    """
    N = np.linspace(table.N[0], table.N[-1], int(np.ceil((table.N[-1] - table.N[0]) / step)) + 1)
    s = table.eps2_interp(N) - threshold
    a, b = s[:-1], s[1:]
    h = np.diff(N)
    both = (a < 0) & (b < 0)
    cross = (a < 0) != (b < 0)
    frac = np.where(cross, np.where(a < 0, a, b) / np.where(cross, a - b, 1.0), 0.0)
    return float(np.sum(h[both]) + np.sum(np.abs(frac[cross]) * h[cross]))
