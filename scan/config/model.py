"""The ``[run]`` and ``[model]`` sections of a run config (see :mod:`scan.config.schema`).

``[run]`` names the run (one file name: :func:`scan.store.name_problem`) and its output
folder; ``[model]`` is the potential shape and the kinetic function, plug-ins included
(named here as ``'package.module:function'`` strings, imported only when a model is
built from them).
"""
from __future__ import annotations

from dataclasses import dataclass

from scan.config.spec import SEED_MAX, spec
from scan.errors import ConfigError
from scan.store import name_problem

POTENTIALS = ("t_model", "e_model", "starobinsky", "monomial", "exponential", "plugin")
KINETICS = ("canonical", "poles", "plugin")


@dataclass(frozen=True, kw_only=True)
class RunSection:
    """``[run]``: naming, output and randomness."""

    name: str = spec("run name, one file name (no path separator, no '..'); results go to "
                     "<output_dir>/<name>/ and <output_dir>/<name>.h5 (default: the config "
                     "file's stem)", "run")
    output_dir: str = spec("folder for results, relative to the working directory", "results")
    seed: int = spec("seed of every random number generator in the run", 0, minimum=0,
                     maximum=SEED_MAX)

    def validate(self, where: str, source: str) -> None:
        """The name is one path component: results never land outside ``output_dir``."""
        problem = name_problem(self.name)
        if problem is not None:
            raise ConfigError(source, f"{where}.name", f"run name {problem}",
                              "give a plain name such as \"pole_scan\"; choose the folder "
                              "with run.output_dir")


#: The keys that each fix a pole's width; a pole gives exactly one of them.
WIDTH_KEYS = ("width", "sharpness", "wall_ratio", "wall_distance")


@dataclass(frozen=True, kw_only=True)
class PoleSection:
    """One ``[[model.poles]]`` entry: K gains (width/|phi - position|)^power."""

    position: float = spec("pole position phi_i", units="M_p")
    width: float | None = spec("pole width w_i (> 0); give either width or sharpness", None,
                               units="M_p", minimum=0.0, exclusive_minimum=True)
    sharpness: float | None = spec(
        "instead of width: lambda_i = (1 - p_i/2) |V'/V|(phi_i) / w_i, the pole's dimensionless "
        "sharpness (for p = 1 the canonical eta_V = V_chichi/V on either side of the pole; the "
        "field stalls for lambda below ~3/4); fixes the width from the potential", None,
        minimum=0.0, exclusive_minimum=True)
    wall_ratio: float | None = spec("lambda_i / lambda_w instead of width or sharpness", None,
                                    minimum=0.0, exclusive_minimum=True)
    wall_distance: float | None = spec(
        "instead of width or sharpness: lambda_i / lambda_w - 1, the distance to the pole's "
        "wall (a log-uniform prior on it resolves the region next to the wall, where the "
        "enhancement changes fastest)", None, minimum=0.0, exclusive_minimum=True)
    power: float = spec("pole power p_i; 0 < p < 2 is integrable (p >= 2 gives an invalid "
                        "model: infinite field distance)", minimum=0.0, exclusive_minimum=True)


@dataclass(frozen=True, kw_only=True)
class ModelSection:
    """``[model]``: potential shape V(phi)/V0 and kinetic function K(phi).

    V0 is never set here: it is fixed by the CMB normalisation.
    """

    potential: str = spec("potential family", choices=POTENTIALS)
    alpha: float = spec("alpha-attractor parameter (t_model, e_model)", 1.0, minimum=0.0,
                        exclusive_minimum=True)
    exponent: float = spec("monomial power n in V0 phi^n", 2.0, minimum=0.0, exclusive_minimum=True)
    slope: float = spec("exponential slope lambda in V0 exp(-lambda phi)", 0.2, minimum=0.0,
                        exclusive_minimum=True)
    kinetic: str = spec("kinetic function: canonical K = 1, poles, or a plug-in", "canonical",
                        choices=KINETICS)
    poles: tuple[PoleSection, ...] = spec("list of kinetic poles ([[model.poles]] tables)",
                                          default_factory=tuple)
    potential_function: str = spec("plug-in V(phi)/V0 as 'package.module:function'", "")
    potential_derivative: str = spec("optional plug-in dV/dphi / V0 as 'package.module:function'",
                                     "")
    kinetic_function: str = spec("plug-in K(phi) as 'package.module:function'", "")
    kinetic_singular_points: tuple[float, ...] = spec(
        "positions where the plug-in K diverges (integrable poles)", default_factory=tuple,
        units="M_p")

    def validate(self, where: str, source: str) -> None:
        """Cross-field rules: each family's required keys are present."""
        if self.kinetic == "poles" and not self.poles:
            raise ConfigError(source, f"{where}.poles", "kinetic = 'poles' but no pole is given",
                              "add a [[model.poles]] table with position, width, power")
        if self.kinetic != "poles" and self.poles:
            raise ConfigError(source, f"{where}.kinetic",
                              f"poles are given but kinetic = '{self.kinetic}'",
                              "set kinetic = \"poles\" or remove the [[model.poles]] tables")
        if self.potential == "plugin" and not self.potential_function:
            raise ConfigError(source, f"{where}.potential_function",
                              "potential = 'plugin' needs potential_function",
                              "give 'package.module:function', e.g. \"mypackage.models:V\"")
        if self.kinetic == "plugin" and not self.kinetic_function:
            raise ConfigError(source, f"{where}.kinetic_function",
                              "kinetic = 'plugin' needs kinetic_function",
                              "give 'package.module:function', e.g. \"mypackage.models:K\"")
        for i, pole in enumerate(self.poles):
            if sum(getattr(pole, k) is not None for k in WIDTH_KEYS) != 1:
                raise ConfigError(source, f"{where}.poles[{i}]",
                                  "give exactly one of width, sharpness, wall_ratio and "
                                  "wall_distance",
                                  "set width (M_p), sharpness, wall_ratio or wall_distance "
                                  "(dimensionless), not two of them")
        for key in ("potential_function", "potential_derivative", "kinetic_function"):
            value = getattr(self, key)
            if value and (":" not in value or value.startswith(":") or value.endswith(":")):
                raise ConfigError(source, f"{where}.{key}",
                                  f"'{value}' is not of the form 'package.module:function'")

    @property
    def plugins(self) -> tuple[str, ...]:
        """The plug-in functions building this model imports (running them executes user
        code; reading a result file that names them never does)."""
        names = []
        if self.potential == "plugin":
            names += [self.potential_function, self.potential_derivative]
        if self.kinetic == "plugin":
            names.append(self.kinetic_function)
        return tuple(name for name in names if name)
