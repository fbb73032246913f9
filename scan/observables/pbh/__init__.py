"""Primordial black holes from a curvature spectrum: sigma^2(R), formation criteria,
critical collapse, the extended mass function f_PBH(M) per ln M and its total.

Public API re-exported here; see the sub-modules for the formulas and sources.
"""
from scan.observables.pbh.abundance import (abundance_coefficient, beta_monochromatic,
                                            beta_weighted, fpbh_prefactor)
from scan.observables.pbh.conventions import CRITERIA, MASS_FUNCTIONS, PBHConventions
from scan.observables.pbh.plan import PBHPlan, PBHResult, f_pbh, plan_pbh
from scan.observables.pbh.threshold_plan import ThresholdPlan, ThresholdResult, plan_pbh_thresholds
from scan.observables.pbh.thresholds import (compaction_linear, compaction_linear_threshold,
                                             compaction_nonlinear, delta_c_harada)
from scan.observables.pbh.variance import (WINDOWS, transfer_rd, variance, variance_delta,
                                           variance_matrix, window)

__all__ = [
    "abundance_coefficient", "beta_monochromatic", "beta_weighted", "fpbh_prefactor",
    "CRITERIA", "MASS_FUNCTIONS", "PBHConventions", "PBHPlan", "PBHResult", "f_pbh",
    "plan_pbh", "ThresholdPlan", "ThresholdResult", "plan_pbh_thresholds",
    "compaction_linear", "compaction_linear_threshold", "compaction_nonlinear",
    "delta_c_harada", "WINDOWS", "transfer_rd", "variance", "variance_delta",
    "variance_matrix", "window",
]
