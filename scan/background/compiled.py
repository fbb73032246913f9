"""The background's model functions and chart right-hand sides, compiled (numba).

A model is passed to compiled code as one float array (:func:`encode`): potential kind
and parameter, kinetic kind, then the poles' positions, powers and c = wᵖ.  The built-in
families evaluate the same formulas as :mod:`scan.models.functions` (checked against
them in ``tests/test_background_compiled.py``); plug-in functions (arbitrary Python) are
called back from compiled code through ``numba.objmode`` (:func:`activate` names the
model whose plug-ins answer), so every model takes the one compiled integrator.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, objmode

from scan.models import Model, kernel

#: Potential kinds (slot 0 of the encoded model).
T_MODEL, E_MODEL, MONOMIAL, EXPONENTIAL, PLUGIN = 0.0, 1.0, 2.0, 3.0, 9.0
#: Kinetic kinds (slot 2).
CANONICAL, POLES = 0.0, 1.0
_HEAD = 4  # [potential kind, its parameter, kinetic kind, number of singular points]
#: The model whose Python plug-ins the compiled code calls back (one per process).
_ACTIVE: list = [None]


def encode(model: Model) -> np.ndarray:
    """The float array compiled code reads the model from (see the module docstring)."""
    kern = kernel(model)
    name = model.potential
    if name == "t_model":
        head = [T_MODEL, math.sqrt(6.0 * model.alpha)]
    elif name in ("e_model", "starobinsky"):
        head = [E_MODEL, math.sqrt(2.0 / (3.0 * (1.0 if name == "starobinsky"
                                                   else model.alpha)))]
    elif name == "monomial":
        head = [MONOMIAL, float(model.exponent)]
    elif name == "exponential":
        head = [EXPONENTIAL, float(model.slope)]
    else:
        head = [PLUGIN, 0.0]
    kind = {"canonical": CANONICAL, "poles": POLES}.get(model.kinetic, PLUGIN)
    sing = kern.singular
    if model.kinetic == "poles":
        poles = sorted(model.poles, key=lambda p: p.position)
        c = [p.c for p in poles]
    else:
        c = [0.0] * len(sing)
    return np.array(head + [kind, float(len(sing))] + [s.position for s in sing]
                    + [s.power for s in sing] + c, dtype=float)


def activate(model: Model) -> None:
    """Make ``model``'s Python functions the ones plug-in call-backs use."""
    _ACTIVE[0] = kernel(model)


def _python_value(which: int, x: float, pole: int) -> float:
    """Call-back: V (0), V' (1), K (2) or G of singular point ``pole`` (3) in Python."""
    kern = _ACTIVE[0]
    if which == 0:
        return float(kern.V(x, math))
    if which == 1:
        return float(kern.dV(x, math))
    if which == 2:
        return float(kern.K(x, math))
    return float(kern.singular[pole].G(x, math))


@njit(cache=True)
def _call_back(which: int, x: float, pole: int) -> float:
    with objmode(out="float64"):
        out = _python_value(which, x, pole)
    return out


@njit(cache=True)
def potential(x: float, m) -> tuple[float, float]:
    """(V, V') at φ = x for V0 = 1."""
    kind, a = m[0], m[1]
    if kind == T_MODEL:
        th = math.tanh(x / a)
        return th * th, 2.0 * th / (a * math.cosh(x / a) ** 2)
    if kind == E_MODEL:
        em = math.expm1(-a * x)
        return em * em, -2.0 * a * math.exp(-a * x) * em
    if kind == MONOMIAL:
        return abs(x) ** a, math.copysign(a * abs(x) ** (a - 1.0), x)
    if kind == EXPONENTIAL:
        e = math.exp(-a * x)
        return e, -a * e
    return _call_back(0, x, -1), _call_back(1, x, -1)


@njit(cache=True)
def kinetic(x: float, m) -> float:
    """K(φ) at φ = x."""
    kind, n = m[2], int(m[3])
    if kind == CANONICAL:
        return 1.0
    if kind == POLES:
        out = 1.0
        for j in range(n):
            out = out + m[_HEAD + 2 * n + j] * abs(x - m[_HEAD + j]) ** (-m[_HEAD + n + j])
        return out
    return _call_back(2, x, -1)


@njit(cache=True)
def pole_G(i: int, u: float, m) -> float:
    """G = |u|^p K(φᵢ + u) of singular point i, finite at u = 0."""
    n = int(m[3])
    x0, p = m[_HEAD + i], m[_HEAD + n + i]
    if m[2] != POLES:
        return _call_back(3, u, i)
    R = 0.0
    for j in range(n):
        if j != i:
            R = R + m[_HEAD + 2 * n + j] * abs(x0 + u - m[_HEAD + j]) ** (-m[_HEAD + n + j])
    return abs(u) ** p * (1.0 + R) + m[_HEAD + 2 * n + i]


@njit(cache=True)
def field_of(x: float, pole: int, m) -> float:
    """φ from the chart coordinate x (pole < 0: x = φ)."""
    if pole < 0:
        return x
    n = int(m[3])
    q = 1.0 - 0.5 * m[_HEAD + n + pole]
    return m[_HEAD + pole] + math.copysign(abs(x) ** (1.0 / q), x)


@njit(cache=True)
def chart_rhs(x: float, pi: float, pole: int, m, out) -> None:
    """d(x, π, χ)/dN in a chart (the package docstring's equations)."""
    if pole < 0:
        inv = 1.0 / math.sqrt(kinetic(x, m))
        V, dV = potential(x, m)
        out[0] = pi * inv
        out[1] = -(3.0 - 0.5 * pi * pi) * (pi + dV * inv / V)
    else:
        n = int(m[3])
        p = m[_HEAD + n + pole]
        q = 1.0 - 0.5 * p
        au = abs(x) ** (1.0 / q)
        u = math.copysign(au, x)
        sG = math.sqrt(pole_G(pole, u, m))
        V, dV = potential(m[_HEAD + pole] + u, m)
        slope = dV * au ** (0.5 * p) / (sG * V)
        out[0] = q * pi / sG
        out[1] = -(3.0 - 0.5 * pi * pi) * (pi + slope)
    out[2] = pi
