"""The parameter space the surrogate covers: key paths, priors, unit-cube coordinates.

The emulator works in unit-cube coordinates ``u`` (the inverse of the prior transform),
so its inputs are O(1) whatever the physical ranges are.  The forward map ``u -> theta``
goes through :mod:`scan.config.priors` when that module provides it (see :func:`from_config`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from scan.config.priors import PriorSet
from scan.errors import ConfigError

PRIOR_KINDS = ("uniform", "log_uniform", "gaussian")


@dataclass(frozen=True)
class ParameterSpace:
    """Named parameters with their priors.

    Attributes
    ----------
    keys : tuple of str
        Config key paths, e.g. ``"model.poles[0].width"``.
    kinds : tuple of str
        Prior of each parameter: ``uniform``, ``log_uniform`` or ``gaussian``.
    low, high : tuple of float
        Bounds (uniform, log_uniform) or mean and standard deviation (untruncated
        gaussian), in the parameter's own units.  The transforms are the priors' CDFs,
        as in :class:`scan.config.priors.Prior`; they are kept here so that a surrogate file
        can be used without its config.
    """

    keys: tuple[str, ...]
    kinds: tuple[str, ...]
    low: tuple[float, ...]
    high: tuple[float, ...]

    def __post_init__(self) -> None:
        n = len(self.keys)
        if not (len(self.kinds) == len(self.low) == len(self.high) == n) or n == 0:
            raise ValueError("keys, kinds, low and high must have the same non-zero length")
        for kind in self.kinds:
            if kind not in PRIOR_KINDS:
                raise ValueError(f"unknown prior {kind!r}; use one of {PRIOR_KINDS}")

    @property
    def dim(self) -> int:
        """Number of parameters."""
        return len(self.keys)

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        """Physical parameter vectors (n, d) from unit-cube points (n, d)."""
        u = np.atleast_2d(np.asarray(u, float))
        out = np.empty_like(u)
        for j, (kind, lo, hi) in enumerate(zip(self.kinds, self.low, self.high)):
            if kind == "uniform":
                out[:, j] = lo + (hi - lo) * u[:, j]
            elif kind == "log_uniform":
                out[:, j] = np.exp(np.log(lo) + (np.log(hi) - np.log(lo)) * u[:, j])
            else:
                out[:, j] = stats.norm.ppf(np.clip(u[:, j], 1e-12, 1 - 1e-12), lo, hi)
        return out

    def to_unit(self, theta: np.ndarray) -> np.ndarray:
        """Unit-cube coordinates (n, d) of physical parameter vectors (n, d)."""
        theta = np.atleast_2d(np.asarray(theta, float))
        out = np.empty_like(theta)
        for j, (kind, lo, hi) in enumerate(zip(self.kinds, self.low, self.high)):
            if kind == "uniform":
                out[:, j] = (theta[:, j] - lo) / (hi - lo)
            elif kind == "log_uniform":
                out[:, j] = (np.log(theta[:, j]) - np.log(lo)) / (np.log(hi) - np.log(lo))
            else:
                out[:, j] = stats.norm.cdf(theta[:, j], lo, hi)
        return out

    def as_table(self) -> list[tuple[str, str, float, float]]:
        """Rows ``(key, kind, low, high)`` (stored in HDF5, compared on resume)."""
        return list(zip(self.keys, self.kinds, self.low, self.high))


def from_config(config) -> ParameterSpace:
    """The parameter space of a run config's ``[[parameters]]`` (via :mod:`scan.config.priors`).

    Only the model parameters are emulator inputs (``[[nuisance]]`` entries enter the
    likelihood, not the solve).  Uniform and log-uniform priors keep their bounds; an
    untruncated gaussian is stored as (mean, sigma).

    Raises
    ------
    ConfigError
        If the config declares no parameters or a truncated gaussian prior.
    """

    if not tuple(getattr(config, "parameters", ()) or ()):
        raise ConfigError(config.source, "parameters", "no [[parameters]] tables: the "
                          "surrogate needs a parameter space",
                          'add e.g. [[parameters]] key = "model.poles[0].width" '
                          'prior = "log_uniform" low = 0.01 high = 0.03')
    priors = PriorSet.from_config(config).priors[:len(config.parameters)]
    low, high = [], []
    for i, prior in enumerate(priors):
        if prior.kind == "gaussian":
            if np.isfinite(prior.low) or np.isfinite(prior.high):
                raise ConfigError(config.source, f"parameters[{i}].low", "the surrogate does "
                                  "not support truncated gaussian priors yet",
                                  "drop low/high or use a uniform prior")
            low.append(prior.mean), high.append(prior.sigma)
        else:
            low.append(prior.low), high.append(prior.high)
    return ParameterSpace(tuple(p.name for p in priors), tuple(p.kind for p in priors),
                          tuple(map(float, low)), tuple(map(float, high)))
