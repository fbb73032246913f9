"""Compiled closed forms of the stacked non-Gaussian path (numba): the logarithmic map's
density per pair and the local map's bound on the joint exponent along C_G F' = c.

The logarithmic map's closed form per pair (:func:`log_map_density`, the formula of
:func:`scan.observables.pbh.ng_density._ln_log_map`) takes ln(e^{-x^2} + sqrt(pi) x
erfc(-x)) from a piecewise polynomial table below x = 6 (libm's erfc costs ~30 ns, the
table ~5); :func:`near_exponent_bound` serves
:func:`scan.observables.pbh.ng_density.ln_density_bound`.  Why numba: see
:mod:`scan.observables.pbh.ng_ridge`.

Units: all quantities [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy import special

from scan.observables.pbh.erfc_tables import piecewise_table, piecewise_value
from scan.observables.pbh.ng_ridge import FASTMATH
from scan.observables.pbh.vector_math import NORMAL_MAX, NORMAL_MIN, log_in_place

#: Above this x = mu sqrt(A/2) >= 0, erfc(-x) = 2 and e^{-x^2} round away (as
#: :func:`scan.observables.pbh.ng_density._ln_half_moment`).
_X_FLAT: float = 6.0
#: ln H(x), H = e^{-x^2} + sqrt(pi) x erfc(-x), on [0, _X_FLAT]: ``_H_PIECES`` equal
#: pieces, each a degree-``_H_DEGREE`` polynomial in t in [-1, 1] (interpolating at the
#: Chebyshev points of the first kind, then in powers of t).
_H_PIECES: int = 32
_H_DEGREE: int = 9


def _ln_h(x: np.ndarray) -> np.ndarray:
    """ln H(x) [1], H = e^{-x^2} + sqrt(pi) x erfc(-x) (scipy's erfc)."""
    return np.log(np.exp(-x * x) + math.sqrt(math.pi) * x * special.erfc(-x))


def half_moment_table() -> np.ndarray:
    """Coefficients (``_H_PIECES``, ``_H_DEGREE`` + 1) [1] of ln H on [0, 6] in powers of t,
    lowest first (:func:`~scan.observables.pbh.erfc_tables.piecewise_table`); ln H is
    entire, and the interpolant is within 8 ulp of scipy's erfc-based value
    (tests/test_pbh_ng_stack.py)."""
    return piecewise_table(_ln_h, _X_FLAT, _H_PIECES, _H_DEGREE)


@njit(cache=True, error_model="numpy")
def ln_half_moment_table(x, table):
    """ln H(x) [1] for 0 <= x < ``_X_FLAT`` from :func:`half_moment_table`."""
    return piecewise_value(x, table, _X_FLAT)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def log_map_density(c, s_c2, s_cr, s_r2, lam, shift, table):
    """ln g [1] of the logarithmic map at the nodes ``c`` (1 or n, n_y: shared or per pair)
    for every pair of variances (n,), shape (n, n_y), plus ``shift``: the closed form of
    :func:`scan.observables.pbh.ng_density._ln_log_map`, the per-pair parts computed once,
    with ln int_0^inf u e^{-A (u - mu)^2/2} du = ln H(x) - ln A, x = mu sqrt(A/2) =
    (kappa + alpha b / t^2) / sqrt(2 A): ln H from ``table``
    (:func:`half_moment_table`) below x = 6, ln(2 sqrt(pi) x) above (where erfc(-x) = 2
    and e^{-x^2} round away).

    Elements with mu < 0 (erfcx needed, which numba lacks) are returned as NaN with a
    True in the second output, for the caller to fill from the array code.

    The logarithm of each element (of 1/A, or 2 sqrt(pi) x / A above x = 6) is taken in
    one vectorised pass afterwards (:func:`~scan.observables.pbh.vector_math.log_in_place`
    instead of libm's per element: 1.7 -> 1.4 ms on the benchmark's 7.4k logarithmic
    pairs, min of 40, alternating; ln g within 6e-14 of libm's at |ln g| up to 5e3)."""
    n, m = s_c2.size, c.shape[1]
    per_pair = c.shape[0] > 1
    out = np.empty((n, m))
    arg = np.empty((n, m))          # the argument of each element's logarithm
    todo = np.zeros((n, m), dtype=np.bool_)
    two_rt_pi = 2.0 * math.sqrt(math.pi)
    for i in range(n):
        a = s_cr[i] / s_r2[i]
        t2 = max(s_c2[i] - a * s_cr[i], 1e-300)
        base = shift - math.log(2.0 * math.pi) - 0.5 * math.log(s_r2[i] * t2) \
            - math.log(abs(lam))
        kappa = 1.0 / (lam * lam * s_r2[i])
        b = a / lam
        inv_t2 = 1.0 / t2
        row = i if per_pair else 0
        for j in range(m):
            cj = c[row, j]
            alpha = cj + b
            A = kappa + alpha * alpha * inv_t2
            inv_A = 1.0 / A
            num = kappa + alpha * (b * inv_t2)
            x = num / math.sqrt(2.0 * A)
            if not x >= 0.0:
                out[i, j] = math.nan
                arg[i, j] = 1.0
                todo[i, j] = True
                continue
            q_min = (kappa * inv_t2) * (cj * cj) * inv_A
            if x >= _X_FLAT:
                out[i, j] = base - 0.5 * q_min
                arg[i, j] = two_rt_pi * x * inv_A
            else:
                out[i, j] = base - 0.5 * q_min + ln_half_moment_table(x, table)
                arg[i, j] = inv_A
            if not NORMAL_MIN <= arg[i, j] <= NORMAL_MAX:   # outside log_in_place's range
                out[i, j] += math.log(arg[i, j])
                arg[i, j] = 1.0
    out += log_in_place(arg)
    return out, todo


#: Halvings of the bracket around the minimum of h in ln u: the bracket is then 2^-5 of
#: its start (ln 4 typically), and the tangents' crossing lies below the minimum by
#: ~h'' u^2 (0.043)^2 / 8 ~ 2.3e-4 h'' u^2 (the crossing bounds a convex h from below for
#: any bracket: fewer halvings loosen the bound, never break it).  Measured on the
#: benchmark's spectra (ngspeed5): 8 -> 5 halvings take ~35 % off this search and the cut
#: keeps 2464 instead of 2451 pairs at f_NL = 1, 1701 instead of 1695 at -1; 3 halvings
#: keep 2609 and 1777; 16 cost twice as much as 8 for one pair fewer (ngtable).
N_HALVE: int = 5


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _near_slope(u, inv_p2s, c, b, inv_t2):
    """(h, h') of h(u) = (u - 1)^2 / (p^2 sigma_r^2) + max(c/u - b (u - 1), 0)^2 / t^2."""
    phi = c / u - b * (u - 1.0)
    plus = max(phi, 0.0)
    h = (u - 1.0) * (u - 1.0) * inv_p2s + plus * plus * inv_t2
    dh = 2.0 * (u - 1.0) * inv_p2s + 2.0 * plus * (-c / (u * u) - b) * inv_t2
    return h, dh


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def near_exponent_bound(p, c, a, t2, s_r2):
    """A lower bound [1] on min over u > 0 of the convex h(u) (:func:`_near_slope`) per
    element, p = (6/5) f_NL != 0, b = a/p: the near branch's joint exponent on the curve
    C_G F' = c, with u = F' (derivation in
    :func:`scan.observables.pbh.ng_density.ln_density_bound`).  The minimum is bracketed
    (h' < 0 as u -> 0, > 0 for large u), the bracket halved ``N_HALVE`` times in ln u, and the
    bound taken where the tangents at its ends cross (h is convex: it lies above both)."""
    out = np.empty(c.size)
    for i in range(c.size):
        inv_p2s = 1.0 / (p * p * s_r2[i])
        b, inv_t2 = a[i] / p, 1.0 / t2[i]
        lo, hi = 0.5, 2.0
        for _ in range(200):
            if _near_slope(lo, inv_p2s, c[i], b, inv_t2)[1] <= 0.0:
                break
            lo *= 0.5
        for _ in range(200):
            if _near_slope(hi, inv_p2s, c[i], b, inv_t2)[1] >= 0.0:
                break
            hi *= 2.0
        for _ in range(N_HALVE):
            mid = math.sqrt(lo * hi)
            if _near_slope(mid, inv_p2s, c[i], b, inv_t2)[1] <= 0.0:
                lo = mid
            else:
                hi = mid
        h_lo, d_lo = _near_slope(lo, inv_p2s, c[i], b, inv_t2)
        h_hi, d_hi = _near_slope(hi, inv_p2s, c[i], b, inv_t2)
        if d_lo < d_hi:
            x = (h_hi - h_lo + d_lo * lo - d_hi * hi) / (d_lo - d_hi)
            bound = h_lo + d_lo * (min(max(x, lo), hi) - lo)
        else:
            bound = min(h_lo, h_hi)
        out[i] = max(bound, 0.0) * (1.0 - 1e-12)
    return out


@njit(cache=True, error_model="numpy")
def bound_from_exponent(nu2, y, s_c2, s_cr, s_r2, split, shift):
    """-(1 - e) nu^2/2 - ln e + ln(prefactor) + ``shift`` [1] per element of flat arrays of
    equal size: the bound of :func:`scan.observables.pbh.ng_density.ln_density_bound`
    from a lower bound ``nu2`` on the joint exponent, at c = ``y``; e = ``split``, or
    2/nu^2 clipped to (0, 1] for a ``split`` <= 0."""
    out = np.empty(nu2.size)
    c_e = math.sqrt(2.0 * math.pi / math.e)
    for k in range(nu2.size):
        a = s_cr[k] / s_r2[k]
        t = math.sqrt(max(s_c2[k] - a * s_cr[k], 1e-300))
        s_r = math.sqrt(s_r2[k])
        e = split if split > 0.0 else min(max(2.0 / nu2[k], 1e-300), 1.0)
        pref = (2.0 * abs(a) * s_r2[k] + t * s_r * c_e) / (2.0 * math.pi * s_r * t * y[k])
        out[k] = -(1.0 - e) * 0.5 * nu2[k] - math.log(e) + math.log(pref) + shift
    return out
