"""Peak and dip of a sampled spectrum, and their refinement by adding modes.

Between grid points the spectrum is interpolated in log-log: the extreme of ln P over
ln k is the vertex of the parabola through the grid extreme and its two neighbours.
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Extreme:
    """An interpolated extreme: ln k, ln P and the grid index nearest to it (-1: none)."""

    ln_k: float
    ln_P: float
    index: int


_NONE = Extreme(np.nan, np.nan, -1)


def vertex(x: np.ndarray, y: np.ndarray, i: int) -> tuple[float, float]:
    """Vertex of the parabola through (x, y)[i-1 : i+2] (log-log interpolation)."""
    c = np.polyfit(x[i - 1:i + 2] - x[i], y[i - 1:i + 2], 2)
    if c[0] == 0.0:
        return float(x[i]), float(y[i])
    t = float(np.clip(-c[1] / (2 * c[0]), x[i - 1] - x[i], x[i + 1] - x[i]))
    return float(x[i] + t), float(np.polyval(c, t))


def find_peak(ln_k: np.ndarray, ln_P: np.ndarray) -> Extreme:
    """The global maximum of ln P if it lies inside the grid, else an empty Extreme."""
    i = int(np.argmax(ln_P))
    if i == 0 or i == ln_P.size - 1:
        return _NONE
    return Extreme(*vertex(ln_k, ln_P, i), i)


def find_dip(ln_k: np.ndarray, ln_P: np.ndarray, peak: Extreme) -> Extreme:
    """The deepest interior minimum of ln P below the peak's ln k (empty if none)."""
    if peak.index < 2:
        return _NONE
    i = int(np.argmin(ln_P[:peak.index]))
    if i == 0:
        return _NONE
    return Extreme(*vertex(ln_k, ln_P, i), i)


def _new_points(ln_k: np.ndarray, ext: Extreme, splits: int = 2) -> np.ndarray:
    """Points dividing each of the 2 + 2 intervals around ``ext`` into ``splits`` parts."""
    if ext.index < 0:
        return np.empty(0)
    lo, hi = max(ext.index - 2, 0), min(ext.index + 2, ln_k.size - 1)
    edges = ln_k[lo:hi + 1]
    frac = np.arange(1, splits) / splits
    return (edges[:-1, None] + np.diff(edges)[:, None] * frac[None, :]).ravel()


def refine(ln_k: np.ndarray, ln_P: np.ndarray,
           solve: Callable[[np.ndarray], np.ndarray], tol: float = 1e-3,
           max_rounds: int = 8, splits: int = 4
           ) -> tuple[np.ndarray, np.ndarray, Extreme, Extreme, bool]:
    """Add modes around the peak and dip until their interpolated values settle.

    Parameters
    ----------
    ln_k, ln_P : ndarray
        Sorted grid and the spectrum on it.
    solve : callable
        ``solve(ln_k_new) -> ln_P_new`` for new grid points.
    tol : float
        Convergence: change of ln P_peak (relative change of P) and of ln k at the peak
        and the dip below ``tol`` between rounds.
    max_rounds : int
    splits : int
        Each round divides the two grid intervals on either side of the peak and of the
        dip into ``splits`` parts (4: three new modes per interval, one solve per round;
        the earlier scheme bisected, ``splits = 2``, and needed about twice the rounds).

    Returns
    -------
    ln_k, ln_P, peak, dip, converged
    """
    peak = find_peak(ln_k, ln_P)
    dip = find_dip(ln_k, ln_P, peak)
    for _ in range(max_rounds):
        new = np.concatenate([_new_points(ln_k, peak, splits), _new_points(ln_k, dip, splits)])
        if new.size == 0:
            return ln_k, ln_P, peak, dip, True
        ln_k, ln_P = _merge(ln_k, ln_P, new, solve(new))
        p2 = find_peak(ln_k, ln_P)
        d2 = find_dip(ln_k, ln_P, p2)
        done = _settled(peak, p2, tol) and _settled(dip, d2, tol)
        peak, dip = p2, d2
        if done:
            return ln_k, ln_P, peak, dip, True
    return ln_k, ln_P, peak, dip, False


def _merge(x, y, xn, yn):
    order = np.argsort(np.concatenate([x, xn]), kind="stable")
    return np.concatenate([x, xn])[order], np.concatenate([y, yn])[order]


def _settled(a: Extreme, b: Extreme, tol: float) -> bool:
    if a.index < 0 and b.index < 0:
        return True
    if a.index < 0 or b.index < 0:
        return False
    return abs(a.ln_P - b.ln_P) < tol and abs(a.ln_k - b.ln_k) < tol
