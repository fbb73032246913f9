"""Likelihood terms from curves and scalar-bound specs (the bridge from files to math)."""
from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from scan.curves import Curve, load_curve
from scan.curves.scalars import ScalarBounds, load_scalar_bounds
from scan.likelihood.base import Term
from scan.likelihood.excess import DensityGridExcess, SplitNormalExcess
from scan.likelihood.pbh import PBHBounds
from scan.likelihood.scalar import NeffBound, bicep_keck_2021_r, planck2018_pivot_priors
from scan.likelihood.sensitivity import Sensitivity
from scan.likelihood.upper import UpperLimit

#: The term class of each GW curve kind (``#: kind`` in the curve file); every class
#: builds itself with ``from_curve(curve)``.  Sensitivity curves also take a mode.
TERM_KINDS: dict[str, type] = {"upper_limit": UpperLimit, "detection": SplitNormalExcess,
                               "posterior_grid": DensityGridExcess, "sensitivity": Sensitivity}


def term_for_curve(curve: Curve, sensitivity_mode: str = "report") -> Term:
    """The term of one GW curve (f_PBH limits go to :func:`terms_from_curves` as a group)."""
    cls = TERM_KINDS.get(curve.kind, Sensitivity)
    if cls is Sensitivity:
        return Sensitivity.from_curve(curve, mode=sensitivity_mode)
    return cls.from_curve(curve)


def terms_from_curves(curves: Sequence[Curve], pbh_combine: str = "max",
                      sensitivity_mode: str = "report") -> list[Term]:
    """One term per GW curve plus one :class:`PBHBounds` for all f_PBH limits."""
    pbh = [c for c in curves if c.y_quantity == "f_pbh"]
    terms = [term_for_curve(c, sensitivity_mode) for c in curves if c.y_quantity != "f_pbh"]
    if pbh:
        terms.append(PBHBounds.from_curves(pbh, combine=pbh_combine))
    return terms


def terms_from_scalars(spec: ScalarBounds) -> list[Term]:
    """N_eff bound and CMB priors asked for by a scalar-bounds file."""
    terms: list[Term] = []
    if spec.neff is not None:
        n = spec.neff
        terms.append(NeffBound(n.name, n.delta_neff, n.f_min_hz, n.f_max_hz, n.method,
                               n.confidence))
    if spec.planck2018_pivot:
        terms.extend(planck2018_pivot_priors())
    if spec.bicep_keck_2021_r:
        terms.append(bicep_keck_2021_r())
    return terms


def terms_from_directory(folder: str | Path, **options) -> list[Term]:
    """Terms of every ``*.csv`` curve and ``*.toml`` scalar file in ``folder``."""
    folder = Path(folder)
    curves = [load_curve(p) for p in sorted(folder.glob("*.csv"))]
    terms = terms_from_curves(curves, **options)
    for p in sorted(folder.glob("*.toml")):
        terms.extend(terms_from_scalars(load_scalar_bounds(p)))
    return terms
