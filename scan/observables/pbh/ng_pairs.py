"""Compiled per-pair sums of the stacked non-Gaussian path
(:mod:`scan.observables.pbh.ng_stack`): the mass function over the live (spectrum, epoch)
pairs only.

The array form laid every pair's ln g out densely over (epochs x spectra), dead ones at
e^{-800}, and took the exponential of all n_H m n_M products (262k for the benchmark's
128 epochs, 64 spectra and 32 masses, of which the ~2.5k live pairs need 80k); here each
live pair's ln g at the masses y(M, M_H) is one 9 x n_M product, exponentiated and added
to its spectrum's f(M) (ratio in tests/bench/bench_pbh_nongaussian.py).  The exponential
is :func:`scan.observables.pbh.ng_stack.exp_or_zero`'s: exactly 0 at or below ``ln_zero``,
exp(x) - e^{ln_zero} above, NaN propagated.

Units: f(M) per ln M [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit


@njit(cache=True, error_model="numpy")
def pair_mass_function(lng, i, h, mass_matrix, weight, m, ln_zero):
    """f(M) [1], shape (m, n_M): sum over the pairs p of weight[h_p] g_p(y(M, M_H)).

    Parameters
    ----------
    lng : (n_pairs, n_y) ln g at the nodes [1]; ``i``, ``h``: spectrum and epoch per pair.
    mass_matrix : (n_H, n_y, n_M) interpolation of the nodes to y(M, M_H).
    weight : (n_H, n_M) mass-function weight per epoch [1]; ``m`` spectra.
    ln_zero : exponents at or below this contribute exactly 0.
    """
    n_y, n_m = lng.shape[1], weight.shape[1]
    floor = math.exp(ln_zero)
    out = np.zeros((m, n_m))
    acc = np.empty(n_m)
    for p in range(lng.shape[0]):
        e = h[p]
        acc[:] = 0.0
        for j in range(n_y):
            v = lng[p, j]
            for k in range(n_m):
                acc[k] += v * mass_matrix[e, j, k]
        for k in range(n_m):
            if not acc[k] <= ln_zero:
                out[i[p], k] += weight[e, k] * (math.exp(acc[k]) - floor)
    return out
