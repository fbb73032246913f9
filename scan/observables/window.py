"""Spectra given on a window around their own peak, put on one shared absolute table.

Each emulated spectrum is log10 P on ``shift + grid`` (``shift`` = its ln k_peak, ``grid``
the relative x = ln(k/k_peak)), 0 outside; the f_PBH plan wants P on one absolute ln k
table for all of them.  Only the table points within each window are evaluated (about
span(grid)/table step + 3 per row, instead of the whole table).

Units: ln k [ln(Mpc^-1)], log10 P [dex], P [1].
"""
from __future__ import annotations

import math

import numpy as np


def spectra_on_table(x: np.ndarray, shift: np.ndarray, grid: np.ndarray,
                     log10_p: np.ndarray) -> np.ndarray:
    """P = 10^(log10 P) of every row on the table ``x``, 0 outside each row's window.

    ``10.0 ** interp_uniform_shifted(x, shift, grid, log10_p)`` to rounding
    (:func:`scan.observables.batch.interp_uniform_shifted`: the same bracketing and
    fractions; here ln P = ln 10 log10 P is interpolated and exponentiated), but evaluated
    only at the table points near each row's window ``shift[i] + grid`` (about
    span(grid) / table step + 3 of them).

    Parameters
    ----------
    x : ndarray, shape (n,)
        Evenly spaced increasing table, e.g. ln k [ln(Mpc^-1)].
    shift : ndarray, shape (p,)
        Offset of each row's abscissae (e.g. ln k_peak).
    grid : ndarray, shape (n_x,)
        Evenly spaced increasing abscissae common to all rows (before the shift).
    log10_p : ndarray, shape (p, n_x)
        log10 P [dex] on ``shift[i] + grid``.

    Returns
    -------
    ndarray, shape (p, n) [1]
    """
    shift = np.asarray(shift, float)
    m, n_x = shift.size, grid.size
    step = (grid[-1] - grid[0]) / (n_x - 1)
    dx = (x[-1] - x[0]) / (x.size - 1)
    width = int(math.ceil((grid[-1] - grid[0]) / dx)) + 3
    with np.errstate(invalid="ignore"):                  # NaN shifts: nothing inside
        first = np.floor((shift + grid[0] - x[0]) / dx)
    first = np.where(np.isfinite(first), first, 0).astype(np.intp) - 1
    cols = np.minimum(np.maximum(first[:, None] + np.arange(width), 0), x.size - 1)
    t = (x[cols] - shift[:, None] - grid[0]) / step      # as interp_uniform_shifted
    inside = (t >= -1e-9) & (t <= n_x - 1 + 1e-9)
    j = np.floor(np.where(inside, t, 0.0))
    j = np.minimum(np.maximum(j, 0), n_x - 2).astype(np.intp)
    frac = t - j
    flat = j + (n_x * np.arange(m))[:, None]
    ln_p = (math.log(10.0) * np.asarray(log10_p, float)).ravel()
    g0 = ln_p[flat]
    ln_val = g0 + (ln_p[flat + 1] - g0) * frac
    out = np.zeros(m * x.size)
    out[cols + (x.size * np.arange(m))[:, None]] = np.exp(np.where(inside, ln_val, -np.inf))
    return out.reshape(m, x.size)
