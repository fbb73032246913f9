"""DOP853 building blocks as compiled functions over float arrays.

A driver (one per problem: it calls its own compiled right-hand side) runs the step
loop with these pieces; they reproduce ``scipy.integrate.DOP853`` (scipy 1.17):

* :func:`stage_state` — the argument of stage s, y + h Σ_j A[s, j] K[j];
* :func:`step_update` — the 8th-order solution y + h Σ_j B[j] K[j];
* :func:`error_norm` — scipy's blended 5th/3rd-order error norm;
* :func:`next_step_size` — safety 0.9, factors clipped to [0.2, 10] (≤ 1 after a rejection);
* :func:`first_trial`, :func:`first_step` — the starting step of Hairer, Nørsett & Wanner
  (1993), Sec. II.4, as scipy's ``select_initial_step``;
* :func:`dense_coefficients`, :func:`dense_value` — the 7th-order continuous extension.

The tableau comes from scipy itself (``scipy.integrate._ivp.dop853_coefficients``), packed
into one array :data:`TABLEAU` that drivers receive as an *argument*: numba freezes global
arrays into the machine code, and LLVM then unrolls every stage loop over the constant
coefficients — measured 45 s against 8 s to compile the same stage loop under load.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy.integrate._ivp import dop853_coefficients as _coef

N_STAGES: int = _coef.N_STAGES                      # 12 stages per step
N_STAGES_EXTENDED: int = _coef.N_STAGES_EXTENDED    # 16 with the dense-output stages
INTERPOLATOR_POWER: int = _coef.INTERPOLATOR_POWER  # 7 coefficient rows per step
#: Rows of :data:`TABLEAU`: A (16), B, C, E3, E5, D (4), then [N_STAGES, N_STAGES_EXTENDED,
#: INTERPOLATOR_POWER].
ROW_B, ROW_C, ROW_E3, ROW_E5, ROW_D, ROW_SIZES = 16, 17, 18, 19, 20, 24


def _tableau() -> np.ndarray:
    tab = np.zeros((ROW_SIZES + 1, N_STAGES_EXTENDED))
    tab[:16] = _coef.A
    tab[ROW_B, :N_STAGES] = _coef.B
    tab[ROW_C] = _coef.C
    tab[ROW_E3, :N_STAGES + 1] = _coef.E3
    tab[ROW_E5, :N_STAGES + 1] = _coef.E5
    tab[ROW_D:ROW_D + 4] = _coef.D
    tab[ROW_SIZES, :3] = (N_STAGES, N_STAGES_EXTENDED, INTERPOLATOR_POWER)
    return tab


#: scipy's DOP853 coefficients in one array (pass it to the drivers).
TABLEAU: np.ndarray = _tableau()
#: scipy's step-size control constants (``scipy.integrate._ivp.rk``).
SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0
#: Error exponent −1/(error-estimator order + 1) of DOP853.
ERROR_EXPONENT = -1.0 / 8.0


@njit(cache=True)
def sizes(tab) -> tuple[int, int, int]:
    """(stages, extended stages, interpolant rows), read at run time (no unrolling)."""
    return int(tab[ROW_SIZES, 0]), int(tab[ROW_SIZES, 1]), int(tab[ROW_SIZES, 2])


@njit(cache=True)
def stage_time(t: float, h: float, s: int, tab) -> float:
    """Time of stage ``s``: t + C[s] h."""
    return t + tab[ROW_C, s] * h


@njit(cache=True)
def stage_state(y, K, s, h, out, tab):
    """out = y + h Σ_{j<s} A[s, j] K[j] (the state stage ``s`` is evaluated at)."""
    n = y.size
    out[:] = 0.0
    for j in range(s):
        a = tab[s, j]
        row = K[j]
        for i in range(n):
            out[i] += row[i] * a
    for i in range(n):
        out[i] = y[i] + out[i] * h


@njit(cache=True)
def step_update(y, K, h, out, tab):
    """out = y + h Σ_j B[j] K[j] (the 8th-order solution at t + h)."""
    n = y.size
    out[:] = 0.0
    for j in range(sizes(tab)[0]):
        b = tab[ROW_B, j]
        row = K[j]
        for i in range(n):
            out[i] += row[i] * b
    for i in range(n):
        out[i] = y[i] + h * out[i]


@njit(cache=True)
def error_norm(K, h, y, y_new, rtol, atol, tab) -> float:
    """scipy's DOP853 error norm; ``K`` holds the 13 rows (12 stages + f(t + h, y_new)),
    ``atol`` one entry per component."""
    n = y.size
    rows = sizes(tab)[0] + 1
    e5, e3 = 0.0, 0.0
    for i in range(n):
        scale = atol[i] + max(abs(y[i]), abs(y_new[i])) * rtol
        a5, a3 = 0.0, 0.0
        for j in range(rows):
            a5 += K[j, i] * tab[ROW_E5, j]
            a3 += K[j, i] * tab[ROW_E3, j]
        a5 /= scale
        a3 /= scale
        e5 += a5 * a5
        e3 += a3 * a3
    if e5 == 0.0 and e3 == 0.0:
        return 0.0
    return abs(h) * e5 / math.sqrt((e5 + 0.01 * e3) * n)


@njit(cache=True)
def next_step_size(h_abs: float, err: float, rejected: bool) -> float:
    """|h| for the next attempt after an error norm ``err`` (accepted if err < 1)."""
    if err < 1.0:
        factor = MAX_FACTOR if err == 0.0 else min(MAX_FACTOR, SAFETY * err ** ERROR_EXPONENT)
        if rejected:
            factor = min(1.0, factor)
        return h_abs * factor
    factor = SAFETY * err ** ERROR_EXPONENT
    if not factor > MIN_FACTOR:  # also a nan error norm: shrink, as Python's max does
        factor = MIN_FACTOR
    return h_abs * factor


@njit(cache=True)
def rms_norm(x, scale) -> float:
    """Root-mean-square of x / scale."""
    acc = 0.0
    for i in range(x.size):
        v = x[i] / scale[i]
        acc += v * v
    return math.sqrt(acc / x.size)


@njit(cache=True)
def first_trial(y0, f0, interval, rtol, atol) -> float:
    """The trial step h0 of scipy's ``select_initial_step`` (before its one extra call)."""
    scale = atol + np.abs(y0) * rtol
    d0 = rms_norm(y0, scale)
    d1 = rms_norm(f0, scale)
    h0 = 1e-6 if (d0 < 1e-5 or d1 < 1e-5) else 0.01 * d0 / d1
    return min(h0, interval)


@njit(cache=True)
def first_step(y0, f0, f1, h0, interval, rtol, atol) -> float:
    """scipy's ``select_initial_step`` given f1 = f(t0 + h0, y0 + h0 f0), h0 from
    :func:`first_trial`; returns the first |h| (no max_step)."""
    scale = atol + np.abs(y0) * rtol
    d1 = rms_norm(f0, scale)
    d2 = rms_norm(f1 - f0, scale) / h0
    if d1 <= 1e-15 and d2 <= 1e-15:
        h1 = max(1e-6, h0 * 1e-3)
    else:
        h1 = (0.01 / max(d1, d2)) ** (1.0 / 8.0)
    return min(100.0 * h0, h1, interval)


@njit(cache=True)
def min_step(t: float) -> float:
    """scipy's smallest forward step at t: 10 × the spacing of floats there."""
    return 10.0 * abs(np.nextafter(t, np.inf) - t)


@njit(cache=True)
def dense_coefficients(y_old, y_new, f_old, f_new, K, h, out, tab):
    """Rows F[0..6] of the continuous extension of one step (scipy's
    ``Dop853DenseOutput``); ``K`` must hold all 16 extended stages."""
    _, extended, power = sizes(tab)
    for i in range(y_old.size):
        dy = y_new[i] - y_old[i]
        out[0, i] = dy
        out[1, i] = h * f_old[i] - dy
        out[2, i] = 2.0 * dy - h * (f_new[i] + f_old[i])
        for r in range(power - 3):
            acc = 0.0
            for j in range(extended):
                acc += tab[ROW_D + r, j] * K[j, i]
            out[3 + r, i] = h * acc


@njit(cache=True)
def dense_value(F, y_old, x: float, i: int) -> float:
    """Component ``i`` of the continuous extension at x = (t − t_old)/h ∈ [0, 1]."""
    acc = 0.0
    power = F.shape[0]
    for r in range(power - 1, -1, -1):
        acc += F[r, i]
        if (power - 1 - r) % 2 == 0:
            acc *= x
        else:
            acc *= 1.0 - x
    return acc + y_old[i]
