"""Model values: the ``Pole`` and ``Model`` records, their validation and the config
builder (the fast functions they call are :mod:`scan.models.functions`)."""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from scan.errors import ConfigError
from scan.models.canonical import canonical_field
from scan.models.functions import MODEL_SECTION, Kernel, kernel

POTENTIALS = ("t_model", "e_model", "starobinsky", "monomial", "exponential", "plugin")
KINETICS = ("canonical", "poles", "plugin")


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

    Field names follow the ``[model]`` config section (``scan.config.schema``).

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
        return _call(_kernel(self).V, phi)

    def dV(self, phi: np.ndarray | float) -> np.ndarray:
        """dV/dφ / V0 at φ [M_p] (vectorised)."""
        return _call(_kernel(self).dV, phi)

    def K(self, phi: np.ndarray | float) -> np.ndarray:
        """Kinetic function K(φ) (vectorised; +inf exactly on a pole)."""
        with np.errstate(divide="ignore"):
            return _call(_kernel(self).K, phi)

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
        return bool(_kernel(self).singular)


def _call(f: Callable, phi: np.ndarray | float) -> np.ndarray:
    return np.asarray(f(np.asarray(phi, dtype=float), np), dtype=float) * np.ones(np.shape(phi))



def _validate(model: Model) -> None:
    if model.potential not in POTENTIALS:
        raise ConfigError(MODEL_SECTION, "potential", f"unknown potential '{model.potential}'",
                          f"choose one of {', '.join(POTENTIALS)}")
    if model.kinetic not in KINETICS:
        raise ConfigError(MODEL_SECTION, "kinetic", f"unknown kinetic function '{model.kinetic}'",
                          f"choose one of {', '.join(KINETICS)}")
    for key in ("alpha", "exponent", "slope"):
        if not (math.isfinite(getattr(model, key)) and getattr(model, key) > 0):
            raise ConfigError(MODEL_SECTION, key, f"must be a finite positive number, "
                              f"got {getattr(model, key)!r}")
    if model.potential == "plugin" and not model.potential_function:
        raise ConfigError(MODEL_SECTION, "potential_function", "potential = 'plugin' needs one")
    if model.kinetic == "plugin" and not model.kinetic_function:
        raise ConfigError(MODEL_SECTION, "kinetic_function", "kinetic = 'plugin' needs one")
    if model.kinetic == "poles" and not model.poles:
        raise ConfigError(MODEL_SECTION, "poles", "kinetic = 'poles' but no pole is given")
    for i, pole in enumerate(model.poles):
        for key in ("position", "width", "power"):
            value = getattr(pole, key)
            if not math.isfinite(value) or (key != "position" and value <= 0):
                raise ConfigError(MODEL_SECTION, f"poles[{i}].{key}",
                                  f"must be finite{'' if key == 'position' else ' and > 0'}, "
                                  f"got {value!r}")
    positions = sorted(p.position for p in model.poles)
    if any(b == a for a, b in zip(positions, positions[1:])):
        raise ConfigError(MODEL_SECTION, "poles", "two poles share one position",
                          "merge them into one pole")


def width_from_sharpness(model: Model, position: float, power: float,
                         sharpness: float) -> float:
    """Pole width w = (1 − p/2)|V'/V|(φᵢ)/λ for a pole of sharpness λ [M_p].

    Near a pole K ≈ (w/|u|)^p, so the canonical distance χ = w^{p/2}|u|^{1−p/2}/(1 − p/2)
    and the canonical slope is V_χ/V = (V'/V)(φᵢ) (|χ|/ℓ)^{p/(2−p)} with ℓ = w/(1 − p/2):
    the background near the pole depends on w only through λ = |V'/V|(φᵢ)/ℓ (and p).  For
    p = 1, V ≈ V(φᵢ)(1 + λ sign(χ) χ²/2): λ is η_V on either side, and the slow-roll
    field stalls (overdamped, χ'' + 3χ' + 3λχ = 0) for λ < 3/4.

    Raises
    ------
    ConfigError
        If V'(φᵢ) = 0 or V(φᵢ) <= 0 (the sharpness does not fix a width there).
    """
    k = _kernel(model)
    V, dV = float(k.V(position, math)), float(k.dV(position, math))
    if not (V > 0 and math.isfinite(dV) and dV != 0):
        raise ConfigError(MODEL_SECTION, "poles[].sharpness",
                          f"V'/V = {dV}/{V} at the pole position {position}: the sharpness "
                          "does not fix a width there", "give the width instead")
    return (1.0 - 0.5 * power) * abs(dV / V) / sharpness


def model_from_section(section) -> Model:
    """Build a :class:`Model` from a ``[model]`` config section (duck-typed).

    A pole given by ``sharpness`` instead of ``width`` gets the width of
    :func:`width_from_sharpness`.
    """
    base = Model(potential=section.potential, alpha=float(section.alpha),
                 exponent=float(section.exponent), slope=float(section.slope),
                 potential_function=section.potential_function,
                 potential_derivative=section.potential_derivative)
    poles = []
    for p in getattr(section, "poles", ()):
        width = getattr(p, "width", None)
        if width is None:
            width = width_from_sharpness(base, float(p.position), float(p.power),
                                         float(p.sharpness))
        poles.append(Pole(float(p.position), float(width), float(p.power)))
    poles = tuple(poles)
    return Model(potential=section.potential, alpha=float(section.alpha),
                 exponent=float(section.exponent), slope=float(section.slope),
                 kinetic=section.kinetic, poles=poles,
                 potential_function=section.potential_function,
                 potential_derivative=section.potential_derivative,
                 kinetic_function=section.kinetic_function,
                 kinetic_singular_points=tuple(float(x) for x in
                                               section.kinetic_singular_points))


def pole_number(model: Model, position: float) -> int:
    """The config number of the pole (or plug-in singular point) at ``position``.

    Poles are numbered in the order the config lists them (``model.poles[i]``, or
    ``model.kinetic_singular_points[i]`` for a plug-in K), never by position; -1 if no
    pole sits there.
    """
    listed = [p.position for p in model.poles] or list(model.kinetic_singular_points)
    return listed.index(position) if position in listed else -1


# ----- kinetic functions and their singular points -----


def _kernel(model: Model) -> Kernel:
    """The cached fast functions (:func:`scan.models.functions.kernel`)."""
    return kernel(model)
