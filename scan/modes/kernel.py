"""The compiled Mukhanov–Sasaki system: right-hand side and DOP853 driver (numba).

The right-hand side is the one :mod:`scan.modes.solver` documents (scaled Hamiltonian
variables, eight rows of M modes: Re/Im of q, p~ for scalars, then for tensors) with the
background from the cubic-Hermite table (:mod:`scan.modes.table`).  Mode j on clock t
sits at N_j = N0_j + t·rate_j and n_j = n0 + t·rate_j; without rates (``has_rate`` false)
every rate is 1.  The driver takes scipy's DOP853 steps (:mod:`scan.ode`), so a solve
agrees with ``solve_ivp(..., method="DOP853")`` to rounding.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from scan.ode import (error_norm, first_step, first_trial, min_step, next_step_size, sizes,
                      stage_state, stage_time, step_update)

#: solve_ivp's messages, so results read the same as before.
MESSAGE_DONE = "The solver successfully reached the end of the integration interval."
MESSAGE_SMALL = "Required step size is less than spacing between numbers."


@njit(cache=True)
def _locate(nodes, x: float, last: int) -> int:
    """Interval index i with nodes[i] <= x < nodes[i+1], clipped to [0, last] (bisection)."""
    lo, hi = 0, last + 1
    while hi - lo > 1:
        mid = (lo + hi) >> 1
        if nodes[mid] <= x:
            lo = mid
        else:
            hi = mid
    return lo


@njit(cache=True)
def mode_rhs(t, y, nodes, coef, Lk, gk, N0, n0, rate, has_rate, hint, out):
    """d/dt of the eight rows of M modes (see the module docstring).

    ``hint[j]`` is mode j's table interval at the previous call (updated here): the
    clock moves little between calls, so a short walk from it replaces the bisection."""
    M = Lk.size
    last = nodes.size - 2
    shrink = math.exp(-2.0 * (n0 + t))  # e^{-2n}, the same for every mode without rates
    for j in range(M):
        r = rate[j] if has_rate else 1.0
        dn = t * r
        N = N0[j] + dn
        i = hint[j]
        while i < last and nodes[i + 1] <= N:
            i += 1
        while i > 0 and nodes[i] > N:
            i -= 1
        hint[j] = i
        h = N - nodes[i]
        L = ((coef[i, 3] * h + coef[i, 2]) * h + coef[i, 1]) * h + coef[i, 0]
        g = ((coef[i, 7] * h + coef[i, 6]) * h + coef[i, 5]) * h + coef[i, 4]
        if has_rate:
            shrink = math.exp(-2.0 * (n0 + dn))
        # e3 = H_k/H, e1 = e3 eps1/eps1_k, e2 = e3 e^{-2n}, e0 = e2 eps1_k/eps1
        e3 = math.exp(g - gk[j])
        ratio = math.exp(L - Lk[j])
        e1 = e3 * ratio
        e2 = e3 * shrink
        e0 = e2 / ratio
        for c in range(2):
            q, p = y[c * M + j], y[(2 + c) * M + j]
            qt, pt = y[(4 + c) * M + j], y[(6 + c) * M + j]
            out[c * M + j] = r * (e0 * p)
            out[(2 + c) * M + j] = r * (-e1 * q - p)
            out[(4 + c) * M + j] = r * (e2 * pt)
            out[(6 + c) * M + j] = r * (-e3 * qt - pt)


@njit(cache=True)
def integrate_modes(t0, t1, y0, rtol, atol, nodes, coef, Lk, gk, N0, n0, rate, has_rate, tab):
    """Integrate the modes from t0 to t1 > t0 (``tab``: :data:`scan.ode.TABLEAU`);
    returns (y(t1), nfev, success)."""
    n = y0.size
    stages = sizes(tab)[0]
    atol_v = np.full(n, atol)
    hint = np.empty(Lk.size, np.int64)
    for j in range(Lk.size):
        hint[j] = _locate(nodes, N0[j] + t0 * (rate[j] if has_rate else 1.0), nodes.size - 2)
    y = y0.copy()
    f = np.empty(n)
    mode_rhs(t0, y, nodes, coef, Lk, gk, N0, n0, rate, has_rate, hint, f)
    nfev = 1
    interval = t1 - t0
    if interval <= 0.0:
        return y, nfev, True
    h0 = first_trial(y, f, interval, rtol, atol_v)
    tmp = y + h0 * f
    f1 = np.empty(n)
    mode_rhs(t0 + h0, tmp, nodes, coef, Lk, gk, N0, n0, rate, has_rate, hint, f1)
    nfev += 1
    h_abs = first_step(y, f, f1, h0, interval, rtol, atol_v)
    K = np.empty((stages + 1, n))
    y_new = np.empty(n)
    t = t0
    while t < t1:
        small = min_step(t)
        h_abs = max(h_abs, small)
        rejected = False
        while True:
            if h_abs < small:
                return y, nfev, False
            t_new = min(t + h_abs, t1)
            h = t_new - t
            h_abs = abs(h)
            K[0] = f
            for s in range(1, stages):
                stage_state(y, K, s, h, tmp, tab)
                mode_rhs(stage_time(t, h, s, tab), tmp, nodes, coef, Lk, gk, N0, n0, rate,
                         has_rate, hint, K[s])
            step_update(y, K, h, y_new, tab)
            mode_rhs(t + h, y_new, nodes, coef, Lk, gk, N0, n0, rate, has_rate, hint,
                     K[stages])
            nfev += stages
            err = error_norm(K, h, y, y_new, rtol, atol_v, tab)
            h_abs = next_step_size(h_abs, err, rejected)
            if err < 1.0:
                break
            rejected = True
        t = t_new
        y[:] = y_new
        f[:] = K[stages]
    return y, nfev, True
