"""The ``[likelihood]`` and ``[grid]`` sections of a run config (see :mod:`scan.config.schema`)."""
from __future__ import annotations

from dataclasses import dataclass

from scan.config.spec import spec
from scan.errors import ConfigError

UPPER_LIMIT_METHODS = ("step", "half_normal", "soft_log")


@dataclass(frozen=True, kw_only=True)
class CurveMethodSection:
    """One ``[[likelihood.methods]]`` entry: the upper-limit method of one curve."""

    curve: str = spec("name of an Omega_GW h^2 upper-limit curve (its 'name' metadata)")
    method: str = spec("likelihood of that upper limit (overrides the curve's own "
                       "'likelihood' metadata)", choices=UPPER_LIMIT_METHODS)


@dataclass(frozen=True, kw_only=True)
class LikelihoodSection:
    """``[likelihood]``: bound curves, CMB priors and the surrogate of a posterior run."""

    curves: tuple[str, ...] = spec("bound-curve CSV files and scalar-bound TOML files "
                                   "(relative to the config file); when given, "
                                   "directory is not read", default_factory=tuple)
    directory: str = spec("folder (relative to the config file) whose *.csv curves and "
                          "*.toml scalar bounds are all used when curves is empty; no default: "
                          "a run that needs bounds names them here or in curves", "")
    cmb_priors: bool = spec("Planck 2018 n_s and ln(10^10 A_s) priors and the BICEP/Keck "
                            "2021 r limit: true adds them once, false leaves them out even when a "
                            "scalar file asks for them", True)
    surrogate: str = spec("surrogate file from 'zetascan train', relative to the config "
                          "file (default: <run.output_dir>/<run.name>/surrogate.h5)", "")
    pbh_combine: str = spec("how several f_PBH bounds combine", "max",
                            choices=("max", "quadrature"))
    sensitivity_mode: str = spec("sensitivity curves only report the SNR, or exclude / "
                                 "require detectable models", "report",
                                 choices=("report", "exclude_detectable",
                                          "require_detectable"))
    methods: tuple[CurveMethodSection, ...] = spec(
        "per-curve upper-limit methods ([[likelihood.methods]] tables)", default_factory=tuple)


GRID_SPACINGS = ("auto", "linear", "log")


@dataclass(frozen=True, kw_only=True)
class GridSection:
    """``[grid]``: the 2-D exclusion scan of ``zetascan grid`` (see ``scan.grid``)."""

    x: str = spec("key of the [[parameters]] entry on the horizontal axis, e.g. "
                  "\"model.poles[0].width\" (required by zetascan grid)", "")
    y: str = spec("key of the [[parameters]] entry on the vertical axis (required by "
                  "zetascan grid)", "")
    x_points: int = spec("grid points along x", 20, minimum=2)
    y_points: int = spec("grid points along y", 20, minimum=2)
    x_spacing: str = spec("spacing of the x points: auto is log for a log_uniform prior, "
                          "linear otherwise; log needs a positive range", "auto",
                          choices=GRID_SPACINGS)
    y_spacing: str = spec("spacing of the y points (as x_spacing)", "auto",
                          choices=GRID_SPACINGS)
    x_range: tuple[float, ...] = spec("[low, high] of the x axis (default: the prior's bounds; "
                                      "with source = surrogate it must lie inside them)",
                                      default_factory=tuple)
    y_range: tuple[float, ...] = spec("[low, high] of the y axis (as x_range)",
                                      default_factory=tuple)
    source: str = spec("observables from the trained surrogate or from exact solves of "
                       "every point (zetascan grid --exact)", "surrogate",
                       choices=("surrogate", "exact"))
    profile: bool = spec("maximise the total ln L over the other [[parameters]] at every "
                         "point (bounded Powell search; surrogate source only) instead of "
                         "fixing them at their start values", False)
    profile_starts: int = spec("starts of the profile search per point: the fixed values, "
                               "then scrambled Halton points of the free parameters", 3,
                               minimum=1)
    profile_evaluations: int = spec("most ln L evaluations per start of the profile search",
                                    60, minimum=4)
    progress_every_s: float = spec("interval of the progress lines when stderr is not a "
                                   "terminal", 30.0, units="s", minimum=0.0,
                                   exclusive_minimum=True)

    def validate(self, where: str, source: str) -> None:
        """Two different axes; each given range is [low, high] with low < high."""
        if self.x and self.x == self.y:
            raise ConfigError(source, f"{where}.y", f"x and y are both '{self.x}'",
                              "choose two different [[parameters]] keys")
        for axis in ("x", "y"):
            rng = getattr(self, f"{axis}_range")
            if rng and (len(rng) != 2 or not rng[0] < rng[1]):
                raise ConfigError(source, f"{where}.{axis}_range",
                                  f"needs [low, high] with low < high, got {list(rng)}",
                                  "give two increasing numbers, or leave it out for the "
                                  "prior's bounds")
