"""Closed-form density of the linear compaction for the capped logarithmic map.

The map (:class:`~scan.observables.pbh.zeta_map.ZetaMap`, ``logarithmic`` with a finite
``slope_max``): 1/F'(zeta_G) = u = max(1 - lambda zeta_G, u_min), u_min = 1/slope_max < 1.
(C_G, zeta_G) are jointly Gaussian as in :mod:`scan.observables.pbh.ng_density`
(zeta_G ~ N(0, sigma_r^2), C_G | zeta_G ~ N(a zeta_G, t^2)), and
g(c) = int dzeta_G u p(c u, zeta_G) splits at zeta_c = (1 - u_min)/lambda (our derivation):

* the logarithmic part (u >= u_min): with the exponent A (u - mu)^2 + q_min of
  :func:`scan.observables.pbh.ng_density._ln_log_map`,
  g_1 = e^{-q_min/2} / (2 pi sqrt(det) |lambda|) int_{u_min}^inf u e^{-A (u - mu)^2/2} du,
  and int_{u_min}^inf = (e^{-x0^2} + sqrt(pi) x erfc(x0)) / A, x = mu sqrt(A/2),
  x0 = (u_min - mu) sqrt(A/2) (for u_min = 0 the plain map's half moment);
* the capped part (u = u_min, zeta_G beyond zeta_c):
  g_2 = u_min p_C(c u_min) P(zeta_G beyond zeta_c | C_G = c u_min), a Gaussian density
  times a normal tail (zeta_G | C_G = C ~ N(sigma_cr^2 C / sigma_c^2, s^2),
  s^2 = sigma_r^2 - sigma_cr^4 / sigma_c^2).

Every argument broadcasts (the stacked path passes lambda and u_min per pair).
tests/test_pbh_ng_capped.py checks it against direct quadrature of the integral.
:func:`capped_pairs` is the same formula compiled per pair (numba; why numba: see
:mod:`scan.observables.pbh.ng_ridge`), erfcx and ln Phi from the tables of
:mod:`scan.observables.pbh.erfc_tables`, asymptotic series in the far tails.

Units: all quantities [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy import special

from scan.observables.pbh.erfc_tables import erfcx_table, ln_ndtr_positive
from scan.observables.pbh.ng_ridge import FASTMATH
from scan.observables.pbh.vector_math import (
    NORMAL_MAX,
    NORMAL_MIN,
    X_MIN,
    exp_in_place,
    log_in_place,
)

#: The compiled form takes erfcx(x0) = e^{x0^2} erfc(x0) from its table below this;
#: above, its asymptotic series.
X0_COMPILED: float = 25.0
#: Below this x0, e^{-x0^2} < 2.4e-16 and the moment's e^{-x0^2} + sqrt(pi) (xm - x0)
#: erfc(x0) is 2 sqrt(pi) (xm - x0) to rounding (the dropped terms < 1.2e-17 relative).
X0_FLAT: float = -6.0
#: ... and ln Phi(z) from the tables above this z (-z^2/2 + ln(erfcx(-z/sqrt 2)/2) for
#: z < 0); below, its asymptotic series (:func:`_tail_ratio`).
Z_COMPILED: float = -37.0
#: Above this x0 the difference 1 - sqrt(pi) x0 erfcx(x0) is taken from its asymptotic
#: series (as :data:`scan.observables.pbh.ng_density._Z_SERIES`).
_Z_SERIES: float = 100.0


def _one_minus(z):
    """1 - sqrt(pi) z erfcx(z) [1] for z > 0, stable for large z (the series
    1/(2z^2) - 3/(4z^4) + 15/(8z^6) - 105/(16z^8), Abramowitz & Stegun 1964, eq. 7.1.23,
    from memory, as :func:`scan.observables.pbh.ng_density._series`)."""
    out = 1 - math.sqrt(math.pi) * z * special.erfcx(z)
    far = z > _Z_SERIES
    r = 1.0 / (z[far] * z[far])
    out[far] = r * (0.5 + r * (-0.75 + r * (1.875 - r * 6.5625)))
    return out


def ln_moment_above(A, mu, u_min):
    """ln int_{u_min}^inf u exp(-A (u - mu)^2 / 2) du [1] (u_min >= 0), stable for every
    sign of u_min - mu."""
    A, mu, u_min = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (A, mu, u_min)))
    root = np.sqrt(0.5 * A)
    x0 = (u_min - mu) * root
    xm = u_min * root
    out = np.empty(A.shape)
    low = x0 <= 0
    with np.errstate(over="ignore", under="ignore", divide="ignore"):
        z = x0[low]
        out[low] = np.log(np.exp(-z * z) + math.sqrt(math.pi) * (xm[low] - z)
                          * special.erfc(z))
        z = x0[~low]
        out[~low] = -z * z + np.log(_one_minus(z) + math.sqrt(math.pi) * xm[~low]
                                    * special.erfcx(z))
    return out - np.log(A)


def ln_capped_density(c, s_c2, s_cr, s_r2, lam, u_min):
    """ln g(c) [1] of the capped logarithmic map (see the module doc); ``u_min`` = 0 gives
    the plain logarithmic map.  Arguments broadcast; lambda != 0, 0 <= u_min < 1."""
    c, s_c2, s_cr, s_r2, lam, u_min = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (c, s_c2, s_cr, s_r2, lam, u_min)))
    a = s_cr / s_r2
    t2 = np.maximum(s_c2 - a * s_cr, 1e-300)
    ln_norm = -math.log(2 * math.pi) - 0.5 * np.log(s_r2 * t2)
    kappa = 1.0 / (lam * lam * s_r2)
    b = a / lam
    alpha = c + b
    A = kappa + alpha * alpha / t2
    mu = (kappa + alpha * b / t2) / A
    q_min = kappa * c * c / (t2 * A)
    ln_g1 = ln_norm - np.log(np.abs(lam)) - 0.5 * q_min + ln_moment_above(A, mu, u_min)
    with np.errstate(divide="ignore"):
        C = c * u_min
        rho = s_cr / s_c2
        s = np.sqrt(np.maximum(s_r2 - rho * s_cr, 1e-300))
        edge = (1 - u_min) / lam
        tail = special.log_ndtr(np.sign(lam) * (rho * C - edge) / s)
        ln_g2 = np.log(u_min) - 0.5 * np.log(2 * math.pi * s_c2) - 0.5 * C * C / s_c2 + tail
    return np.logaddexp(ln_g1, ln_g2)


def min_exponent(y_lo, y_hi, s_c2, s_cr, s_r2, lam, u_min) -> np.ndarray:
    """A lower bound nu^2 [1] on the joint exponent Q = zeta_G^2/sigma_r^2 + (C_G - a
    zeta_G)^2/t^2 over every point that the capped logarithmic map's density integrates
    for c in [``y_lo``, ``y_hi``] (our derivation; arguments broadcast, lambda != 0,
    0 <= u_min < 1).

    The points are C_G = c u, zeta_G = (1 - u)/lambda with u >= u_min (the logarithmic
    part) and C_G = c u_min with lambda zeta_G >= 1 - u_min (the capped part).  In the
    (C_G, zeta_G) plane the first is a truncated wedge, the second a half-strip, both
    convex and neither containing Q's minimum (0, 0) (C_G > 0 on both), so Q, a convex
    quadratic, is least on their edges:

    * c = y_lo or y_hi, u >= u_min: Q = A (u - mu)^2 + q_min (the exponent of
      :func:`ln_capped_density`), least at u = max(mu, u_min);
    * u = u_min, c in [y_lo, y_hi] (zeta_G = zeta_c = (1 - u_min)/lambda): a quadratic in
      c, least at c = a zeta_c / u_min clipped to the interval;
    * C_G = y_lo u_min or y_hi u_min, lambda zeta_G >= 1 - u_min: a quadratic in zeta_G,
      least at its conditional mean sigma_cr^2 C_G / sigma_c^2 if that lies on the
      half-line (value C_G^2 / sigma_c^2), else at zeta_c (an edge above).

    Without a cap (u_min = 0) the capped part is empty and the third edge is the apex
    C_G = 0, zeta_G = 1/lambda.  Compiled per element (numba); NaN gives 0 (no bound).
    """
    arrays = np.broadcast_arrays(*(np.asarray(v, dtype=float)
                                   for v in (y_lo, y_hi, s_c2, s_cr, s_r2, lam, u_min)))
    flat = [np.ascontiguousarray(v).ravel() for v in arrays]
    return _min_exponent_flat(*flat).reshape(arrays[0].shape)


@njit(cache=True, error_model="numpy")
def _min_exponent_flat(y_lo, y_hi, s_c2, s_cr, s_r2, lam, u_min):
    """:func:`min_exponent` over flat arrays of equal size."""
    out = np.empty(s_c2.size)
    for k in range(s_c2.size):
        a = s_cr[k] / s_r2[k]
        t2 = max(s_c2[k] - a * s_cr[k], 1e-300)
        kappa = 1.0 / (lam[k] * lam[k] * s_r2[k])
        b = a / lam[k]
        um = u_min[k]
        zeta_c = (1.0 - um) / lam[k]
        c_best = min(max(a * zeta_c / um if um > 0.0 else y_lo[k], y_lo[k]), y_hi[k])
        best = zeta_c * zeta_c / s_r2[k] + (c_best * um - a * zeta_c)**2 / t2
        for c in (y_lo[k], y_hi[k]):
            alpha = c + b
            A = kappa + alpha * alpha / t2
            mu = (kappa + alpha * b / t2) / A
            shortfall = 0.0 if um <= mu else um - mu        # NaN mu: NaN
            best = _least(best, kappa * c * c / (t2 * A) + A * shortfall * shortfall)
            C = c * um
            if um > 0.0 and lam[k] * (s_cr[k] * C / s_c2[k]) >= 1.0 - um:
                best = _least(best, C * C / s_c2[k])
        out[k] = 0.0 if math.isnan(best) else best
    return out


@njit(cache=True, error_model="numpy")
def _least(best, value):
    """min(best, value), NaN if either is NaN."""
    if math.isnan(best) or math.isnan(value):
        return math.nan
    return min(best, value)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _tail_moment(x0, xm):
    """(1 - sqrt(pi) x0 erfcx(x0)) + sqrt(pi) xm erfcx(x0) [1] for x0 >= ``X0_COMPILED``
    from the asymptotic series of erfcx (Abramowitz & Stegun 1964, eq. 7.1.23, from
    memory): sqrt(pi) x erfcx(x) = 1 - 1/(2x^2) + 3/(4x^4) - 15/(8x^6) + 105/(16x^8),
    first omitted term 945/(32 x^10) < 4e-13 relative at x = 25."""
    r = 1.0 / (x0 * x0)
    series = 1.0 + r * (-0.5 + r * (0.75 + r * (-1.875 + r * 6.5625)))
    return r * (0.5 + r * (-0.75 + r * (1.875 - r * 6.5625))) + xm / x0 * series


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _tail_ratio(z):
    """Phi(z) e^{z^2/2} [1] for z < ``Z_COMPILED`` from the asymptotic series
    (1 - 1/z^2 + 3/z^4 - 15/z^6 + 105/z^8) / (-z sqrt(2 pi)) (Abramowitz & Stegun 1964,
    eq. 26.2.12, from memory; first omitted term 945/z^10 < 2e-13 relative there)."""
    r = 1.0 / (z * z)
    return (1.0 + r * (-1.0 + r * (3.0 + r * (-15.0 + 105.0 * r)))) \
        / (-z * math.sqrt(2.0 * math.pi))


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _ln_ndtr(z):
    """ln Phi(z) [1]: ln(erfc(-z/sqrt 2)/2) above ``Z_COMPILED``, below it
    -z^2/2 + ln(:func:`_tail_ratio`) (checked against scipy's log_ndtr in
    tests/test_pbh_ng_capped.py)."""
    if z >= Z_COMPILED:
        return math.log(0.5 * math.erfc(-z / math.sqrt(2.0)))
    return -0.5 * z * z + math.log(_tail_ratio(z))


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def capped_pairs(c, s_c2, s_cr, s_r2, lam, u_min, shift):
    """ln g [1] of the capped logarithmic map at the nodes ``c`` (1 or n, n_y) for pairs
    (n,) with their own ``lam`` and ``u_min`` (n,), plus ``shift``: :func:`ln_capped_density`
    compiled per pair (the far tails x0 >= ``X0_COMPILED`` and z < ``Z_COMPILED`` from
    asymptotic series).

    Each part is kept as ln g_k = lin_k + ln(arg_k) (g_1: the moment over A; g_2: the
    normal tail), and the logarithms, then g_1 (+) g_2 = top + ln(e^{g_1 - top} + e^{g_2
    - top}), are taken in vectorised passes (:mod:`scan.observables.pbh.vector_math`)
    instead of libm's per element: 4 logarithms and 2 exponentials of each element's 9
    libm calls (2 erfc and an exp stay; without any cap, u_min = 0, only g_1's).  Measured
    on the 7.3k pairs of tests/bench/bench_pbh_model_map.py (min of 40, alternating, 2
    runs each): capped 5.7 -> 5.4 ms, lambda per spectrum without a cap 2.4 -> 2.0 ms
    (the vectorised passes for g_2 on every pair made it 4.1 ms); ln g within 9e-13 of
    libm's.  The sum g_1 + g_2 in place of the two arrays (:func:`_log_add`, no
    temporaries of their size): another 16-18 % off (4.0 -> 3.3 and 6.2 -> 5.1 ms in two
    runs, one process each), bit-identical.  erfcx and ln Phi (z >= 0) from polynomial
    tables (:mod:`scan.observables.pbh.erfc_tables`) instead of libm's erfc (and its exp),
    e^{-x0^2} dropped below ``X0_FLAT``, the far normal tail's logarithms deferred: no
    erfc left, one exp on -6 < x0 <= 0 only."""
    n, m = s_c2.size, c.shape[1]
    per_pair = c.shape[0] > 1
    lin = np.empty((2, n, m))
    arg = np.empty((2, n, m))
    rt_pi = math.sqrt(math.pi)
    inv_rt2 = 1.0 / math.sqrt(2.0)
    for i in range(n):
        a = s_cr[i] / s_r2[i]
        t2 = max(s_c2[i] - a * s_cr[i], 1e-300)
        lm, um = lam[i], u_min[i]
        base = -math.log(2.0 * math.pi) - 0.5 * math.log(s_r2[i] * t2) - math.log(abs(lm))
        kappa = 1.0 / (lm * lm * s_r2[i])
        b = a / lm
        rho = s_cr[i] / s_c2[i]
        s = math.sqrt(max(s_r2[i] - rho * s_cr[i], 1e-300))
        edge = (1.0 - um) / lm
        sign = 1.0 if lm > 0 else -1.0
        cap_base = (math.log(um) if um > 0 else -math.inf) \
            - 0.5 * math.log(2.0 * math.pi * s_c2[i])
        row = i if per_pair else 0
        for j in range(m):
            cj = c[row, j]
            alpha = cj + b
            A = kappa + alpha * alpha / t2
            mu = (kappa + alpha * b / t2) / A
            root = math.sqrt(0.5 * A)
            x0 = (um - mu) * root
            xm = um * root
            g1 = base - 0.5 * kappa * cj * cj / (t2 * A) + shift
            if x0 <= X0_FLAT:
                inner = 2.0 * rt_pi * (xm - x0)
            elif x0 <= 0.0:
                e = math.exp(-x0 * x0)
                inner = e + rt_pi * (xm - x0) * (2.0 - e * erfcx_table(-x0))
            elif x0 < X0_COMPILED:
                ex = erfcx_table(x0)
                inner = (1.0 - rt_pi * x0 * ex) + rt_pi * xm * ex
                g1 -= x0 * x0
            else:
                inner = _tail_moment(x0, xm)
                g1 -= x0 * x0
            _defer_log(lin, arg, 0, i, j, g1, inner / A)
            if um > 0.0:
                C = cj * um
                z = sign * (rho * C - edge) / s
                g2 = cap_base - 0.5 * C * C / s_c2[i] + shift
                if z >= 0.0:
                    _defer_log(lin, arg, 1, i, j, g2 + ln_ndtr_positive(z), 1.0)
                elif z >= Z_COMPILED:       # Phi(z) = e^{-w^2} erfcx(w) / 2, w = -z/sqrt 2
                    w = -z * inv_rt2
                    _defer_log(lin, arg, 1, i, j, g2 - w * w, 0.5 * erfcx_table(w))
                else:
                    _defer_log(lin, arg, 1, i, j, g2 - 0.5 * z * z, _tail_ratio(z))
            else:
                _defer_log(lin, arg, 1, i, j, -math.inf, 1.0)
    if not np.any(u_min > 0.0):     # no cap: ln g_1 alone
        return lin[0] + log_in_place(arg[0])
    log_in_place(arg)
    return _log_add(lin, arg)


@njit(cache=True, error_model="numpy")
def _log_add(lin, arg):
    """ln(g_1 + g_2) [1], shape (n, m), from ln g_k = lin[k] + arg[k] (arg: logarithms
    already), in place of both (the result in ``arg[0]``): top + ln(e^{g_1 - top} +
    e^{g_2 - top}) with the exponentials and the logarithm in vectorised passes; NaN and
    infinite tops pass through (top = -inf: g = 0)."""
    g_1, g_2 = lin[0].reshape(-1), lin[1].reshape(-1)
    top, a_2 = arg[0].reshape(-1), arg[1].reshape(-1)
    for k in range(top.size):
        x, y = g_1[k] + top[k], g_2[k] + a_2[k]
        t = x if (x > y or math.isnan(x)) else y           # NaN propagates
        top[k] = t
        g_1[k] = max(x - t, X_MIN) if abs(t) < math.inf else 0.0
        g_2[k] = max(y - t, X_MIN) if abs(t) < math.inf else 0.0
    exp_in_place(lin)               # e^{g_k - top}: the larger is 1, the sum in [1, 2]
    for k in range(top.size):
        g_1[k] += g_2[k]
    log_in_place(g_1)
    for k in range(top.size):
        if abs(top[k]) < math.inf:
            top[k] += g_1[k]
    return arg[0]


@njit(cache=True, error_model="numpy")
def _defer_log(lin, arg, k, i, j, value, argument):
    """Record ln g_k = ``value`` + ln(``argument``) at (i, j): the argument for the
    vectorised logarithm where it is a positive normal double, else its libm logarithm
    (or -inf for 0) added to ``value`` now."""
    if NORMAL_MIN <= argument <= NORMAL_MAX:
        lin[k, i, j], arg[k, i, j] = value, argument
    else:
        lin[k, i, j], arg[k, i, j] = value + (-math.inf if argument <= 0.0
                                              else math.log(argument)), 1.0   # NaN stays
