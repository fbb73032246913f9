"""The local map's per-branch ridge integral, compiled (numba): the hot loop of
:func:`scan.observables.pbh.ng_density._ln_local`.

The algorithm is :func:`~scan.observables.pbh.ng_density._branch` (three damped Newton
searches for up to two ridges of psi -- from the conditional mean, its mirror image and
the curve C_G = c / F' = a zeta_G -- a partition of unity between the two highest, a
Gauss-Hermite rule centred on each), written as one scalar loop per element.  As array code it made ~30 passes over
(elements x rule nodes) with a dozen temporaries each; compiled, every element's ridges and
rules stay in registers (ratio measured side by side in tests/bench/bench_pbh_nongaussian.py).
Newton stops once a step moves x by less than 1e-13 (|x| + s) (s the conditional width;
further steps would change x at rounding level; f_PBH moved by <= 3e-13 relative, measured).

Where one ridge carries the integral the rule is summed without a logarithm per node
(:func:`_single_rule`).

Why numba: the loop has data-dependent exits (Newton convergence, one or two ridges) that
array code pays for on every element; numba ships wheels (no compiler at install) and
``cache=True`` keeps the machine code on disk (see :mod:`scan.ode`).

Units: all quantities [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

#: Floating-point freedoms given to LLVM: contraction into fused multiply-adds, reciprocal
#: multiplication for division and re-association (rounding-level changes); not the
#: no-NaN/no-inf assumptions, which the finiteness checks rely on.
FASTMATH = {"contract", "arcp", "reassoc"}
#: Newton steps towards a ridge from the conditional-mean seeds (at most; module doc).
N_NEWTON: int = 6
#: ... and from the curve seed (:func:`_curve_root`), which can start several widths away.
N_NEWTON_CURVE: int = 16
#: Step halvings when a Newton step would lower psi (2^-30: below any ridge width).
N_HALVINGS: int = 30
#: A second ridge this far below the first in ln integrand is not integrated separately.
RIDGE_GAP: float = 50.0


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _slopes(x, p, q, c, a, t2, s_r2):
    """psi' and psi'' at zeta_G = x (psi: :func:`_psi0`); F' = 1 + x (p + q x)."""
    f1 = 1.0 + x * (p + q * x)
    f2 = p + 2.0 * q * x
    f3 = 2.0 * q
    r = 1.0 / f1
    h = c * r - a * x
    h1 = -c * f2 * r * r - a
    h2 = -c * f3 * r * r + 2.0 * c * f2 * f2 * r * r * r
    d1 = -x / s_r2 - h * h1 / t2 - f2 * r
    d2 = -1.0 / s_r2 - (h1 * h1 + h * h2) / t2 - (f3 * f1 - f2 * f2) * r * r
    return d1, d2


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _psi0(x, p, q, c, a, t2, s_r2):
    """psi, the ln integrand over zeta_G = x (F' = 1 + x (p + q x))."""
    f1 = 1.0 + x * (p + q * x)
    h = c / f1 - a * x
    return -0.5 * x * x / s_r2 - 0.5 * h * h / t2 - math.log(abs(f1))


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _clip(x, lo, hi):
    return min(max(x, lo), hi)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _ridge(x, lo, hi, s, p, q, c, a, t2, s_r2, steps=6):
    """Newton steps on psi from x within [lo, hi]: (ridge, width 1/sqrt(-psi''), psi).

    A step longer than one Laplace width 1/sqrt(-psi'') that lowers psi is halved until
    it does not (at most ``N_HALVINGS`` times, :func:`_no_descent`):
    psi falls to -inf at a root of F', and an undamped step from a concave but
    non-quadratic stretch was measured to jump onto the root (ln g off by ~1e15 for
    f_NL = 10, sigma_r^2 = 0.27)."""
    for _ in range(steps):
        d1, d2 = _slopes(x, p, q, c, a, t2, s_r2)
        if math.isfinite(d1) and math.isfinite(d2) and d2 < 0:
            step = -d1 / d2
            local = step * step * -d2 <= 1.0       # within one Laplace width: no check
            if step * step * -d2 <= 1e-16:         # 1e-8 widths: the rule cannot tell
                x = _clip(x + step, lo, hi)
                break
        elif math.isnan(d1) or d1 == 0:
            step, local = 0.0, True
        else:
            step, local = math.copysign(s, d1), False
        new = _clip(x + step, lo, hi)
        if not local:
            new = _no_descent(x, new, p, q, c, a, t2, s_r2)
        if abs(new - x) <= 1e-13 * (abs(x) + s):
            x = new
            break
        x = new
    d2 = _slopes(x, p, q, c, a, t2, s_r2)[1]
    width = 1.0 / math.sqrt(abs(d2)) if (math.isfinite(d2) and d2 < 0) else s
    psi = _psi0(x, p, q, c, a, t2, s_r2)
    return x, min(width, 4.0 * s), psi if math.isfinite(psi) else -1e300


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _no_descent(x, new, p, q, c, a, t2, s_r2):
    """``new``, moved halfway back towards ``x`` until psi there is not below psi(x)."""
    psi = _psi0(x, p, q, c, a, t2, s_r2)
    if not math.isfinite(psi):
        return new
    for _ in range(N_HALVINGS):
        if _psi0(new, p, q, c, a, t2, s_r2) >= psi:
            break
        new = 0.5 * (x + new)
    return new


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _logaddexp(u, v):
    top = max(u, v)
    if top == -math.inf:
        return -math.inf
    return top + math.log(math.exp(u - top) + math.exp(v - top))


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _rule(which, ridges, apart, lo, hi, gx, glw, p, q, c, a, t2, s_r2):
    """ln of the Gauss-Hermite rule centred on ridge ``which`` over (lo, hi), weighted by
    that ridge's share of the partition of unity where there are two."""
    x, width = ridges[which, 0], ridges[which, 1]
    scale = math.sqrt(2.0) * width
    top, total = -math.inf, 0.0          # running log-sum-exp: total = sum exp(t - top)
    for j in range(gx.size):
        node = x + scale * gx[j]
        t = _psi0(node, p, q, c, a, t2, s_r2) + glw[j]
        if apart:
            q0 = ridges[0, 2] - 0.5 * ((node - ridges[0, 0]) / ridges[0, 1]) ** 2
            q1 = ridges[1, 2] - 0.5 * ((node - ridges[1, 0]) / ridges[1, 1]) ** 2
            t += (q0 if which == 0 else q1) - _logaddexp(q0, q1)
        if not (math.isfinite(t) and node > lo and node < hi):
            continue
        if t > top:
            total = total * math.exp(top - t) + 1.0
            top = t
        else:
            total += math.exp(t - top)
    if top == -math.inf:
        return -math.inf
    return math.log(scale) + top + math.log(total)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _single_rule(x, width, lo, hi, gx, gw_e, p, q, c, a, t2, s_r2):
    """ln of the Gauss-Hermite rule centred on the one ridge x (width ``width``) over
    (lo, hi): :func:`_rule` without the partition of unity, summed as
    sum_j w_j e^{x_j^2} e^{E_j - E_0} / |F'_j| with E the Gaussian exponent and E_0 its value
    at the ridge (``gw_e`` = w_j e^{x_j^2}), i.e. no logarithm per node.  NaN where an
    exponent difference exceeds 700 or the sum is 0 (the caller then uses :func:`_rule`)."""
    scale = math.sqrt(2.0) * width
    h0 = c / (1.0 + x * (p + q * x)) - a * x
    e0 = -0.5 * x * x / s_r2 - 0.5 * h0 * h0 / t2
    total = 0.0
    for j in range(gx.size):
        node = x + scale * gx[j]
        f1 = 1.0 + node * (p + q * node)
        h = c / f1 - a * node
        e = -0.5 * node * node / s_r2 - 0.5 * h * h / t2 - e0
        if not (math.isfinite(e) and node > lo and node < hi and f1 != 0.0):
            continue
        if e > 700.0:
            return math.nan
        total += gw_e[j] * math.exp(e) / abs(f1)
    if not (total > 0.0 and math.isfinite(e0)):
        return math.nan
    return math.log(scale) + e0 + math.log(total)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _curve_root(lo, hi, p, q, c, a, fallback):
    """The zeta_G in (lo, hi) where C_G = c / F'(zeta_G) meets its conditional mean a zeta_G
    (a root of a zeta_G (1 + p zeta_G) = c for g_NL = 0), or where they come closest
    (F'^2 = -c p / a) if they never meet in the branch, else ``fallback``.

    Where C_G is much better determined than zeta_G (t^2 << a^2 sigma_r^2) the ridge of
    psi hugs this curve, far from the linear conditional mean the other seeds start from;
    Newton from there was measured to stop on the wrong side of it (ln g low by up to
    ~4e3 for f_NL = 5, sigma_c^2 / sigma_r^2 ~ 1e-2)."""
    if a == 0.0:
        return fallback
    if q != 0.0:
        return _cubic_curve_root(lo, hi, p, q, c, a, fallback)
    if p == 0.0:
        return c / a
    disc = 1.0 + 4.0 * p * c / a
    if disc >= 0.0:
        root = math.sqrt(disc)
        for x in ((-1.0 + root) / (2.0 * p), (-1.0 - root) / (2.0 * p)):
            if lo < x < hi:
                return x
    closest = -c * p / a                 # F'^2 where |c / F' - a zeta_G| is least
    if closest > 0.0:
        for f1 in (math.sqrt(closest), -math.sqrt(closest)):
            x = (f1 - 1.0) / p
            if lo < x < hi:
                return x
    return fallback


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _cubic_curve_root(lo, hi, p, q, c, a, fallback):
    """The real root in (lo, hi) of a zeta_G (1 + p zeta_G + q zeta_G^2) = c nearest to 0
    (the most probable zeta_G on the curve), else ``fallback``; trigonometric or Cardano
    form of the depressed cubic (standard closed forms)."""
    b2, b1, b0 = p / q, 1.0 / q, -c / (a * q)          # x^3 + b2 x^2 + b1 x + b0 = 0
    shift = b2 / 3.0
    pp = b1 - b2 * b2 / 3.0
    qq = 2.0 * b2 ** 3 / 27.0 - b2 * b1 / 3.0 + b0
    disc = (qq / 2.0) ** 2 + (pp / 3.0) ** 3
    best, found = fallback, False
    if disc > 0.0:
        r = math.sqrt(disc)
        u = -qq / 2.0 + r
        v = -qq / 2.0 - r
        x = math.copysign(abs(u) ** (1.0 / 3.0), u) + math.copysign(abs(v) ** (1.0 / 3.0), v)
        x -= shift
        if lo < x < hi:
            return x
        return fallback
    m = 2.0 * math.sqrt(max(-pp / 3.0, 0.0))
    arg = 3.0 * qq / (pp * m) if pp != 0.0 else 0.0
    theta = math.acos(min(1.0, max(-1.0, arg))) / 3.0
    for j in range(3):
        x = m * math.cos(theta - 2.0 * math.pi * j / 3.0) - shift
        if lo < x < hi and (not found or abs(x) < abs(best)):
            best, found = x, True
    return best


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _two_highest(found, ridges):
    """The two highest of the found ridges (rows: ridge, width, psi) into ``ridges``,
    highest first; a seed converging to an already found ridge does not count twice."""
    first = 0
    for k in range(1, found.shape[0]):
        if found[k, 2] > found[first, 2]:
            first = k
    second = -1
    for k in range(found.shape[0]):
        if k == first or abs(found[k, 0] - found[first, 0]) <= 0.1 * found[first, 1]:
            continue
        if second < 0 or found[k, 2] > found[second, 2]:
            second = k
    ridges[0, :] = found[first, :]
    ridges[1, :] = found[first if second < 0 else second, :]


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def branch_integrals(lo, hi, p, q, start, s, c, a, t2, s_r2, gx, glw):
    """ln int_lo^hi exp(psi) dzeta_G [1] per element (arrays of equal length): the
    algorithm of :func:`scan.observables.pbh.ng_density._branch`."""
    n = c.size
    out = np.empty(n)
    lo_f, hi_f = math.isfinite(lo), math.isfinite(hi)
    inset = 1e-9 * (1 + min(abs(lo), abs(hi))) if (lo_f or hi_f) else 0.0
    lo_in, hi_in = lo + inset, hi - inset
    ridges = np.empty((2, 3))
    found = np.empty((3, 3))
    gw_e = np.exp(glw)
    for i in range(n):
        away = math.sqrt(s_r2[i])
        args = (p, q, c[i], a[i], t2[i], s_r2[i])
        for k in range(2):
            x0 = start[i] if k == 0 else -start[i]
            x = _clip(x0, lo + away if lo_f else lo, hi - away if hi_f else hi)
            found[k, 0], found[k, 1], found[k, 2] = _ridge(_clip(x, lo_in, hi_in), lo_in,
                                                           hi_in, s[i], *args, N_NEWTON)
        found[2, :] = found[0, :]
        x = _clip(_curve_root(lo, hi, p, q, c[i], a[i], start[i]), lo_in, hi_in)
        found[2, 0], found[2, 1], found[2, 2] = _ridge(x, lo_in, hi_in, s[i], *args,
                                                       N_NEWTON_CURVE)
        _two_highest(found, ridges)
        apart = (abs(ridges[1, 0] - ridges[0, 0]) > 0.1 * min(ridges[0, 1], ridges[1, 1])
                 and ridges[0, 2] - ridges[1, 2] < RIDGE_GAP)
        if apart:
            out[i] = _logaddexp(_rule(0, ridges, apart, lo, hi, gx, glw, *args),
                                _rule(1, ridges, apart, lo, hi, gx, glw, *args))
            continue
        one = _single_rule(ridges[0, 0], ridges[0, 1], lo, hi, gx, gw_e, *args)
        out[i] = one if math.isfinite(one) else _rule(0, ridges, apart, lo, hi, gx, glw,
                                                      *args)
    return out


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def far_curve_bound(p, grid, a, t2, s_r2, c):
    """ln of the far branch's bound along the curve [1] per element (the derivation is in
    :func:`scan.observables.pbh.ng_density._ln_far_curve_bound`); ``grid`` holds
    r / r_0 - 1 for r = |zeta_G| >= r_0 = 1/|p|, increasing from 0."""
    out = np.empty(c.size)
    ap_sign = 1.0 if p > 0 else -1.0
    q = abs(p)
    kappa = math.sqrt(2.0 / math.e)
    for i in range(c.size):
        ap = ap_sign * a[i]
        t = math.sqrt(t2[i])
        top = -math.inf
        for j in range(grid.size):
            lo = (1.0 + grid[j]) / q
            inv_lo = c[i] / (q * lo - 1.0) if grid[j] > 0 else math.inf
            if j + 1 < grid.size:
                hi = (1.0 + grid[j + 1]) / q
                lin_lo, lin_hi = min(ap * lo, ap * hi), max(ap * lo, ap * hi)
                inv_hi = c[i] / (q * hi - 1.0)
            else:                                   # [r_last, inf)
                lin_lo = ap * lo if ap >= 0 else -math.inf
                lin_hi = math.inf if ap > 0 else ap * lo
                inv_hi = 0.0
            d_lo, d_hi = lin_lo - inv_lo, lin_hi - inv_hi
            d2 = 0.0 if (d_lo <= 0 <= d_hi) else min(d_lo * d_lo, d_hi * d_hi)
            x = lo / math.sqrt(2.0 * s_r2[i])
            erfcx_max = 2.0 / (math.sqrt(math.pi) * (x + math.sqrt(x * x + 4.0 / math.pi)))
            mass = math.log(abs(a[i]) * s_r2[i] + kappa * t * math.sqrt(0.5 * math.pi * s_r2[i])
                            * erfcx_max) - x * x
            if mass <= top:       # mass falls with r: no later interval can exceed top
                break
            top = max(top, mass - d2 / (4.0 * t2[i]))
        out[i] = top + math.log(grid.size) \
            - math.log(2.0 * math.pi * math.sqrt(s_r2[i] * t2[i]) * c[i])
    return out
