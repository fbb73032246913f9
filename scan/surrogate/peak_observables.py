"""The validation report's observables: Ω_GW peak and f_PBH total of emulated spectra.

The same shared-grid plan and functions the posterior uses (:mod:`scan.observables.batch`),
so the report measures the surrogate's error where the posterior will feel it.
"""
from __future__ import annotations

import numpy as np

from scan.observables.batch import gw_on_grids, pbh_on_table, plan_batch
from scan.observables.pbh import PBHConventions
from scan.surrogate.record import shape_grid

#: Smallest value taken before a logarithm.
_FLOOR = 1e-300


class PeakObservables:
    """``(ln_k_peak, log10_P_peak, shape, x) -> {log10_omega_gw_h2_peak, log10_fpbh_total}``.

    The validation report's view of the observables: the same shared-grid plan and the
    same functions the posterior uses (:func:`plan_batch`, :func:`gw_on_grids`,
    :func:`pbh_on_table`), with the default PBH conventions.

    Parameters
    ----------
    x : ndarray
        The shape grid ln(k/k_peak).
    ln_k_range : (float, float)
        Range of ln k_peak [ln(Mpc^-1)] the grids must cover.
    n_out : int
        Output wavenumbers of Omega_GW (over ``x[0] .. x[-1] + ln 2``).
    """

    def __init__(self, x: np.ndarray, ln_k_range: tuple[float, float], n_out: int = 48) -> None:

        self.x = np.asarray(x, float)
        self.plan = plan_batch(self.x, ln_k_range, PBHConventions(), n_out=n_out, n_mass=32)

    def __call__(self, ln_k_peak, log10_P_peak, shape, x) -> dict[str, np.ndarray]:
        """Both observables for p points (``x`` must be the grid given at construction)."""
        if not np.array_equal(np.asarray(x, float), self.x):
            raise ValueError("shape grid differs from the one the observables were planned on")
        ln_k_peak = np.asarray(ln_k_peak, float)
        log10_p = np.asarray(log10_P_peak, float)[:, None] + np.asarray(shape, float)
        omega_peak = gw_on_grids(self.plan, ln_k_peak, log10_p)[2]
        total = pbh_on_table(self.plan, ln_k_peak, log10_p).f_pbh_total
        return {"log10_omega_gw_h2_peak": np.log10(np.maximum(omega_peak, _FLOOR)),
                "log10_fpbh_total": np.log10(np.maximum(total, _FLOOR))}


def observables_for(config, space, ln_k_range: tuple[float, float] | None = None):
    """A :class:`PeakObservables` factory for validation.

    Returns a callable that plans on first use from the ln k_peak values it is given
    (padded by 1), so the same plans serve the exact and the emulated spectra.
    """
    x = shape_grid(config.surrogate.shape_span, config.surrogate.shape_points)
    state: dict = {}

    def evaluate(ln_k_peak, log10_P_peak, shape, grid):
        if "plan" not in state:
            finite = np.asarray(ln_k_peak, float)[np.isfinite(ln_k_peak)]
            lo, hi = ln_k_range or (float(finite.min()) - 1.0, float(finite.max()) + 1.0)
            state["plan"] = PeakObservables(x, (lo, hi))
        return state["plan"](ln_k_peak, log10_P_peak, shape, grid)

    return evaluate
