"""The config side of the posterior: which curve files, which likelihood terms, which nuisance.

:func:`posterior_target` checks a run config (model parameters, nuisance names, curve
files, the surrogate file) and returns a prepared
:class:`scan.posterior.target.PosteriorTarget`.
"""
from __future__ import annotations

from pathlib import Path

from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.curves import load_curve
from scan.curves.scalars import load_scalar_bounds
from scan.errors import ConfigError
from scan.likelihood import (PBHBounds, UpperLimit, bicep_keck_2021_r, planck2018_pivot_priors,
                             term_for_curve, terms_from_scalars)

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


def curve_paths_of(config: RunConfig) -> tuple[str, ...]:
    """The curve and scalar-bound files of ``[likelihood]`` (checked to exist).

    Raises
    ------
    ConfigError
        A listed file or the directory does not exist, or nothing is found.
    """
    section = config.likelihood
    if section.curves:
        for i, name in enumerate(section.curves):
            path = Path(name)
            if not path.is_file() or path.suffix not in (".csv", ".toml"):
                raise ConfigError(config.source, f"likelihood.curves[{i}]",
                                  f"'{name}' is not a .csv curve or .toml scalar-bound file",
                                  "give an existing file, relative to the working directory")
        return tuple(section.curves)
    folder = Path(section.directory)
    if not folder.is_dir():
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' is not a folder",
                          "give an existing folder of bound curves (e.g. constraints/demo), "
                          "relative to the working directory, or list likelihood.curves")
    paths = tuple(str(p) for p in sorted(folder.glob("*.csv")) + sorted(folder.glob("*.toml")))
    if not paths:
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' has no *.csv or *.toml files",
                          "point it at a folder of bound curves")
    return paths


def build_terms(config: RunConfig, paths: tuple[str, ...]) -> list:
    """The likelihood terms of the files ``paths`` with the ``[likelihood]`` options.

    Upper limits on Omega_GW h^2 take the method of ``[[likelihood.methods]]`` when
    listed; the CMB priors are included once when ``cmb_priors`` is true and left out
    otherwise.

    Raises
    ------
    ConfigError
        A ``[[likelihood.methods]]`` entry names no Omega_GW upper-limit curve.
    """

    section = config.likelihood
    curves = [load_curve(p) for p in paths if p.endswith(".csv")]
    methods = {m.curve: m.method for m in section.methods}
    upper = {c.name for c in curves if c.kind == "upper_limit" and c.y_quantity != "f_pbh"}
    for i, m in enumerate(section.methods):
        if m.curve not in upper:
            raise ConfigError(config.source, f"likelihood.methods[{i}].curve",
                              f"'{m.curve}' is not an Omega_GW h^2 upper-limit curve of this "
                              "run", f"use one of {sorted(upper)}" if upper else
                              "remove the entry")
    terms: list = []
    for c in curves:
        if c.y_quantity == "f_pbh":
            continue
        if c.name in methods:
            terms.append(UpperLimit.from_curve(c, method=methods[c.name]))
        else:
            terms.append(term_for_curve(c, section.sensitivity_mode))
    pbh = [c for c in curves if c.y_quantity == "f_pbh"]
    if pbh:
        terms.append(PBHBounds.from_curves(pbh, combine=section.pbh_combine))
    for p in paths:
        if p.endswith(".toml"):
            terms.extend(terms_from_scalars(load_scalar_bounds(p)))
    cmb = [*planck2018_pivot_priors(), bicep_keck_2021_r()]
    cmb_names = {t.name for t in cmb}
    terms = [t for t in terms if t.name not in cmb_names]
    if section.cmb_priors:
        terms.extend(cmb)
    return terms


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
