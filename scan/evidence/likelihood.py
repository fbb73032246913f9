"""The likelihood and prior a nested run integrates, and their evaluation through a pool.

For ``sampler.target = "posterior"`` the prior is the run's :class:`PriorSet` and
ln L = ln p - ln prior of the target ``sample`` runs (so ``evidence`` integrates exactly
the likelihood ``sample`` samples).  For the physics-free ``gaussian_test`` target the
target's normalised density is the likelihood and the prior is uniform on the box
[low, high] of its priors, so Z = P(box) / V — the closed-form check of the plumbing.

A pool evaluates the likelihood in chunks (one per worker); each worker keeps its own
prepared likelihood (:func:`install`), loaded once.
"""
from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from scan.config.priors import Prior, PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError
from scan.pool import BasePool
from scan.posterior.target import PosteriorTarget
from scan.posterior.targets import TargetBase

#: The likelihoods a worker process prepared, by hypothesis (set by :func:`install`).
_WORKER: dict[str, Any] = {}


@dataclasses.dataclass(frozen=True)
class NestedLikelihood:
    """ln L of many parameter vectors, from a target and its prior (picklable).

    Parameters
    ----------
    target : TargetBase
        ``log_and_blobs(thetas) -> (ln p, blobs)``.
    priors : PriorSet
        The prior of the nested run (its inverse CDF maps the unit cube).
    subtract_prior : bool
        ln L = ln p - ln prior (posterior targets) or ln L = ln p (a density).
    """

    target: TargetBase
    priors: PriorSet
    subtract_prior: bool

    def __call__(self, thetas: np.ndarray) -> np.ndarray:
        """ln L, shape (p,) [1]; -inf where the model has no likelihood."""
        thetas = np.atleast_2d(np.asarray(thetas, float))
        log_p = np.asarray(self.target.log_and_blobs(thetas)[0], float)
        if not self.subtract_prior:
            return log_p
        log_prior = self.priors.log_prior(thetas)
        with np.errstate(invalid="ignore"):
            return np.where(np.isfinite(log_p), log_p - log_prior, -np.inf)


def box_priors(config: RunConfig, priors: PriorSet) -> PriorSet:
    """Uniform priors on the [low, high] box of ``priors`` (the gaussian_test evidence).

    Raises
    ------
    ConfigError
        A parameter without finite low and high.
    """
    uniform = []
    for i, prior in enumerate(priors.priors):
        if not (math.isfinite(prior.low) and math.isfinite(prior.high)):
            table = "parameters" if i < priors.n_model else "nuisance"
            index = i if i < priors.n_model else i - priors.n_model
            raise ConfigError(config.source, f"{table}[{index}]",
                              "the evidence of the gaussian_test target needs a bounded box",
                              "give low and high")
        uniform.append(Prior(prior.name, prior.label, "uniform", prior.low, prior.high))
    return PriorSet(tuple(uniform), priors.n_model)


def likelihoods_of(config: RunConfig, priors: PriorSet,
                   target: TargetBase) -> dict[str, NestedLikelihood]:
    """The hypotheses of a run: ``model``, and ``foreground`` for a posterior target.

    ``foreground`` is the same target with the model's Omega_GW h^2 switched off
    (:meth:`PosteriorTarget.without_model_gw`): the SMBH-binary foreground amplitude
    stays free, the PBH and CMB-pivot terms still see the model.
    """
    if isinstance(target, PosteriorTarget):
        return {"model": NestedLikelihood(target, priors, True),
                "foreground": NestedLikelihood(target.without_model_gw(), priors, True)}
    return {"model": NestedLikelihood(target, box_priors(config, priors), False)}


def install(likelihoods: dict[str, NestedLikelihood]) -> None:
    """Pool initializer: prepare every hypothesis' likelihood once in this worker."""
    for likelihood in likelihoods.values():
        likelihood.target.prepare()
    _WORKER.update(likelihoods)


def worker_log_like(item: tuple[str, np.ndarray]) -> np.ndarray:
    """ln L of ``(hypothesis, chunk)`` in a worker (after :func:`install`)."""
    name, thetas = item
    return _WORKER[name](thetas)


class PooledLogLike:
    """ln L of a batch: one call for a serial or vectorised pool, chunks for workers.

    Parameters
    ----------
    name : str
        The hypothesis (its key in what the workers installed).
    likelihood : NestedLikelihood
        Evaluated here when the pool has no workers.
    pool : BasePool
        An entered pool whose workers ran :func:`install` with the same likelihoods.
    """

    def __init__(self, name: str, likelihood: NestedLikelihood, pool: BasePool) -> None:
        self.name, self.likelihood, self.pool = name, likelihood, pool

    def __call__(self, thetas: np.ndarray) -> np.ndarray:
        workers = int(getattr(self.pool, "workers", 1))
        if workers <= 1 or len(thetas) < 2 * workers:
            return self.likelihood(thetas)
        chunks = np.array_split(np.asarray(thetas, float), workers)
        return np.concatenate(self.pool.map(worker_log_like,
                                            [(self.name, chunk) for chunk in chunks]))
