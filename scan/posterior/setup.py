"""The posterior's nuisance parameters: their names, prior ranges and checks.

The curve files and likelihood terms of a run are :mod:`scan.likelihood.from_config`;
:func:`scan.posterior.build.posterior_target` puts both together.
"""
from __future__ import annotations

from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError
from scan.observables.pbh import plan_pbh_thresholds
from scan.observables.pbh.map_fit import NG_LEVEL
from scan.observables.pbh.ng_model_plan import plan_pbh_model
from scan.observables.pbh.ng_stack import plan_pbh_mapped
from scan.observables.pbh.zeta_map import ZetaMap

#: The nuisance name of the PBH collapse threshold.
THRESHOLD = "pbh.threshold"
#: The nuisance name of the critical-collapse coefficient K.
COLLAPSE_K = "pbh.collapse_K"

#: Nuisance parameters the posterior understands (name -> what it is).
NUISANCE_NAMES: dict[str, str] = {
    "A_smbhb": "SMBH-binary foreground amplitude of the PTA excess terms",
    THRESHOLD: "PBH collapse threshold (C_th for the compaction criterion, delta_c for "
               "the linear ones; replaces observables.threshold; needs low and high)",
    COLLAPSE_K: "critical-collapse coefficient K of M = K M_H (C - C_th)^gamma_c (replaces "
                "observables.collapse_K; critical mass function; needs low > 0 and high)"}
#: Nuisance parameters that are planned but not yet supported.
UNSUPPORTED_NUISANCE: dict[str, str] = {}


def nuisance_range(priors: PriorSet, name: str) -> tuple[float, float] | None:
    """(low, high) of the nuisance prior ``name``, or None if not sampled."""
    for prior in priors.priors[priors.n_model:]:
        if prior.name == name:
            return float(prior.low), float(prior.high)
    return None


def threshold_range(priors: PriorSet) -> tuple[float, float] | None:
    """(low, high) of the ``pbh.threshold`` nuisance prior, or None if not sampled."""
    return nuisance_range(priors, THRESHOLD)


def check_collapse_k_prior(config: RunConfig, priors: PriorSet) -> None:
    """A sampled K needs a positive, bounded prior and the critical mass function.

    Raises
    ------
    ConfigError
        Not inside (0, inf), or ``observables.mass_function`` is not ``critical``.
    """
    span = nuisance_range(priors, COLLAPSE_K)
    if span is None:
        return
    where = f"nuisance[{list(priors.names[priors.n_model:]).index(COLLAPSE_K)}]"
    if config.observables.mass_function != "critical":
        raise ConfigError(config.source, where, "pbh.collapse_K enters only the critical-"
                          f"collapse mass function, the run has mass_function = "
                          f"'{config.observables.mass_function}'",
                          "set observables.mass_function = \"critical\" or remove this table")
    lo, hi = span
    if not (0.0 < lo <= hi < float("inf")):
        raise ConfigError(config.source, where, f"the pbh.collapse_K prior spans [{lo:g}, "
                          f"{hi:g}]; K must be positive and bounded",
                          "give 0 < low <= high around the default K = 3.3 (Niemeyer & "
                          "Jedamzik 1998); K depends on the perturbation profile")


def check_threshold_prior(config: RunConfig, priors: PriorSet) -> None:
    """The threshold prior must be bounded inside the criterion's domain.

    Raises
    ------
    ConfigError
        Unbounded, or outside (0, 2/3) for the compaction criterion / (0, inf) otherwise.
    """
    span = threshold_range(priors)
    if span is None:
        return
    i = list(priors.names[priors.n_model:]).index(THRESHOLD)
    lo, hi = span
    top = 2.0 / 3.0 if config.observables.criterion == "compaction" else float("inf")
    if not (0.0 < lo <= hi < top):
        raise ConfigError(config.source, f"nuisance[{i}]",
                          f"the pbh.threshold prior spans [{lo:g}, {hi:g}], which is not "
                          f"inside (0, {top:.4g}) for criterion = "
                          f"'{config.observables.criterion}'",
                          "give low and high inside that range (thresholds are "
                          "window-specific: C_th ~ 0.5 for the Gaussian-window compaction)")


def pbh_plan_of(settings, span: tuple[float, float] | None):
    """The batch path's f_PBH plan factory ``(k_table, masses) -> plan`` for observable
    ``settings``: for ``model`` the stack with each spectrum's emulated map
    (:mod:`scan.observables.pbh.ng_model_plan`); the stacked non-Gaussian plan for a
    non-Gaussian map (with the QCD-era
    conventions, if any), the threshold plan
    over ``span`` for a sampled threshold or a QCD-era convention (per-epoch thresholds
    and exponents; a sampled threshold is the radiation-era value they scale), else None
    (the Gaussian default)."""
    conventions, dof, n_eff, zmap = (settings.conventions, settings.dof, settings.n_eff,
                                     settings.zeta_map)
    qcd = {"qcd_threshold": settings.qcd_threshold, "qcd_collapse": settings.qcd_collapse}
    if settings.non_gaussianity == "model":
        return lambda k_table, masses: plan_pbh_model(k_table, masses, conventions,
                                                      dof=dof, n_eff=n_eff, **qcd)
    if zmap is not None and not zmap.is_gaussian:
        return lambda k_table, masses: plan_pbh_mapped(k_table, masses, conventions, zmap,
                                                       dof=dof, n_eff=n_eff, **qcd)
    if span is not None or set(qcd.values()) != {"off"}:
        return lambda k_table, masses: plan_pbh_thresholds(k_table, masses, conventions,
                                                           span, dof=dof, n_eff=n_eff, **qcd)
    return None


def require_emulated_map(config: RunConfig, surrogate, path: str) -> None:
    """``non_gaussianity = 'model'`` needs a surrogate that emulates the delta-N map.

    Raises
    ------
    ConfigError
        The surrogate has no ``ng`` block (trained with another convention, or before it
        existed).
    """
    if config.observables.non_gaussianity == "model" and surrogate.emulator.ng is None:
        raise ConfigError(config.source, "observables.non_gaussianity",
                          f"'model' needs a surrogate that emulates each model's delta-N "
                          f"map; '{path}' does not (trained with another "
                          "non_gaussianity, or before the map was emulated)",
                          "retrain it with observables.non_gaussianity = \"model\" "
                          "(zetascan train computes the map of every point with "
                          f"log10 P_peak >= {NG_LEVEL:g})")


def emulated_map(config: RunConfig, pred, keep) -> ZetaMap | None:
    """The per-spectrum capped logarithmic maps of the predictions ``pred[keep]`` for
    ``model`` (NaN parameters: Gaussian there), else None."""
    if config.observables.non_gaussianity != "model":
        return None
    return ZetaMap("logarithmic", log_lambda=pred.ng_log_lambda[keep],
                   slope_max=pred.ng_slope_max[keep])
