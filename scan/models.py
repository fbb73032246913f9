"""Inflation model families for L = ½K(φ)(∂φ)² − V(φ) in reduced Planck units (M_p = 1).

Every potential is the *shape* V/V0 with V0 = 1: V0 is fixed later by the CMB
normalisation and never enters the background in e-folds.

Potentials (``Model.potential``)
    ``t_model``      tanh²(φ/√(6α))                      (Kallosh & Linde 2013, 1306.5220)
    ``e_model``      (1 − exp(−√(2/(3α)) φ))²
    ``starobinsky``  the E-model with α = 1                (Starobinsky 1980)
    ``monomial``     |φ|ⁿ
    ``exponential``  exp(−λφ): power-law inflation, ε1 = λ²/2 (Lucchin & Matarrese 1985)
    ``plugin``       a user function "package.module:function"; its derivative is a plug-in
                     too or a 6th-order central difference (see :func:`central_derivative`).

Kinetic functions (``Model.kinetic``)
    ``canonical``    K = 1
    ``poles``        K = 1 + Σᵢ (wᵢ/|φ − φᵢ|)^{pᵢ}, integrable for 0 < pᵢ < 2
    ``plugin``       a user K(φ) with a list of singular points; each point's power is
                     estimated numerically (:func:`estimate_power`).

Plug-in functions must accept a float and return a float; arrays are tried first and a
Python loop is the fallback.  Names are resolved lazily, so a :class:`Model` stays small,
hashable and picklable.
"""
from __future__ import annotations

import importlib
import math
import warnings
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import Callable

import numpy as np

from scan.errors import ConfigError

POTENTIALS = ("t_model", "e_model", "starobinsky", "monomial", "exponential", "plugin")
KINETICS = ("canonical", "poles", "plugin")
_SOURCE = "model"
#: Relative step of the plug-in derivative: h = FD_STEP·max(1, |φ|).  The 6th-order
#: stencil has truncation error ~ h⁶ V⁽⁷⁾/140 and rounding error ~ 1.5 ε_mach |V|/h;
#: balancing the two for V⁽⁷⁾ ~ V gives h ≈ ε^{1/7} ≈ 6e-3 and an error ~ 1e-13·|V|.
FD_STEP = 6e-3


@dataclass(frozen=True)
class Pole:
    """One kinetic pole, K ⊃ (width/|φ − position|)^power.

    Parameters
    ----------
    position : float
        φᵢ [M_p].
    width : float
        wᵢ > 0 [M_p].
    power : float
        pᵢ > 0; 0 < p < 2 is integrable (p ≥ 2: infinite field distance, invalid model).
    """

    position: float
    width: float
    power: float

    @property
    def c(self) -> float:
        """c = w^p: K ⊃ c |φ − φᵢ|^{−p}."""
        return self.width ** self.power

    @property
    def q(self) -> float:
        """q = 1 − p/2: the pole-adapted coordinate is s = sign(u)|u|^q."""
        return 1.0 - 0.5 * self.power


@dataclass(frozen=True)
class Model:
    """An inflation model: potential shape V/V0 (V0 = 1) and kinetic function K(φ).

    Field names follow the ``[model]`` config section (``scan.config_schema``).

    Parameters
    ----------
    potential : str
        One of :data:`POTENTIALS`.
    alpha : float
        α of the α-attractors (``t_model``, ``e_model``).
    exponent : float
        n of ``monomial``.
    slope : float
        λ of ``exponential`` [1/M_p].
    kinetic : str
        One of :data:`KINETICS`.
    poles : tuple of Pole
        Poles of ``kinetic = "poles"``.
    potential_function, potential_derivative, kinetic_function : str
        Plug-ins as "package.module:function" (derivative optional).
    kinetic_singular_points : tuple of float
        Where the plug-in K diverges [M_p].

    Raises
    ------
    ConfigError
        For an unknown family, a missing plug-in or a non-positive width/power.
    """

    potential: str
    alpha: float = 1.0
    exponent: float = 2.0
    slope: float = 0.2
    kinetic: str = "canonical"
    poles: tuple[Pole, ...] = field(default_factory=tuple)
    potential_function: str = ""
    potential_derivative: str = ""
    kinetic_function: str = ""
    kinetic_singular_points: tuple[float, ...] = field(default_factory=tuple)

    def __post_init__(self) -> None:
        _validate(self)

    # ----- vectorised public functions (V0 = 1) -----
    def V(self, phi: np.ndarray | float) -> np.ndarray:
        """Potential shape V/V0 at φ [M_p] (vectorised)."""
        return _call(kernel(self).V, phi)

    def dV(self, phi: np.ndarray | float) -> np.ndarray:
        """dV/dφ / V0 at φ [M_p] (vectorised)."""
        return _call(kernel(self).dV, phi)

    def K(self, phi: np.ndarray | float) -> np.ndarray:
        """Kinetic function K(φ) (vectorised; +inf exactly on a pole)."""
        with np.errstate(divide="ignore"):
            return _call(kernel(self).K, phi)

    def sqrt_K(self, phi: np.ndarray | float) -> np.ndarray:
        """√K(φ) = dχ/dφ (vectorised)."""
        return np.sqrt(self.K(phi))

    def epsilon_V(self, phi: np.ndarray | float) -> np.ndarray:
        """Potential slow-roll parameter ε_V = V_φ²/(2 K V²) (vectorised)."""
        phi = np.asarray(phi, dtype=float)
        return 0.5 * self.dV(phi) ** 2 / (self.K(phi) * self.V(phi) ** 2)

    def canonical_field(self, phi: np.ndarray | float, phi_ref: float = 0.0) -> np.ndarray:
        """χ(φ) − χ(φ_ref) = ∫√K dφ, accurate through integrable poles (vectorised).

        See :func:`canonical_field` for the method.
        """
        return canonical_field(self, phi, phi_ref)

    def with_canonical_kinetics(self) -> "Model":
        """The same potential with K = 1 (slow-roll e-fold counts are lower bounds)."""
        return replace(self, kinetic="canonical", poles=(), kinetic_function="",
                       kinetic_singular_points=())

    @property
    def has_poles(self) -> bool:
        """True if K has singular points."""
        return bool(kernel(self).singular)


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


def _call(f: Callable, phi: np.ndarray | float) -> np.ndarray:
    return np.asarray(f(np.asarray(phi, dtype=float), np), dtype=float) * np.ones(np.shape(phi))


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
        raise ConfigError(_SOURCE, key, f"cannot load plug-in '{name}': {exc}",
                          "give an importable 'package.module:function'") from exc
    if not callable(obj):
        raise ConfigError(_SOURCE, key, f"plug-in '{name}' is not callable")
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


def _validate(model: Model) -> None:
    if model.potential not in POTENTIALS:
        raise ConfigError(_SOURCE, "potential", f"unknown potential '{model.potential}'",
                          f"choose one of {', '.join(POTENTIALS)}")
    if model.kinetic not in KINETICS:
        raise ConfigError(_SOURCE, "kinetic", f"unknown kinetic function '{model.kinetic}'",
                          f"choose one of {', '.join(KINETICS)}")
    for key in ("alpha", "exponent", "slope"):
        if not (math.isfinite(getattr(model, key)) and getattr(model, key) > 0):
            raise ConfigError(_SOURCE, key, f"must be a finite positive number, "
                              f"got {getattr(model, key)!r}")
    if model.potential == "plugin" and not model.potential_function:
        raise ConfigError(_SOURCE, "potential_function", "potential = 'plugin' needs one")
    if model.kinetic == "plugin" and not model.kinetic_function:
        raise ConfigError(_SOURCE, "kinetic_function", "kinetic = 'plugin' needs one")
    if model.kinetic == "poles" and not model.poles:
        raise ConfigError(_SOURCE, "poles", "kinetic = 'poles' but no pole is given")
    for i, pole in enumerate(model.poles):
        for key in ("position", "width", "power"):
            value = getattr(pole, key)
            if not math.isfinite(value) or (key != "position" and value <= 0):
                raise ConfigError(_SOURCE, f"poles[{i}].{key}",
                                  f"must be finite{'' if key == 'position' else ' and > 0'}, "
                                  f"got {value!r}")
    positions = sorted(p.position for p in model.poles)
    if any(b == a for a, b in zip(positions, positions[1:])):
        raise ConfigError(_SOURCE, "poles", "two poles share one position",
                          "merge them into one pole")


def model_from_section(section) -> Model:
    """Build a :class:`Model` from a ``[model]`` config section (duck-typed)."""
    poles = tuple(Pole(float(p.position), float(p.width), float(p.power))
                  for p in getattr(section, "poles", ()))
    return Model(potential=section.potential, alpha=float(section.alpha),
                 exponent=float(section.exponent), slope=float(section.slope),
                 kinetic=section.kinetic, poles=poles,
                 potential_function=section.potential_function,
                 potential_derivative=section.potential_derivative,
                 kinetic_function=section.kinetic_function,
                 kinetic_singular_points=tuple(float(x) for x in
                                               section.kinetic_singular_points))


# ----- kinetic functions and their singular points -----
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


# ----- the canonical field -----
_QUAD = dict(epsabs=0.0, epsrel=1e-12, limit=200)


def _from_pole(sing: Singular, x: float) -> float:
    """∫_{φᵢ}^{x} √K dφ (signed) with scipy's algebraic-weight rule (QAWS).

    √K = |u|^{−p/2} √G(u): the weight |u|^{−p/2} is integrated exactly and the smooth
    √G is sampled, so no point near the pole is ever evaluated in K itself.
    """
    from scipy.integrate import IntegrationWarning, quad
    if x == sing.position:
        return 0.0
    if sing.power >= 2.0:
        return math.copysign(math.inf, x - sing.position)
    g = lambda f: math.sqrt(sing.G(f - sing.position, math))  # noqa: E731
    a, b = sorted((sing.position, x))
    wvar = (-0.5 * sing.power, 0.0) if a == sing.position else (0.0, -0.5 * sing.power)
    with warnings.catch_warnings():  # epsrel 1e-12 is at roundoff: QAWS may say so
        warnings.simplefilter("ignore", IntegrationWarning)
        val = quad(g, a, b, weight="alg", wvar=wvar, **_QUAD)[0]
    return val if x > sing.position else -val


def _chi_absolute(model: Model, x: np.ndarray) -> np.ndarray:
    """χ(x) up to a model constant: from the nearest pole within its chart (cells split
    at the midpoints between poles), the cells joined continuously at the midpoints."""
    from scipy.integrate import quad
    sing = [s for s in kernel(model).singular if s.power > 0]
    if not sing:
        Kf = kernel(model).K
        return np.array([quad(lambda f: math.sqrt(Kf(f, math)), 0.0, v, **_QUAD)[0]
                         for v in x.ravel()]).reshape(x.shape)
    mids = [0.5 * (a.position + b.position) for a, b in zip(sing, sing[1:])]
    offset = [0.0]
    for k, m in enumerate(mids):
        offset.append(offset[-1] + _from_pole(sing[k], m) - _from_pole(sing[k + 1], m))
    cell = np.searchsorted(mids, x.ravel())
    return np.array([offset[c] + _from_pole(sing[c], v) for c, v in
                     zip(cell, x.ravel())]).reshape(x.shape)


def canonical_field(model: Model, phi: np.ndarray | float, phi_ref: float = 0.0) -> np.ndarray:
    """χ(φ) − χ(φ_ref) = ∫_{φ_ref}^{φ} √K dφ [M_p] (vectorised over φ).

    Each point is integrated from the nearest singular point (see :func:`_from_pole`);
    accuracy ~1e-13 relative to χ for analytic poles (tested against the ₂F₁ closed
    form).  A pole with p ≥ 2 gives ±inf (or nan) beyond it.
    """
    phi = np.asarray(phi, dtype=float)
    return _chi_absolute(model, phi) - _chi_absolute(model, np.array([float(phi_ref)]))[0]
