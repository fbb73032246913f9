"""The critical-collapse mass function over (spectrum, epoch) pairs, a threshold per pair.

f(M) = sum_H weight p(y) w_H F(M_H) (see :mod:`scan.observables.pbh.abundance`).

Per pair and mass: C = t + x, x = (M/(K M_H))^{1/gamma_c} (the epoch's), y(C) (y = C for
the linear criteria, C_l(C) = (4/3)[1 - sqrt(1 - 3C/2)] for the compaction function, Young,
Musco & Byrnes 2019, arXiv:1904.00984), weight = (M/M_H)(dy/dC) x / gamma_c, and p(y) =
p_0 exp(-y^2/(2 sigma^2)) [* (nu^3 - 3 nu)_+ for peaks] (the densities of
:func:`scan.observables.pbh.abundance.density`).  Compiled, in blocks of pairs whose
exponentials are one vectorised pass each
(:func:`~scan.observables.pbh.vector_math.exp_in_place`, within 1 ulp of numpy's exp;
exactly 0 below its range's ``X_MIN`` = -708, where numpy's exp(y^2/(4 sigma^2))^2 of
:func:`~scan.observables.pbh.kernel.half_exp` gives values below 3e-308); the buffers
stay in cache, so no array of the size pairs x masses is allocated per call.  Used by
:mod:`scan.observables.pbh.threshold_plan`.

Units: f per ln M [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from scan.observables.pbh.pair_beta import BLOCK, COMPACTION, PEAKS
from scan.observables.pbh.thresholds import C_MAX
from scan.observables.pbh.vector_math import X_MIN, exp_in_place


def critical_mass_function(i: np.ndarray, h: np.ndarray, t: np.ndarray, s: np.ndarray,
                           prefactor: np.ndarray, y_th: np.ndarray, x: np.ndarray,
                           weight: np.ndarray, m: int, kind: int) -> np.ndarray:
    """f(M) [1], shape (m, n_M): the sum over the pairs (spectrum ``i``, epoch ``h``).

    Parameters
    ----------
    i, h : ndarray of int
        Spectrum and epoch of each pair, shape (n,).
    t, s, prefactor, y_th : ndarray [1]
        Per pair, shape (n,): threshold, sigma^2, the density's p_0
        (:func:`scan.observables.pbh.abundance.prefactor`) and y(t).
    x : ndarray [1]
        (M/(K M_H))^{1/gamma_c} per epoch and mass, shape (n_H, n_M).
    weight : ndarray [1]
        (M/M_H) x / gamma_c w_H F(M_H) per epoch and mass, shape (n_H, n_M) (times dy/dC
        here for compaction).
    m : int
        Number of spectra.
    kind : int
        :func:`scan.observables.pbh.pair_beta.criterion_code` of the criterion.

    Returns
    -------
    ndarray [1]
        Shape (m, n_M); 0 in rows without pairs.
    """
    as_index = (np.ascontiguousarray(v, dtype=np.int64) for v in (i, h))
    as_float = (np.ascontiguousarray(v, dtype=float) for v in (t, s, prefactor, y_th))
    return _pair_sums(*as_index, *as_float, np.ascontiguousarray(x),
                      np.ascontiguousarray(weight), m, kind)


@njit(cache=True, error_model="numpy")
def _pair_sums(i, h, t, s, prefactor, y_th, x, weight, m, kind):
    """f(M) [1] of :func:`critical_mass_function`, in blocks of ``BLOCK`` pairs: the
    exponents and weights per (pair, mass), one vectorised exp per block, then the sums
    (pair after pair into its row: numpy.add.reduceat's order).  Compaction above C =
    2/3: weight and density 0 (a NaN prefactor still propagates, as 0 * NaN)."""
    n, n_m = h.size, x.shape[1]
    arg = np.empty(BLOCK * n_m)         # the exponent -y^2/(2 sigma^2)
    g = np.empty(BLOCK * n_m)           # the clipped exponent, then its exp
    w = np.empty(BLOCK * n_m)           # the weight
    out = np.zeros((m, n_m))
    for first in range(0, n, BLOCK):
        last = min(first + BLOCK, n)
        size = (last - first) * n_m
        for p in range(first, last):
            e, q, base = h[p], -0.5 / s[p], (p - first) * n_m
            for k in range(n_m):
                c = t[p] + x[e, k]
                if kind == COMPACTION:
                    root = math.sqrt(max(1.0 - 1.5 * c, 1e-300))   # 1/(dy/dC)
                    valid = c < C_MAX
                    y = (4.0 / 3.0) * (1.0 - root) if valid else y_th[p]
                    arg[base + k] = y * y * q if valid else -math.inf
                    w[base + k] = weight[e, k] / root if valid else 0.0
                else:
                    arg[base + k] = c * c * q
                    w[base + k] = weight[e, k]
        for j in range(size):
            g[j] = X_MIN if arg[j] < X_MIN else arg[j]  # noqa: FURB136 -- NaN stays NaN
        exp_in_place(g[:size])
        for p in range(first, last):
            e, row, base = h[p], out[i[p]], (p - first) * n_m
            for k in range(n_m):
                v = 0.0 if arg[base + k] < X_MIN else g[base + k]
                if kind == PEAKS:
                    nu = (t[p] + x[e, k]) / math.sqrt(s[p])
                    v *= max(nu * (nu * nu - 3.0), 0.0)
                row[k] += w[base + k] * v * prefactor[p]
    return out
