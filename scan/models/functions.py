"""Fast model functions f(φ, xp): potentials, plug-ins, kinetic functions and their
singular points (xp = ``math`` for floats, ``numpy`` for arrays)."""
from __future__ import annotations

import importlib
import math
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Callable

import numpy as np

from scan.errors import ConfigError

if TYPE_CHECKING:  # annotations only: the records call these functions
    from scan.models.types import Model, Pole

#: The config section that model errors name.
MODEL_SECTION = "model"
#: Relative step of the plug-in derivative: h = FD_STEP·max(1, |φ|).  The 6th-order
#: stencil has truncation error ~ h⁶ V⁽⁷⁾/140 and rounding error ~ 1.5 ε_mach |V|/h;
#: balancing the two for V⁽⁷⁾ ~ V gives h ≈ ε^{1/7} ≈ 6e-3 and an error ~ 1e-13·|V|.
FD_STEP = 6e-3


@dataclass(frozen=True)
class Singular:
    """A singular point of K as the background's pole chart needs it.

    ``G(u, xp)`` returns |u|^p K(φᵢ + u), finite and positive at u = 0, given u itself
    (never rebuilt from φ); ``xp`` is ``math`` for floats or ``numpy`` for arrays.
    """

    position: float
    power: float
    width: float
    G: Callable

    @property
    def q(self) -> float:
        """q = 1 − p/2."""
        return 1.0 - 0.5 * self.power


@dataclass(frozen=True)
class Kernel:
    """Fast functions of a model: each takes (φ, xp) with xp = math (floats) or numpy."""

    V: Callable
    dV: Callable
    K: Callable
    singular: tuple[Singular, ...]


def resolve(name: str, key: str) -> Callable:
    """Import a plug-in "package.module:function".

    Raises
    ------
    ConfigError
        If the module or the function cannot be found.
    """
    module_name, _, attr = name.partition(":")
    try:
        obj = getattr(importlib.import_module(module_name), attr)
    except (ImportError, AttributeError, ValueError) as exc:
        raise ConfigError(MODEL_SECTION, key, f"cannot load plug-in '{name}': {exc}",
                          "give an importable 'package.module:function'") from exc
    if not callable(obj):
        raise ConfigError(MODEL_SECTION, key, f"plug-in '{name}' is not callable")
    return obj


def _plugin(fn: Callable) -> Callable:
    """Wrap a user function as f(φ, xp): vectorised call first, elementwise fallback."""
    def f(phi, xp):
        if xp is math:
            return float(fn(phi))
        try:
            out = np.asarray(fn(phi), dtype=float)
            if out.shape == np.shape(phi):
                return out
        except Exception:  # noqa: BLE001 - a scalar-only plug-in; loop instead
            pass
        return np.vectorize(lambda x: float(fn(float(x))), otypes=[float])(phi)
    return f


def central_derivative(f: Callable) -> Callable:
    """6th-order central difference of f(φ, xp), step h = FD_STEP·max(1, |φ|).

    f′ ≈ [45(f₁ − f₋₁) − 9(f₂ − f₋₂) + (f₃ − f₋₃)]/(60h); absolute error ≈ 1e-13·|V| for
    potentials whose derivatives scale like V itself over field ranges ≳ 0.05 M_p.  A
    potential with structure narrower than ~10 h needs a plug-in derivative.
    """
    def df(phi, xp):
        h = FD_STEP * xp.maximum(1.0, abs(phi)) if xp is np else FD_STEP * max(1.0, abs(phi))
        d = [f(phi + j * h, xp) - f(phi - j * h, xp) for j in (1, 2, 3)]
        return (45.0 * d[0] - 9.0 * d[1] + d[2]) / (60.0 * h)
    return df


def _potential(model: Model) -> tuple[Callable, Callable]:
    name = model.potential
    if name == "t_model":
        a = math.sqrt(6.0 * model.alpha)
        return (lambda x, xp: xp.tanh(x / a) ** 2,
                lambda x, xp: 2.0 * xp.tanh(x / a) / (a * xp.cosh(x / a) ** 2))
    if name in ("e_model", "starobinsky"):
        k = math.sqrt(2.0 / (3.0 * (1.0 if name == "starobinsky" else model.alpha)))
        return (lambda x, xp: xp.expm1(-k * x) ** 2,
                lambda x, xp: -2.0 * k * xp.exp(-k * x) * xp.expm1(-k * x))
    if name == "monomial":
        n = model.exponent
        return (lambda x, xp: abs(x) ** n,
                lambda x, xp: xp.copysign(n * abs(x) ** (n - 1.0), x))
    if name == "exponential":
        lam = model.slope
        return (lambda x, xp: xp.exp(-lam * x), lambda x, xp: -lam * xp.exp(-lam * x))
    V = _plugin(resolve(model.potential_function, "potential_function"))
    if model.potential_derivative:
        return V, _plugin(resolve(model.potential_derivative, "potential_derivative"))
    return V, central_derivative(V)


@lru_cache(maxsize=256)
def kernel(model: Model) -> Kernel:
    """The model's fast functions (cached per model; plug-ins are imported here)."""
    V, dV = _potential(model)
    K, singular = kinetic_functions(model)
    return Kernel(V=V, dV=dV, K=K, singular=singular)



def _pole_G(poles: tuple[Pole, ...], i: int) -> Callable:
    """G(u) = |u|^p (1 + R) + c for pole i; R = the other poles' terms (smooth here)."""
    x0, p, c = poles[i].position, poles[i].power, poles[i].c
    rest = [(o.position, o.power, o.c) for j, o in enumerate(poles) if j != i]

    def G(u, xp):
        R = 0.0
        for xj, pj, cj in rest:
            R = R + cj * abs(x0 + u - xj) ** (-pj)
        return abs(u) ** p * (1.0 + R) + c
    return G


def estimate_power(K: Callable, x0: float) -> tuple[float, float]:
    """Power p and width w of K ≈ A + (w/|u|)^p at a singular point x0 of a plug-in K.

    Uses K at |u| = h, 2h, 4h (h = 1e-6·max(1, |x0|)) on both sides:
    p = log₂[(K(h) − K(2h))/(K(2h) − K(4h))], exact for A + B|u|^{−p}; smooth parts of
    K bias p by O(h^{1+p}).  Returns (0, 0) when K is not singular there.
    """
    h = 1e-6 * max(1.0, abs(x0))
    powers, scales = [], []
    for side in (-1.0, 1.0):
        k1, k2, k4 = (float(K(x0 + side * m * h)) for m in (1.0, 2.0, 4.0))
        ratio = (k1 - k2) / (k2 - k4) if k2 != k4 else math.nan
        if math.isfinite(ratio) and ratio > 1.0:
            p = math.log2(ratio)
            powers.append(p)
            scales.append(((k1 - k2) / (h ** -p - (2 * h) ** -p)) ** (1.0 / p))
    if not powers:
        return 0.0, 0.0
    return sum(powers) / len(powers), sum(scales) / len(scales)


def _plugin_G(K: Callable, x0: float, p: float) -> Callable:
    """G(u) = |u|^p K(x0 + u), frozen at |u| = δ = 1e-10·max(1, |x0|) inside |u| < δ.

    Limits: the plug-in receives φ = x0 + u, which resolves u only to ~1e-16·|x0|, so
    G carries a relative error ~p·1e-16|x0|/|u| (≤ 1e-6 at |u| = δ); inside |u| < δ the
    G(±δ) value replaces the true one (relative error ~δ^p/c).  The field spends only
    Δs ≈ 2δ^q of its pole coordinate there: measured 7e-10 e-folds on N_end for
    K = 1 + (0.1/|φ − 5|)^0.5 against the analytic pole.  The power p is estimated
    (:func:`estimate_power`); a K that is not of the form A + B|u|^{−p} near x0 is not
    supported.
    """
    delta = 1e-10 * max(1.0, abs(x0))

    def G(u, xp):
        if xp is math:
            v = u if abs(u) >= delta else math.copysign(delta, u)
        else:
            v = np.where(abs(u) >= delta, u, np.copysign(delta, u))
        return abs(v) ** p * K(x0 + v, xp)
    return G


def kinetic_functions(model: Model) -> tuple[Callable, tuple[Singular, ...]]:
    """K(φ, xp) and the singular points of K, sorted by position."""
    if model.kinetic == "canonical":
        return (lambda x, xp: 1.0 + 0.0 * x), ()
    if model.kinetic == "poles":
        poles = tuple(sorted(model.poles, key=lambda p: p.position))
        terms = [(p.position, p.power, p.c) for p in poles]

        def K(x, xp):
            out = 1.0 + 0.0 * x
            for x0, p, c in terms:
                out = out + c * abs(x - x0) ** (-p)
            return out
        return K, tuple(Singular(p.position, p.power, p.width, _pole_G(poles, i))
                        for i, p in enumerate(poles))
    K = _plugin(resolve(model.kinetic_function, "kinetic_function"))
    singular = []
    for x0 in sorted(model.kinetic_singular_points):
        p, w = estimate_power(lambda x: K(x, math), x0)
        singular.append(Singular(x0, p, w, _plugin_G(K, x0, p)))
    return K, tuple(singular)
