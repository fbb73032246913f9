"""A run's likelihood from its config: the curve files of ``[likelihood]`` and their terms."""
from __future__ import annotations

from pathlib import Path

from scan.config.schema import RunConfig
from scan.curves import load_curve
from scan.curves.scalars import load_scalar_bounds
from scan.errors import ConfigError
from scan.likelihood.base import Term
from scan.likelihood.build import term_for_curve, terms_from_scalars
from scan.likelihood.pbh import PBHBounds
from scan.likelihood.scalar import bicep_keck_2021_r, planck2018_pivot_priors
from scan.likelihood.upper import UpperLimit


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
                                  "give an existing file, relative to the config file")
        return tuple(section.curves)
    if not section.directory:
        raise ConfigError(config.source, "likelihood.curves",
                          "no bound curves: the run names neither likelihood.curves nor "
                          "likelihood.directory",
                          "list your curve files in likelihood.curves, relative to the config "
                          "file; the invented demo curves are in constraints/demo")
    folder = Path(section.directory)
    if not folder.is_dir():
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' is not a folder",
                          "give an existing folder of bound curves, relative to the config "
                          "file, or list likelihood.curves")
    paths = tuple(str(p) for p in sorted(folder.glob("*.csv")) + sorted(folder.glob("*.toml")))
    if not paths:
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' has no *.csv or *.toml files",
                          "point it at a folder of bound curves")
    return paths


def build_terms(config: RunConfig, paths: tuple[str, ...]) -> list[Term]:
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
    terms: list[Term] = []
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
