"""The grid of a run config: two axes, the fixed values of everything else, the work blocks.

A grid spans two ``[[parameters]]`` keys (``grid.x``, ``grid.y``); every other model
parameter is fixed at its ``start`` value (the config's own value when it lies inside the
prior, else the prior's median) or, with ``grid.profile = true``, maximised over inside its
prior; every nuisance parameter is fixed at its ``start`` (default: the prior's median —
the geometric mean of a log_uniform prior, the mean of a gaussian).

Points are numbered row-major over ``(ny, nx)``: point ``p`` is ``(j, i) = divmod(p, nx)``
with ``x[i]``, ``y[j]``.  Work is done in fixed *blocks* — one grid row per block with the
surrogate (one vectorised surrogate call), one point per block with exact solves — so the
numbers of a block never depend on the pool, the chunking or an interruption.
"""
from __future__ import annotations

import dataclasses
import math
import re
import typing

import numpy as np

from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError, did_you_mean

#: Largest distance of an optimiser coordinate from the unit-cube faces (keeps the
#: inverse CDFs of the priors finite).
UNIT_EPS = 1e-9


@dataclasses.dataclass(frozen=True, eq=False)
class Axis:
    """One axis of the grid.

    Attributes
    ----------
    key : str
        The ``[[parameters]]`` key.
    label : str
        Its LaTeX label (the prior's ``label``, else the key).
    scale : {"linear", "log"}
    values : numpy.ndarray [units of the key]
        The grid coordinates, increasing.
    index : int
        Position of the key among the model parameters.
    units : str
        Units of the key (from the config schema; "1" when dimensionless).
    """

    key: str
    label: str
    scale: str
    values: np.ndarray
    index: int
    units: str


@dataclasses.dataclass(frozen=True, eq=False)
class GridPlan:
    """Everything that fixes the numbers of a grid (picklable; no loaded data).

    Attributes
    ----------
    x, y : Axis
    base : numpy.ndarray, shape (dim,)
        The sampled vector (model parameters, then nuisance) at the fixed values.
    n_model : int
        Number of model parameters in ``base``.
    source : {"surrogate", "exact"}
    profile : bool
    free : tuple of int
        Model-parameter indices maximised over (empty unless ``profile``).
    starts : numpy.ndarray, shape (profile_starts, len(free))
        Unit-cube starts of the profile search (the first is the fixed values).
    max_evaluations : int
        Most ln L evaluations per start.
    priors : PriorSet
    """

    x: Axis
    y: Axis
    base: np.ndarray
    n_model: int
    source: str
    profile: bool
    free: tuple[int, ...]
    starts: np.ndarray
    max_evaluations: int
    priors: PriorSet

    @property
    def shape(self) -> tuple[int, int]:
        """``(ny, nx)``."""
        return len(self.y.values), len(self.x.values)

    @property
    def size(self) -> int:
        """Number of grid points."""
        return self.shape[0] * self.shape[1]

    def thetas(self, points: np.ndarray) -> np.ndarray:
        """Sampled vectors of flat point indices, shape (n, dim), free parameters at base."""
        j, i = np.divmod(np.asarray(points, dtype=np.int64), self.shape[1])
        out = np.repeat(self.base[None, :], len(j), axis=0)
        out[:, self.x.index] = self.x.values[i]
        out[:, self.y.index] = self.y.values[j]
        return out

    def blocks(self) -> list[np.ndarray]:
        """The fixed work blocks: rows (surrogate) or single points (exact)."""
        ny, nx = self.shape
        if self.source == "surrogate":
            return [np.arange(j * nx, (j + 1) * nx) for j in range(ny)]
        return [np.array([p]) for p in range(ny * nx)]

    def with_free(self, theta: np.ndarray, u_free: np.ndarray) -> np.ndarray:
        """``theta`` with the free parameters at unit-cube coordinates ``u_free``."""
        out = np.array(theta, dtype=float)
        u = np.clip(np.asarray(u_free, dtype=float), UNIT_EPS, 1.0 - UNIT_EPS)
        for k, index in enumerate(self.free):
            out[index] = float(self.priors.priors[index].from_unit(u[k]))
        return out


def key_units(config: RunConfig, key: str) -> str:
    """Units of a config key from its schema ``spec`` ("1" when it has none)."""
    node: typing.Any = type(config)
    units = ""
    for step in re.findall(r"[A-Za-z_]\w*", key):  # field names; list indices skipped
        hints = typing.get_type_hints(node)
        fields = {f.name: f for f in dataclasses.fields(node)}
        if step not in fields:
            return "1"
        units = fields[step].metadata["spec"].units if "spec" in fields[step].metadata else ""
        tp = hints[step]
        if typing.get_origin(tp) is tuple:
            tp = typing.get_args(tp)[0]
        node = tp if dataclasses.is_dataclass(tp) else None
        if node is None:
            break
    return units or "1"


def _axis(config: RunConfig, priors: PriorSet, axis: str) -> Axis:
    g = config.grid
    key = getattr(g, axis)
    keys = list(priors.names[:priors.n_model])
    where = f"grid.{axis}"
    if not key:
        raise ConfigError(config.source, where, "zetascan grid needs the two axis keys",
                          "add a [grid] table with x and y, e.g. x = \"" +
                          (keys[0] if keys else "model.alpha") + "\"")
    if key not in keys:
        raise ConfigError(config.source, where,
                          f"'{key}' is not a [[parameters]] key{did_you_mean(key, keys)}",
                          "use one of: " + (", ".join(keys) if keys else
                                            "(none: add [[parameters]] tables)"))
    index = keys.index(key)
    prior = priors.priors[index]
    rng = getattr(g, f"{axis}_range")
    if rng:
        low, high = float(rng[0]), float(rng[1])
    elif math.isfinite(prior.low) and math.isfinite(prior.high):
        low, high = prior.low, prior.high
    else:
        raise ConfigError(config.source, f"{where}_range",
                          f"the prior of '{key}' is unbounded, so the axis has no default range",
                          f"give {axis}_range = [low, high]")
    spacing = getattr(g, f"{axis}_spacing")
    scale = ("log" if prior.kind == "log_uniform" else "linear") if spacing == "auto" else spacing
    if scale == "log" and low <= 0.0:
        raise ConfigError(config.source, f"{where}_spacing",
                          f"log spacing needs a positive range, got [{low:g}, {high:g}]",
                          f"set {axis}_spacing = \"linear\" or give a positive {axis}_range")
    if g.source == "surrogate" and (low < prior.low or high > prior.high):
        raise ConfigError(config.source, f"{where}_range",
                          f"[{low:g}, {high:g}] leaves the prior [{prior.low:g}, {prior.high:g}] "
                          f"of '{key}', where the surrogate gives nothing",
                          "stay inside the prior, or use source = \"exact\"")
    n = getattr(g, f"{axis}_points")
    values = np.geomspace(low, high, n) if scale == "log" else np.linspace(low, high, n)
    values[0], values[-1] = low, high  # exact end points
    return Axis(key, prior.label, scale, values, index, key_units(config, key))


def profile_starts(n_free: int, n_starts: int, u_fixed: np.ndarray, seed: int) -> np.ndarray:
    """Unit-cube starts: the fixed values, then scrambled Halton points (seeded)."""
    from scipy.stats import qmc

    starts = [np.clip(np.asarray(u_fixed, float), UNIT_EPS, 1.0 - UNIT_EPS)]
    if n_starts > 1 and n_free:
        starts += list(qmc.Halton(n_free, scramble=True, seed=seed).random(n_starts - 1))
    return np.array(starts, dtype=float).reshape(len(starts), n_free)


def plan_grid(config: RunConfig, priors: PriorSet | None = None) -> GridPlan:
    """Check ``[grid]`` against ``[[parameters]]`` and build the plan.

    Raises
    ------
    ConfigError
        Missing or unknown axis keys, an axis without a range, log spacing over a
        non-positive range, a surrogate grid leaving the prior, or a profile with
        nothing to maximise over or with exact solves.
    """
    priors = PriorSet.from_config(config) if priors is None else priors
    g = config.grid
    x, y = _axis(config, priors, "x"), _axis(config, priors, "y")
    free: tuple[int, ...] = ()
    if g.profile:
        if g.source != "surrogate":
            raise ConfigError(config.source, "grid.profile",
                              "the profile search needs source = \"surrogate\" (hundreds of "
                              "evaluations per point)", "set profile = false for exact solves")
        free = tuple(k for k in range(priors.n_model) if k not in (x.index, y.index))
        if not free:
            raise ConfigError(config.source, "grid.profile",
                              "nothing to maximise over: the run varies only the two grid "
                              "parameters", "set profile = false or add [[parameters]]")
    base = np.array([p.start for p in priors.priors], dtype=float)
    u_fixed = np.array([float(priors.priors[k].to_unit(base[k])) for k in free])
    starts = profile_starts(len(free), g.profile_starts if free else 1, u_fixed,
                            config.run.seed)
    return GridPlan(x, y, base, priors.n_model, g.source, bool(free), free, starts,
                    g.profile_evaluations, priors)
