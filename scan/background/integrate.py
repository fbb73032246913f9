"""One chart segment of the background: compiled DOP853 with terminal events and dense
output (numba), replacing ``solve_ivp(..., method="DOP853", events=..., dense_output=True)``.

Steps, error control and the dense output are scipy's (:mod:`scan.ode`); after each step
the events are checked as ``solve_ivp`` does (a sign change of g, in the event's
direction), each active event's root is found by Brent's method on the step's dense output
(xtol = rtol = 4 ε, as scipy) and the earliest one ends the segment.  Events (all
terminal): 0 end of inflation ε1 = 1 (upward), 1 pole crossing s = 0, 2/3 the chart's
lower/upper boundary in φ, 4 the field stopping (π = 0).  An event that vanishes at the
(re)start reads its ``sign`` there instead, so a restart does not re-trigger itself.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from scan.background.compiled import chart_rhs, field_of
from scan.ode import (dense_coefficients, dense_value, error_norm, first_step, first_trial,
                      min_step, next_step_size, sizes, stage_state, stage_time, step_update)

#: The events, in the order a segment reports them.
EVENT_NAMES = ("end", "cross", "lo", "hi", "stop")
#: Status codes of :func:`integrate_segment`.
REACHED, EVENT, FAILED, EXHAUSTED = 0, 1, -1, -2
_EPS4 = 4.0 * np.finfo(float).eps


@njit(cache=True)
def _event(e, t, y, pole, m, bounds, N0, nudge, signs) -> float:
    if nudge[e] and t == N0:
        return signs[e]
    if e == 0:
        return 0.5 * y[1] * y[1] - 1.0
    if e == 1:
        return y[0]
    if e == 2:
        return field_of(y[0], pole, m) - bounds[0]
    if e == 3:
        return field_of(y[0], pole, m) - bounds[1]
    return y[1]


@njit(cache=True)
def _dense(F, y_old, t_old, h, t, out):
    x = (t - t_old) / h
    for i in range(out.size):
        out[i] = dense_value(F, y_old, x, i)


@njit(cache=True)
def _root(e, a, b, F, y_old, t_old, h, pole, m, bounds, N0, nudge, signs) -> float:
    """Brent's root of event e on the step's dense output in [a, b] (scipy's brentq)."""
    y = np.empty(y_old.size)
    _dense(F, y_old, t_old, h, a, y)
    xpre, fpre = a, _event(e, a, y, pole, m, bounds, N0, nudge, signs)
    _dense(F, y_old, t_old, h, b, y)
    xcur, fcur = b, _event(e, b, y, pole, m, bounds, N0, nudge, signs)
    if fpre == 0.0:
        return xpre
    if fcur == 0.0:
        return xcur
    xblk, fblk, spre, scur = 0.0, 0.0, 0.0, 0.0
    for _ in range(100):
        if fpre != 0.0 and fcur != 0.0 and ((fpre < 0.0) != (fcur < 0.0)):
            xblk, fblk = xpre, fpre
            spre = scur = xcur - xpre
        if abs(fblk) < abs(fcur):
            xpre, xcur, xblk = xcur, xblk, xcur
            fpre, fcur, fblk = fcur, fblk, fcur
        delta = 0.5 * (_EPS4 + _EPS4 * abs(xcur))
        sbis = 0.5 * (xblk - xcur)
        if fcur == 0.0 or abs(sbis) < delta:
            return xcur
        if abs(spre) > delta and abs(fcur) < abs(fpre):
            if xpre == xblk:
                stry = -fcur * (xcur - xpre) / (fcur - fpre)
            else:
                dpre = (fpre - fcur) / (xpre - xcur)
                dblk = (fblk - fcur) / (xblk - xcur)
                stry = -fcur * (fblk * dblk - fpre * dpre) / (dblk * dpre * (fblk - fpre))
            if 2.0 * abs(stry) < min(abs(spre), 3.0 * abs(sbis) - delta):
                spre, scur = scur, stry
            else:
                spre = scur = sbis
        else:
            spre = scur = sbis
        xpre, fpre = xcur, fcur
        xcur += scur if abs(scur) > delta else (delta if sbis > 0.0 else -delta)
        _dense(F, y_old, t_old, h, xcur, y)
        fcur = _event(e, xcur, y, pole, m, bounds, N0, nudge, signs)
    return xcur


@njit(cache=True)
def _grow(a, n):
    """``a`` with room for at least n rows (doubling)."""
    if n <= a.shape[0]:
        return a
    out = np.empty((2 * a.shape[0],) + a.shape[1:])
    out[:a.shape[0]] = a
    return out


@njit(cache=True)
def integrate_segment(N0, N_lim, y0, rtol, atol, pole, m, bounds, enabled, signs, nudge,
                      budget, tab):
    """Integrate d(x, π, χ)/dN in one chart from N0 towards N_lim until an event
    (``tab``: :data:`scan.ode.TABLEAU`).

    Returns (status, event index or -1, step ends t (n+1,), states (n+1, 3), dense
    (t_old, h, y_old, F) per step, right-hand-side calls left of ``budget``)."""
    n = y0.size
    stages, extended, power = sizes(tab)
    y, f, y_new, tmp = y0.copy(), np.empty(n), np.empty(n), np.empty(n)
    K = np.empty((extended, n))
    ts, ys = np.empty((64, 1)), np.empty((64, n))
    t_old_a, h_a = np.empty((64, 1)), np.empty((64, 1))
    yold_a, F_a = np.empty((64, n)), np.empty((64, power, n))
    ts[0, 0], ys[0] = N0, y
    steps, status, hit = 0, REACHED, -1
    chart_rhs(y[0], y[1], pole, m, f)
    budget -= 1
    g = np.empty(5)
    for e in range(5):
        g[e] = _event(e, N0, y, pole, m, bounds, N0, nudge, signs) if enabled[e] else 0.0
    interval = N_lim - N0
    h0 = first_trial(y, f, interval, rtol, atol)
    for i in range(n):
        tmp[i] = y[i] + h0 * f[i]
    chart_rhs(tmp[0], tmp[1], pole, m, K[1])
    budget -= 1
    h_abs = first_step(y, f, K[1], h0, interval, rtol, atol)
    t = N0
    while t < N_lim:
        small = min_step(t)
        h_abs = max(h_abs, small)
        rejected = False
        while True:
            if h_abs < small:
                return FAILED, -1, ts[:steps + 1, 0], ys[:steps + 1], t_old_a[:steps, 0], \
                    h_a[:steps, 0], yold_a[:steps], F_a[:steps], budget
            t_new = min(t + h_abs, N_lim)
            h = t_new - t
            h_abs = abs(h)
            K[0] = f
            for s in range(1, stages):
                stage_state(y, K, s, h, tmp, tab)
                chart_rhs(tmp[0], tmp[1], pole, m, K[s])
            step_update(y, K, h, y_new, tab)
            chart_rhs(y_new[0], y_new[1], pole, m, K[stages])
            budget -= stages
            if budget < 0:
                return EXHAUSTED, -1, ts[:steps + 1, 0], ys[:steps + 1], t_old_a[:steps, 0], \
                    h_a[:steps, 0], yold_a[:steps], F_a[:steps], budget
            err = error_norm(K, h, y, y_new, rtol, atol, tab)
            h_abs = next_step_size(h_abs, err, rejected)
            if err < 1.0:
                break
            rejected = True
        for s in range(stages + 1, extended):
            stage_state(y, K, s, h, tmp, tab)
            chart_rhs(tmp[0], tmp[1], pole, m, K[s])
        budget -= extended - stages - 1
        ts, ys = _grow(ts, steps + 2), _grow(ys, steps + 2)
        t_old_a, h_a = _grow(t_old_a, steps + 1), _grow(h_a, steps + 1)
        yold_a, F_a = _grow(yold_a, steps + 1), _grow(F_a, steps + 1)
        dense_coefficients(y, y_new, f, K[stages], K, h, F_a[steps], tab)
        t_old_a[steps, 0], h_a[steps, 0], yold_a[steps] = t, h, y
        t_end, first = t_new, -1
        for e in range(5):
            if not enabled[e]:
                continue
            g_new = _event(e, t_new, y_new, pole, m, bounds, N0, nudge, signs)
            up = g[e] <= 0.0 and g_new >= 0.0
            down = g[e] >= 0.0 and g_new <= 0.0
            if (up and e == 0) or (e > 0 and (up or down)):
                root = _root(e, t, t_new, F_a[steps], y, t, h, pole, m, bounds, N0, nudge,
                             signs)
                if first < 0 or root < t_end:
                    t_end, first = root, e
            g[e] = g_new
        steps += 1
        if first >= 0:
            _dense(F_a[steps - 1], y, t, h, t_end, tmp)
            ts[steps, 0], ys[steps] = t_end, tmp
            return EVENT, first, ts[:steps + 1, 0], ys[:steps + 1], t_old_a[:steps, 0], \
                h_a[:steps, 0], yold_a[:steps], F_a[:steps], budget
        t = t_new
        y[:] = y_new
        f[:] = K[stages]
        ts[steps, 0], ys[steps] = t, y
    return status, hit, ts[:steps + 1, 0], ys[:steps + 1], t_old_a[:steps, 0], h_a[:steps, 0], \
        yold_a[:steps], F_a[:steps], budget


@njit(cache=True)
def dense_many(t_old, h, y_old, F, N):
    """The dense output at e-folds N (3, len(N)); each N in the step that ends at or after it."""
    out = np.empty((y_old.shape[1], N.size))
    ends = t_old + h
    last = t_old.size - 1
    for k in range(N.size):
        i = min(np.searchsorted(ends, N[k], side="left"), last)
        x = (N[k] - t_old[i]) / h[i]
        for c in range(y_old.shape[1]):
            out[c, k] = dense_value(F[i], y_old[i], x, c)
    return out


@dataclass(frozen=True, eq=False)
class DenseSegment:
    """The dense output of one segment: callable on an array of e-folds → (3, n)."""

    t_old: np.ndarray
    h: np.ndarray
    y_old: np.ndarray
    F: np.ndarray

    def __call__(self, N) -> np.ndarray:
        return dense_many(self.t_old, self.h, self.y_old, self.F,
                          np.ascontiguousarray(np.atleast_1d(N), dtype=float))
