"""f_PBH of a stack of spectra, each with its own model's delta-N map: ``model`` on the
sampler's, the grid's and verify's batch path.

Each spectrum carries its map as the capped logarithmic map (lambda, slope_max; the
surrogate's ``ng`` block emulates them, :func:`scan.observables.pbh.map_fit.fit_capped`
of the model's delta-N map at its peak); spectra without one (NaN: log10 P_peak below
:data:`~scan.observables.pbh.map_fit.NG_LEVEL`) keep Gaussian zeta.  The stack is
:class:`~scan.observables.pbh.ng_stack.StackedNGPlan` with the parameters per spectrum.
How well the representation reproduces the tabulated map's f_PBH:
docs/ng_model_representation.md.

Units: masses [M_sun]; everything else [1].
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from scan.observables.pbh.ng_stack import MappedStackPlan, plan_pbh_mapped
from scan.observables.pbh.plan import PBHResult
from scan.observables.pbh.zeta_map import ZetaMap

#: The map the stack is planned with (replaced per spectrum at every evaluation).
_PLANNED = ZetaMap("logarithmic", log_lambda=1.0, slope_max=4.0)


@dataclass(frozen=True)
class ModelMapPlan:
    """The ``evaluate(P_stack, zeta_map=...)`` protocol of the batch path for ``model``."""

    mapped: MappedStackPlan

    @property
    def M(self) -> np.ndarray:
        """Output masses [M_sun]."""
        return self.mapped.M

    def evaluate(self, P_zeta, thresholds=None, zeta_map: ZetaMap | None = None
                 ) -> PBHResult:
        """f_PBH of a stack (m, n_k) [1] with each spectrum's map (``zeta_map``: a
        logarithmic map whose ``log_lambda`` and ``slope_max`` are arrays (m,), NaN for
        Gaussian zeta), the Gaussian total beside it (``f_pbh_total_gaussian``).

        Raises
        ------
        ValueError
            Without ``zeta_map``, or with per-spectrum thresholds.
        """
        if zeta_map is None or thresholds is not None:
            raise ValueError("the model-map plan needs each spectrum's map (zeta_map) and "
                             "takes no per-spectrum thresholds")
        P2 = np.atleast_2d(np.asarray(P_zeta, dtype=float))
        gauss = (self.mapped.gaussian or self.mapped.stacked.ng.base).evaluate(P2)
        f = np.array(np.atleast_2d(gauss.f_pbh), dtype=float)
        total = np.array(np.atleast_1d(gauss.f_pbh_total), dtype=float)
        lam = np.broadcast_to(np.asarray(zeta_map.log_lambda, dtype=float), total.shape)
        on = np.flatnonzero(np.isfinite(lam))
        if on.size:
            sub = self.mapped.stacked.evaluate(P2[on], zeta_map.of_spectra(on))
            f[on], total[on] = sub.f_pbh, sub.f_pbh_total
        return replace(gauss, f_pbh=f, f_pbh_total=total,
                       f_pbh_total_gaussian=np.atleast_1d(gauss.f_pbh_total))


def plan_pbh_model(k_table, masses, conventions, **kw) -> ModelMapPlan:
    """The batch path's f_PBH plan for ``model`` (keywords as
    :func:`~scan.observables.pbh.ng_stack.plan_pbh_mapped`)."""
    return ModelMapPlan(plan_pbh_mapped(k_table, masses, conventions, _PLANNED, **kw))
