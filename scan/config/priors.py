"""Priors of the varied parameters: densities, draws, unit-cube transforms, config keys.

The sampled vector is the ``[[parameters]]`` (varied model keys) followed by the
``[[nuisance]]`` parameters, in config order.  :class:`PriorSet` evaluates the joint
log-prior of many vectors at once, draws initial walkers, and maps to and from the unit
cube (each coordinate through its prior's CDF), which space-filling designs use.
:func:`apply_parameters` returns the config with the varied model keys set.
"""
from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from scipy import special, stats

from scan.config.schema import NuisanceSection, ParameterSection, PriorShape, RunConfig
from scan.config.width_prior import MappedWidthPrior, wall_coordinate_of
from scan.errors import ConfigError

_STEP = re.compile(r"^([A-Za-z_]\w*)(?:\[(\d+)\])?$")


@dataclasses.dataclass(frozen=True)
class Prior:
    """One parameter's prior.

    Parameters
    ----------
    name : str
        The config key (model parameters) or nuisance name.
    label : str
        LaTeX label for plots.
    kind : {"uniform", "log_uniform", "gaussian"}
    low, high : float
        Support; ``-inf``/``inf`` for an untruncated gaussian.
    mean, sigma : float
        Gaussian location and scale (NaN for the other kinds).
    start : float
        Centre of the starting ball.
    """

    name: str
    label: str
    kind: str
    low: float
    high: float
    mean: float = math.nan
    sigma: float = math.nan
    start: float = math.nan

    # -- gaussian truncation in standard units
    def _z_bounds(self) -> tuple[float, float]:
        return (self.low - self.mean) / self.sigma, (self.high - self.mean) / self.sigma

    def _log_norm(self) -> float:
        a, b = self._z_bounds()
        mass = special.ndtr(b) - special.ndtr(a)
        return -math.log(self.sigma) - 0.5 * math.log(2.0 * math.pi) - math.log(mass)

    def log_pdf(self, x: np.ndarray) -> np.ndarray:
        """Normalised log density; ``-inf`` outside the support."""
        x = np.asarray(x, dtype=float)
        inside = (x >= self.low) & (x <= self.high)
        if self.kind == "uniform":
            value = np.full_like(x, -math.log(self.high - self.low))
        elif self.kind == "log_uniform":
            with np.errstate(divide="ignore", invalid="ignore"):
                value = -np.log(x) - math.log(math.log(self.high / self.low))
        else:
            value = self._log_norm() - 0.5 * ((x - self.mean) / self.sigma) ** 2
        return np.where(inside, value, -np.inf)

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        """The inverse CDF: unit-cube coordinate ``u`` in [0, 1] to the parameter."""
        u = np.asarray(u, dtype=float)
        if self.kind == "uniform":
            return self.low + u * (self.high - self.low)
        if self.kind == "log_uniform":
            return self.low * (self.high / self.low) ** u
        a, b = self._z_bounds()
        pa, pb = special.ndtr(a), special.ndtr(b)
        return self.mean + self.sigma * special.ndtri(pa + u * (pb - pa))

    def to_unit(self, x: np.ndarray) -> np.ndarray:
        """The CDF: parameter ``x`` to its unit-cube coordinate."""
        x = np.asarray(x, dtype=float)
        if self.kind == "uniform":
            return (x - self.low) / (self.high - self.low)
        if self.kind == "log_uniform":
            return np.log(x / self.low) / math.log(self.high / self.low)
        a, b = self._z_bounds()
        pa, pb = special.ndtr(a), special.ndtr(b)
        return (special.ndtr((x - self.mean) / self.sigma) - pa) / (pb - pa)

    def centre(self) -> float:
        """The prior's median (the default start)."""
        return float(self.from_unit(0.5))

    def scipy(self) -> Any:
        """The equivalent frozen ``scipy.stats`` distribution (for tests and plots)."""
        if self.kind == "uniform":
            return stats.uniform(self.low, self.high - self.low)
        if self.kind == "log_uniform":
            return stats.loguniform(self.low, self.high)
        a, b = self._z_bounds()
        return stats.truncnorm(a, b, loc=self.mean, scale=self.sigma)


def _prior_from_section(section: ParameterSection | NuisanceSection | PriorShape, name: str,
                        default_start: float | None) -> Prior:
    low = -math.inf if section.low is None else section.low
    high = math.inf if section.high is None else section.high
    prior = Prior(name=name, label=getattr(section, "label", "") or name, kind=section.prior,
                  low=low, high=high,
                  mean=math.nan if section.mean is None else section.mean,
                  sigma=math.nan if section.sigma is None else section.sigma)
    start = getattr(section, "start", None)
    if start is None and default_start is not None and low <= default_start <= high:
        start = default_start
    return dataclasses.replace(prior, start=prior.centre() if start is None else start)


@dataclasses.dataclass(frozen=True)
class PriorSet:
    """The joint (independent) prior of the sampled vector."""

    priors: tuple[Prior, ...]
    #: How many leading entries are model parameters (the rest are nuisance).
    n_model: int
    #: A prior on a pole's width stated for its sampled wall coordinate (or None).
    width_prior: MappedWidthPrior | None = None

    @classmethod
    def from_config(cls, config: RunConfig) -> PriorSet:
        """Build from ``[[parameters]]`` and ``[[nuisance]]``, checking every key.

        Raises
        ------
        ConfigError
            If a parameter key does not name a numeric key of the config, or a name is
            given twice.
        """
        check_parameters(config)
        model = [_prior_from_section(p, p.key, float(get_key(config, p.key)))
                 for p in config.parameters]
        nuisance = [_prior_from_section(n, n.name, None) for n in config.nuisance]
        return cls(tuple(model + nuisance), len(model), mapped_width_prior(config, model))

    @property
    def dim(self) -> int:
        """Number of sampled parameters."""
        return len(self.priors)

    @property
    def names(self) -> tuple[str, ...]:
        """Parameter names (config keys, then nuisance names)."""
        return tuple(p.name for p in self.priors)

    @property
    def labels(self) -> tuple[str, ...]:
        """LaTeX labels."""
        return tuple(p.label for p in self.priors)

    def log_prior(self, theta: np.ndarray) -> np.ndarray:
        """Joint log-prior of vectors ``theta`` of shape (..., dim); ``-inf`` outside."""
        theta = self._check(theta)
        total = np.zeros(theta.shape[:-1])
        for i, prior in enumerate(self.priors):
            total = total + prior.log_pdf(theta[..., i])
        return total

    def log_prior_mapped(self, theta: np.ndarray, ln_wall_width: np.ndarray | None
                         ) -> np.ndarray:
        """The posterior's log-prior: :meth:`log_prior` with a ``width_prior`` applied.

        With a width prior the wall coordinate's box density is replaced by the width
        prior mapped through w = w_w/ρ and its Jacobian (:mod:`scan.config.width_prior`);
        ``ln_wall_width`` is ln w_w [ln M_p] of each vector, shape (...,).  Without one,
        :meth:`log_prior` (``ln_wall_width`` is ignored).
        """
        total = self.log_prior(theta)
        mapped = self.width_prior
        if mapped is None:
            return total
        if ln_wall_width is None:
            raise ValueError("a width prior needs ln w_w of every vector")
        c = np.asarray(theta, float)[..., mapped.index]
        with np.errstate(invalid="ignore"):
            return total + mapped.log_ratio(c, ln_wall_width)

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        """Unit-cube points of shape (..., dim) to parameter vectors."""
        u = self._check(u)
        return np.stack([p.from_unit(u[..., i]) for i, p in enumerate(self.priors)], axis=-1)

    def to_unit(self, theta: np.ndarray) -> np.ndarray:
        """Parameter vectors of shape (..., dim) to unit-cube points."""
        theta = self._check(theta)
        return np.stack([p.to_unit(theta[..., i]) for i, p in enumerate(self.priors)],
                        axis=-1)

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` independent draws from the prior, shape (n, dim)."""
        return self.from_unit(rng.uniform(size=(n, self.dim)))

    def ball(self, rng: np.random.Generator, n: int, scale: float,
             centre: Sequence[float] | None = None) -> np.ndarray:
        """``n`` points in a small ball around ``centre`` (default: each prior's start).

        The ball is drawn in the unit cube (radius ``scale`` per coordinate, clipped to
        the cube), so every point lies inside the prior support.
        """
        centre = [p.start for p in self.priors] if centre is None else centre
        u0 = self.to_unit(np.asarray(centre, dtype=float))
        u = u0 + scale * rng.uniform(-1.0, 1.0, size=(n, self.dim))
        eps = 1e-12
        return self.from_unit(np.clip(u, eps, 1.0 - eps))

    def _check(self, values: np.ndarray) -> np.ndarray:
        values = np.asarray(values, dtype=float)
        if values.shape[-1:] != (self.dim,):
            raise ValueError(f"expected vectors of length {self.dim}, got shape {values.shape}")
        return values


def mapped_width_prior(config: RunConfig, model: list[Prior]) -> MappedWidthPrior | None:
    """The ``width_prior`` of the ``[[parameters]]`` (at most one, on a wall coordinate).

    Raises
    ------
    ConfigError
        A width prior on a key that is not a pole's wall coordinate, a second one, a
        coordinate box that is not uniform or log_uniform, or a width prior without a
        positive lower bound.
    """
    mapped = None
    for i, section in enumerate(config.parameters):
        if section.width_prior is None:
            continue
        where = f"parameters[{i}].width_prior"
        found = wall_coordinate_of(section.key)
        if found is None:
            raise ConfigError(config.source, where, f"'{section.key}' is not a pole's wall "
                              "coordinate; a width prior maps onto model.poles[i].wall_ratio",
                              "vary the pole's wall_ratio with this table, or state the prior "
                              "on model.poles[i].width directly")
        if mapped is not None:
            raise ConfigError(config.source, where, "only one parameter may carry a "
                              "width_prior", "keep one width_prior table")
        if section.prior not in ("uniform", "log_uniform"):
            raise ConfigError(config.source, f"parameters[{i}].prior", f"the box of a "
                              f"coordinate with a width_prior must be uniform or log_uniform, "
                              f"got '{section.prior}'", "give its box as low and high")
        width = section.width_prior
        if width.low is None or width.low <= 0.0:
            raise ConfigError(config.source, f"{where}.low", "a width prior needs a lower "
                              "bound > 0 (widths are positive)", "give low > 0 [M_p]")
        mapped = MappedWidthPrior(index=i, key=section.key, coordinate=found[1],
                                  width=_prior_from_section(width, f"width of {section.key}",
                                                            None), box=model[i])
    return mapped


def width_prior_attributes(config: RunConfig) -> dict[str, object]:
    """The ``width_prior_*`` attributes a chain or evidence file records ({} without one)."""
    mapped = PriorSet.from_config(config).width_prior if config.parameters else None
    return {} if mapped is None else mapped.attributes()


# --------------------------------------------------------------------------- config keys
def _split_key(key: str) -> list[str | int]:
    path: list[str | int] = []
    for part in key.split("."):
        match = _STEP.match(part)
        if match is None:
            raise KeyError(key)
        path.append(match.group(1))
        if match.group(2) is not None:
            path.append(int(match.group(2)))
    return path


def get_key(config: Any, key: str) -> Any:
    """The value at a key path such as ``"model.poles[0].position"`` (KeyError if absent)."""
    node = config
    for step in _split_key(key):
        if isinstance(step, int):
            if not isinstance(node, tuple) or step >= len(node):
                raise KeyError(key)
            node = node[step]
        elif dataclasses.is_dataclass(node) and step in {
                f.name for f in dataclasses.fields(node) if "spec" in f.metadata}:
            node = getattr(node, step)
        else:
            raise KeyError(key)
    return node


def _set_key(node: Any, path: list[str | int], value: float) -> Any:
    if not path:
        return value
    step, rest = path[0], path[1:]
    if isinstance(step, int):
        items = list(node)
        items[step] = _set_key(items[step], rest, value)
        return tuple(items)
    return dataclasses.replace(node, **{step: _set_key(getattr(node, step), rest, value)})


def check_parameters(config: RunConfig) -> None:
    """Every ``[[parameters]]`` key names a numeric key of the model; names are unique."""
    seen: set[str] = set()
    for i, section in enumerate(config.parameters):
        where = f"parameters[{i}].key"
        try:
            value = get_key(config, section.key)
        except KeyError:
            raise ConfigError(config.source, where,
                              f"'{section.key}' is not a key of this config",
                              "give a numeric key path such as \"model.poles[0].position\" "
                              "(the table must exist in the config)") from None
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not section.key.startswith("model."):
            raise ConfigError(config.source, where,
                              f"'{section.key}' is not a numeric key of the model",
                              "vary a number under [model], e.g. \"model.alpha\"")
        if section.key in seen:
            raise ConfigError(config.source, where, f"'{section.key}' is varied twice",
                              "remove the duplicate [[parameters]] table")
        seen.add(section.key)
    for i, section in enumerate(config.nuisance):
        if section.name in seen:
            raise ConfigError(config.source, f"nuisance[{i}].name",
                              f"'{section.name}' is given twice", "use distinct names")
        seen.add(section.name)


def apply_parameters(config: RunConfig,
                     values: Sequence[float] | np.ndarray | Mapping[str, float]) -> RunConfig:
    """The config with the varied model keys set to ``values``.

    Parameters
    ----------
    config : RunConfig
        A config with ``[[parameters]]``.
    values : sequence of float or mapping
        One value per ``[[parameters]]`` entry, in order (a longer vector's trailing
        nuisance entries are ignored), or a mapping from key to value.

    Returns
    -------
    RunConfig
        A new frozen config (integer keys receive ``int(value)``).
    """
    keys = [p.key for p in config.parameters]
    if isinstance(values, Mapping):
        unknown = set(values) - set(keys)
        if unknown:
            raise KeyError(f"not varied parameters: {sorted(unknown)}")
        pairs = list(values.items())
    else:
        vector = np.asarray(values, dtype=float).ravel()
        if vector.size < len(keys):
            raise ValueError(f"need {len(keys)} values, got {vector.size}")
        pairs = list(zip(keys, vector[:len(keys)]))
    for key, value in pairs:
        old = get_key(config, key)
        new = int(value) if isinstance(old, int) and not isinstance(old, bool) else float(value)
        config = _set_key(config, _split_key(key), new)
    return config
