"""The induced-GW quadrature nodes of one output k, compiled (numba).

The node placement is the one :mod:`scan.observables.sigw` documents (Gauss–Legendre
panels in t graded geometrically towards the log resonance t = √3 − 1, uniform in
ln(1 + t) above it, s-panels following the table's ln k spacing); this module only runs
it as compiled loops instead of per-panel numpy calls (the Python version spent ~10⁵ small
numpy calls per spectrum).  Nodes come out in the same order with the same arithmetic, so
the quadrature sums are unchanged to rounding.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

#: Location of the log resonance u + v = sqrt(3) in t.
T_RESONANCE: float = math.sqrt(3.0) - 1.0
#: Floor of k v before its logarithm (v → 0 at the table's lower end).
TINY = 1e-300
_SQRT3 = math.sqrt(3.0)


@njit(cache=True, error_model="numpy")
def kernel_value(u: float, v: float) -> float:
    """Oscillation-averaged RD kernel K(u, v) with its 1/12 (Kohri & Terada 2018,
    arXiv:1804.08577, Eq. 29; Espinosa, Racco & Riotto 2018, arXiv:1804.07732)."""
    a = u * u + v * v - 3.0
    g = (4.0 * v * v - (1.0 + v * v - u * u) ** 2) / (4.0 * u * v)
    p = 3.0 * a / (4.0 * (u * u * u) * (v * v * v))
    log = math.log(abs((3.0 - (u + v) ** 2) / (3.0 - (u - v) ** 2)))
    brace = (-4.0 * u * v + a * log) ** 2
    if u + v > _SQRT3:
        brace += (math.pi * a) ** 2
    return g * g * p * p * brace / 12.0


@njit(cache=True)
def _linspace_into(a: float, b: float, n: int, out, start: int) -> int:
    """numpy.linspace(a, b, n + 1)[1:] written at out[start:]; returns the next index."""
    step = (b - a) / n
    for i in range(1, n):
        out[start + i - 1] = i * step + a
    out[start + n - 1] = b
    return start + n


@njit(cache=True)
def t_panels(t_lo: float, t_hi: float, h: float, grade: int):
    """Panel edges in t on [t_lo, t_hi]: graded towards √3 − 1, uniform in ln(1+t) above,
    then panels wider than min(0.4, 3h) in ln(1+t) split into equal pieces."""
    r = 0.3
    width = min(0.4, 3.0 * h)
    right_end = T_RESONANCE * (1.0 + r ** 0.0)
    tau0 = math.log1p(right_end)
    tau1 = math.log1p(max(t_hi, right_end))
    n_tau = max(1, math.ceil((tau1 - tau0) / width))
    raw = np.empty(2 * grade + 3 + n_tau)
    for i in range(grade + 1):
        raw[i] = T_RESONANCE * (1.0 - r ** float(i))
        raw[grade + 2 + i] = T_RESONANCE * (1.0 + r ** float(grade - i))
    raw[grade + 1] = T_RESONANCE
    upper = np.empty(n_tau)
    _linspace_into(tau0, tau1, n_tau, upper, 0)
    for i in range(n_tau):
        raw[2 * grade + 3 + i] = math.expm1(upper[i])
    for i in range(raw.size):
        raw[i] = min(max(raw[i], t_lo), t_hi)
    raw = np.sort(raw)
    m = 1
    for i in range(1, raw.size):
        if raw[i] != raw[m - 1]:
            raw[m] = raw[i]
            m += 1
    tau = np.empty(m)
    total = 1
    for i in range(m):
        tau[i] = math.log1p(raw[i])
        if i:
            total += max(1, math.ceil((tau[i] - tau[i - 1]) / width))
    out = np.empty(total)
    out[0] = tau[0]
    j = 1
    for i in range(1, m):
        j = _linspace_into(tau[i - 1], tau[i], max(1, math.ceil((tau[i] - tau[i - 1]) / width)),
                           out, j)
    for i in range(total):
        out[i] = math.expm1(out[i])
    return out


@njit(cache=True)
def _s_count(a: float, b: float, h: float, v_floor: float) -> int:
    """Number of s-panels for the t-panel [a, b] (follows the spread of ln ku, ln kv)."""
    tm = 0.5 * (a + b)
    spread = max(math.log((tm + 2.0) / (tm + 1.0)),
                 math.log((tm + 1.0) / max(tm, 2.0 * v_floor, 0.02)))
    return int(min(48, max(1, math.ceil(spread / (2.0 * h)))))


@njit(cache=True)
def _walk(table, x: float, i: int, last: int) -> int:
    """Interval of x in the sorted ``table`` (clipped to [0, last]), walking from i."""
    while i < last and table[i + 1] <= x:
        i += 1
    while i > 0 and table[i] > x:
        i -= 1
    return i


@njit(cache=True, error_model="numpy")
def nodes_for_k(k: float, lnk_in, h: float, xg, wg, grade: int):
    """Nodes of one output k inside the table, located in it.

    Returns
    -------
    iu, fu, iv, fv : ndarray
        Lower table index and fraction (in ln k) of k u and k v per node.
    w : ndarray
        Quadrature weight times K(u, v) per node (zero and non-finite ones dropped).
    t, s, q : ndarray
        The node's (t, s) and its quadrature weight alone (w = q K(u, v)).
    """
    lo, hi = lnk_in[0], lnk_in[-1]
    t_lo = max(0.0, 2.0 * math.exp(lo) / k - 1.0)
    t_hi = 2.0 * math.exp(hi) / k - 1.0
    if t_hi <= t_lo:
        return (np.empty(0, np.int32), np.empty(0), np.empty(0, np.int32), np.empty(0),
                np.empty(0), np.empty(0), np.empty(0), np.empty(0))
    edges = t_panels(t_lo, t_hi, h, grade)
    v_floor = math.exp(lo) / k
    g = xg.size
    total = 0
    for p in range(edges.size - 1):
        total += g * g * _s_count(edges[p], edges[p + 1], h, v_floor)
    iu = np.empty(total, np.int32)
    iv = np.empty(total, np.int32)
    fu, fv, w = np.empty(total), np.empty(total), np.empty(total)
    tn, sn, qn = np.empty(total), np.empty(total), np.empty(total)
    last = lnk_in.size - 2
    n, i, j = 0, 0, 0  # i, j: the table intervals of the previous node (walks start there)
    for p in range(edges.size - 1):
        a, b = edges[p], edges[p + 1]
        n_s = _s_count(a, b, h, v_floor)
        ds = 1.0 / n_s
        for it in range(g):
            t, tw = a + (b - a) * xg[it], (b - a) * wg[it]
            for js in range(n_s):
                s0 = js * ds if js < n_s else 1.0
                s1 = (js + 1) * ds if js + 1 < n_s else 1.0
                for ks in range(g):
                    s = s0 + (s1 - s0) * xg[ks]
                    u, v = 0.5 * (t + s + 1.0), 0.5 * (t - s + 1.0)
                    lu, lv = math.log(k * u), math.log(max(k * v, TINY))
                    if not (lv >= lo and lu <= hi and v > 0.0):
                        continue
                    q = tw * ((s1 - s0) * wg[ks])
                    wk = q * kernel_value(u, v)
                    if not (math.isfinite(wk) and wk != 0.0):
                        continue
                    i = _walk(lnk_in, lu, i, last)
                    j = _walk(lnk_in, lv, j, last)
                    iu[n], iv[n], w[n] = i, j, wk
                    tn[n], sn[n], qn[n] = t, s, q
                    fu[n] = (lu - lnk_in[i]) / (lnk_in[i + 1] - lnk_in[i])
                    fv[n] = (lv - lnk_in[j]) / (lnk_in[j + 1] - lnk_in[j])
                    n += 1
    return iu[:n], fu[:n], iv[:n], fv[:n], w[:n], tn[:n], sn[:n], qn[:n]


@njit(cache=True, error_model="numpy")
def kernel_array(u, v):
    """:func:`kernel_value` over flat arrays."""
    out = np.empty(u.size)
    for i in range(u.size):
        out[i] = kernel_value(u[i], v[i])
    return out


@njit(cache=True)
def interpolation_entries(iu, fu, iv, fv):
    """Columns and values of the sparse map ln P (table) -> ln P(ku) + ln P(kv), four a
    node in the order (iu, iu + 1, iv, iv + 1) with linear weights in ln k."""
    n = iu.size
    cols = np.empty(4 * n, np.int32)
    vals = np.empty(4 * n)
    for j in range(n):
        cols[4 * j], cols[4 * j + 1] = iu[j], iu[j] + 1
        cols[4 * j + 2], cols[4 * j + 3] = iv[j], iv[j] + 1
        vals[4 * j], vals[4 * j + 1] = 1.0 - fu[j], fu[j]
        vals[4 * j + 2], vals[4 * j + 3] = 1.0 - fv[j], fv[j]
    return cols, vals
