"""Build the log-probability target a config names: checked, and prepared in this process.

``sampler.target = "posterior"`` is :class:`~scan.posterior.target.PosteriorTarget`
(surrogate observables against the ``[likelihood]`` curves, nuisance parameters checked
by :mod:`~scan.posterior.setup`); ``"gaussian_test"`` is the physics-free
:class:`~scan.posterior.targets.GaussianTarget` that proves the sampler's plumbing.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError
from scan.likelihood import Sensitivity
from scan.likelihood.from_config import build_terms, curve_paths_of
from scan.observables.settings import require_batch_conventions
from scan.posterior.setup import (
    NUISANCE_NAMES,
    THRESHOLD,
    UNSUPPORTED_NUISANCE,
    check_collapse_k_prior,
    check_threshold_prior,
    threshold_range,
)
from scan.posterior.target import PosteriorTarget
from scan.posterior.targets import GaussianTarget, TargetBase
from scan.store import RunFolder


def gaussian_test_target(config: RunConfig, priors: PriorSet) -> GaussianTarget:
    """The ``gaussian_test`` target of a config: every varied parameter must be gaussian."""
    for i, prior in enumerate(priors.priors):
        if prior.kind != "gaussian":
            table = "parameters" if i < priors.n_model else "nuisance"
            index = i if i < priors.n_model else i - priors.n_model
            raise ConfigError(config.source, f"{table}[{index}].prior",
                              f"sampler.target = 'gaussian_test' needs gaussian priors, got "
                              f"'{prior.kind}'", "set prior = \"gaussian\" with mean and sigma")
    if priors.dim > 1 and not -1.0 / (priors.dim - 1) < config.sampler.test_correlation:
        raise ConfigError(config.source, "sampler.test_correlation",
                          f"must be > {-1.0 / (priors.dim - 1):.4g} for {priors.dim} "
                          "parameters (positive-definite covariance)")
    return GaussianTarget(names=priors.names, mean=tuple(p.mean for p in priors.priors),
                          sigma=tuple(p.sigma for p in priors.priors),
                          correlation=config.sampler.test_correlation,
                          low=tuple(p.low for p in priors.priors),
                          high=tuple(p.high for p in priors.priors))


def build_target(config: RunConfig, priors: PriorSet) -> TargetBase:
    """The log-probability target named by ``sampler.target``.

    ``"gaussian_test"`` is :class:`GaussianTarget`; ``"posterior"`` is
    :class:`scan.posterior.target.PosteriorTarget` (surrogate observables against the
    ``[likelihood]`` curves), loaded and checked here.

    Raises
    ------
    ConfigError
        Nothing to sample, or a config the target cannot use.
    """
    if not priors.dim:
        raise ConfigError(config.source, "parameters", "nothing to sample",
                          "add [[parameters]] (or [[nuisance]]) tables with priors")
    if config.sampler.target == "gaussian_test":
        return gaussian_test_target(config, priors)
    return posterior_target(config, priors)


def posterior_target(config: RunConfig, priors: PriorSet) -> PosteriorTarget:
    """The ``posterior`` target of a config, checked and prepared in this process.

    Raises
    ------
    ConfigError
        No model parameters, an unknown or unsupported nuisance name, a PBH convention the
        vectorised path does not compute (the delta-N map, g_NL, a sampled threshold with
        non-Gaussian zeta), missing
        curve files or surrogate, or a surrogate over other parameters.
    """
    if priors.n_model == 0:
        raise ConfigError(config.source, "parameters", "the posterior needs varied model "
                          "parameters", "add [[parameters]] tables (and train a surrogate)")
    for i, name in enumerate(priors.names[priors.n_model:]):
        if name in UNSUPPORTED_NUISANCE:
            raise ConfigError(config.source, f"nuisance[{i}].name",
                              f"'{name}': {UNSUPPORTED_NUISANCE[name]}",
                              "remove this [[nuisance]] table")
        if name not in NUISANCE_NAMES:
            raise ConfigError(config.source, f"nuisance[{i}].name",
                              f"'{name}' is not a nuisance parameter of the likelihood",
                              "use one of: " + ", ".join(
                                  f"{k} ({v})" for k, v in NUISANCE_NAMES.items()))
    check_threshold_prior(config, priors)
    check_collapse_k_prior(config, priors)
    require_batch_conventions(config.observables, config.source)
    if config.observables.non_gaussianity != "gaussian" and threshold_range(priors):
        i = list(priors.names[priors.n_model:]).index(THRESHOLD)
        raise ConfigError(config.source, f"nuisance[{i}]", "a sampled pbh.threshold needs "
                          "observables.non_gaussianity = 'gaussian' (the non-Gaussian stack "
                          "fixes its thresholds when it is planned, not per walker)", "remove this [[nuisance]] table and set "
                          "observables.threshold, or sample it with Gaussian zeta")
    paths = curve_paths_of(config)
    surrogate = config.likelihood.surrogate or str(RunFolder.of(config).surrogate)
    if not Path(surrogate).is_file():
        raise ConfigError(config.source, "likelihood.surrogate",
                          f"surrogate file '{surrogate}' not found",
                          "run 'zetascan train CONFIG' first, or set likelihood.surrogate")
    terms = build_terms(config, paths)
    snr = tuple(t.name for t in terms if isinstance(t, Sensitivity) and t.form == "noise")
    target = PosteriorTarget(config=config, priors=priors, surrogate_path=surrogate,
                             curve_paths=paths, snr_curves=snr,
                             term_names=tuple(t.name for t in terms))
    target.prepare()
    return target


def width_prior_note(target: TargetBase, draws: int = 512) -> str | None:
    """How much of a mapped width prior the sampled box keeps (None without one).

    ln w_w of ``draws`` points of the box prior (seeded by ``run.seed``) comes from the
    target's surrogate; where the box cuts the width prior, the posterior follows the box.
    """
    priors = getattr(target, "priors", None)
    mapped = None if priors is None else priors.width_prior
    if mapped is None:
        return None
    theta = priors.sample(np.random.default_rng(target.config.run.seed), draws)
    model = theta[:, :priors.n_model][:, target.loaded["order"]]
    kept = mapped.kept_mass(target.loaded["surrogate"].predict(model).ln_wall_width)
    lo, mid, hi = np.nanpercentile(kept, [5, 50, 95])
    text = (f"width prior of {mapped.key}: the sampled box keeps {mid:.0%} of its mass "
            f"(median over {draws} prior draws; 5-95 %: {lo:.0%}-{hi:.0%})")
    if lo < 0.5:
        text += "; where it keeps little, the box, not the width prior, shapes the posterior"
    return text
