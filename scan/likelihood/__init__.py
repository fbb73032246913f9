"""Likelihood terms built from bound curves, CMB priors and the total log-likelihood.

Every term is a small frozen object with a ``name`` and ``term(obs, nuisance) -> ln L``
(the :class:`~scan.likelihood.base.Term` protocol) reading the one observables record
:class:`scan.observables.Observables`; curve kinds map to term classes in
:data:`~scan.likelihood.build.TERM_KINDS`.  Pure math: files are read in
``scan.curves`` and turned into terms by ``scan.likelihood.build``.  ``plan_terms``
(``scan.likelihood.grid``) plans a term set once for observables that always come on the
same grids (a sampler's), with the same numbers.
"""
from scan.likelihood.base import Term
from scan.likelihood.build import (term_for_curve, terms_from_curves, terms_from_directory,
                                   terms_from_scalars)
from scan.likelihood.excess import (DensityGridExcess, SplitNormalExcess, power_law_omega_h2,
                                    power_law_rho, smbhb_omega_h2)
from scan.likelihood.grid import PlannedTerms, plan_terms
from scan.likelihood.pbh import PBHBounds, carr_integral
from scan.likelihood.scalar import (NEFF_COEFFICIENT, GaussianPrior, NeffBound, OneSidedLimit,
                                    bicep_keck_2021_r, integrated_omega_h2, neff_integral_limit,
                                    planck2018_pivot_priors)
from scan.likelihood.sensitivity import Sensitivity
from scan.likelihood.total import binding_term, total_loglike
from scan.likelihood.upper import UpperLimit, half_normal_sigma

__all__ = [
    "NEFF_COEFFICIENT", "DensityGridExcess", "GaussianPrior", "NeffBound",
    "OneSidedLimit", "PBHBounds", "PlannedTerms", "Sensitivity", "SplitNormalExcess",
    "Term", "UpperLimit",
    "bicep_keck_2021_r", "binding_term", "carr_integral", "half_normal_sigma",
    "integrated_omega_h2", "neff_integral_limit", "plan_terms", "planck2018_pivot_priors",
    "power_law_omega_h2", "power_law_rho", "smbhb_omega_h2", "term_for_curve",
    "terms_from_curves", "terms_from_directory", "terms_from_scalars", "total_loglike",
]
