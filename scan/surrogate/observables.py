"""Ω_GW h² and f_PBH recomputed from emulated spectra (through :mod:`scan.sigw`, :mod:`scan.pbh`).

The emulated spectrum is log10 P on ``x = ln(k/k_peak)``; it is taken as zero outside
that grid (so compare like with like: validation feeds the exact hold-out spectra
through the same grid).

* Ω_GW: the radiation-era integral ∫∫ K(u, v) P(ku) P(kv) depends on k only through
  P(ku), P(kv), so one plan on the table ``e^x`` (k_peak = 1) serves every point: the
  quadratic form of :mod:`scan.sigw_quadratic` (the sampler's, so the validation report
  measures what the sampler sees); the transfer to today is applied at the absolute
  wavenumbers ``k_peak e^x_out``.
* f_PBH: the abundance depends on the absolute horizon mass (g_*), so spectra are put
  on one absolute ln k table covering all peaks and one :func:`scan.pbh.plan_pbh` is
  reused.
"""
from __future__ import annotations

import numpy as np

#: Table spacing of the absolute ln k grid for f_PBH [e-folds of k].
LNK_STEP = 0.05
_FLOOR = 1e-300


class PeakObservables:
    """``(ln_k_peak, log10_P_peak, shape, x) -> {log10_omega_peak, log10_fpbh_total}``.

    Parameters
    ----------
    x : ndarray
        The shape grid ln(k/k_peak).
    ln_k_range : (float, float)
        Range of ln k_peak [ln(Mpc^-1)] the f_PBH table must cover.
    n_out : int
        Output wavenumbers of Ω_GW (over ``x[0] .. x[-1] + ln 2``).
    """

    def __init__(self, x: np.ndarray, ln_k_range: tuple[float, float], n_out: int = 48) -> None:
        from scan import cosmo
        from scan.pbh import plan_pbh
        from scan.sigw_quadratic import plan_quadratic

        self.x = np.asarray(x, float)
        self.x_out = np.linspace(self.x[0], self.x[-1] + np.log(2.0), n_out)
        self.sigw = plan_quadratic(np.exp(self.x), np.exp(self.x_out))
        self._transfer = cosmo.gw_transfer_h2
        lo, hi = ln_k_range
        self.lnk_table = np.arange(lo + self.x[0] - 1.0, hi + self.x[-1] + 1.0, LNK_STEP)
        k = np.exp(self.lnk_table)
        masses = np.geomspace(cosmo.horizon_mass_msun(k[-1]), cosmo.horizon_mass_msun(k[0]), 32)
        self.pbh = plan_pbh(k, masses)

    def omega_peak(self, ln_k_peak: np.ndarray, log10_p: np.ndarray) -> np.ndarray:
        """log10 of the maximum of Ω_GW,0 h² over frequency, per point.

        Parameters
        ----------
        ln_k_peak : ndarray, shape (p,)
            ln k_peak [ln(Mpc^-1)] of each point.
        log10_p : ndarray, shape (p, n_x)
            log10 P_zeta on the shape grid ``x``.

        Returns
        -------
        ndarray, shape (p,)
        """
        ln_k_peak = np.asarray(ln_k_peak, float)
        transfer = np.asarray(self._transfer(np.exp(ln_k_peak[:, None] + self.x_out[None, :])))
        omega = transfer * self.sigw.omega_gw(10.0 ** np.asarray(log10_p, float))
        return np.log10(np.maximum(omega.max(axis=1), _FLOOR))

    def fpbh_total(self, ln_k_peak: np.ndarray, log10_p: np.ndarray) -> np.ndarray:
        """log10 of the total f_PBH per point.

        Parameters
        ----------
        ln_k_peak : ndarray, shape (p,)
            ln k_peak [ln(Mpc^-1)] of each point.
        log10_p : ndarray, shape (p, n_x)
            log10 P_zeta on the shape grid ``x``.

        Returns
        -------
        ndarray, shape (p,)
        """
        log_p = _interp_shifted(self.lnk_table, np.asarray(ln_k_peak, float), self.x,
                                np.asarray(log10_p, float))
        total = self.pbh.evaluate(10.0 ** log_p).f_pbh_total
        return np.log10(np.maximum(total, _FLOOR))

    def __call__(self, ln_k_peak, log10_P_peak, shape, x) -> dict[str, np.ndarray]:
        """Both observables for p points (``x`` must be the grid given at construction)."""
        if not np.array_equal(np.asarray(x, float), self.x):
            raise ValueError("shape grid differs from the one the observables were planned on")
        ln_k_peak = np.asarray(ln_k_peak, float)
        log10_p = np.asarray(log10_P_peak, float)[:, None] + np.asarray(shape, float)
        return {"log10_omega_gw_h2_peak": self.omega_peak(ln_k_peak, log10_p),
                "log10_fpbh_total": self.fpbh_total(ln_k_peak, log10_p)}


def _interp_shifted(x: np.ndarray, shift: np.ndarray, grid: np.ndarray,
                    fp: np.ndarray) -> np.ndarray:
    """``np.interp(x, shift[i] + grid, fp[i], left=-inf, right=-inf)`` for all rows at once.

    Parameters
    ----------
    x : ndarray, shape (n,)
        Where to interpolate.
    shift : ndarray, shape (p,)
        Offset of each row's abscissae.
    grid : ndarray, shape (n_x,)
        Increasing abscissae common to all rows (before the shift).
    fp : ndarray, shape (p, n_x)
        Finite ordinates, one row per point.

    Returns
    -------
    ndarray, shape (p, n)
        The formula of :func:`numpy.interp` (slope of the bracketing pair, exact at the
        nodes) on the abscissae ``shift[i] + grid``; -inf outside each row's range.
    """
    xp = shift[:, None] + grid[None, :]
    rows = np.arange(xp.shape[0])[:, None]
    top = grid.size - 2
    # bracket: xp[i, j] <= x < xp[i, j + 1]; searchsorted on x - shift, then one exact
    # correction step against xp itself (the two differ only by rounding)
    j = np.clip(np.searchsorted(grid, x[None, :] - shift[:, None], side="right") - 1, 0, top)
    j = np.where(xp[rows, j] > x, j - 1, j).clip(0, top)
    j = np.where(xp[rows, j + 1] <= x, j + 1, j).clip(0, top)
    x0, x1, f0, f1 = xp[rows, j], xp[rows, j + 1], fp[rows, j], fp[rows, j + 1]
    out = np.where(x == x0, f0, (f1 - f0) / (x1 - x0) * (x - x0) + f0)
    out = np.where(x == xp[:, -1:], fp[:, -1:], out)
    return np.where((x < xp[:, :1]) | (x > xp[:, -1:]), -np.inf, out)


def observables_for(config, space, ln_k_range: tuple[float, float] | None = None):
    """A :class:`PeakObservables` factory for validation, or None without the modules.

    Returns a callable that plans on first use from the ln k_peak values it is given
    (padded by 1), so the same plans serve the exact and the emulated spectra.
    """
    try:
        import scan.pbh  # noqa: F401
        import scan.sigw  # noqa: F401
    except ImportError:
        return None
    from scan.surrogate.record import shape_grid

    x = shape_grid(config.surrogate.shape_span, config.surrogate.shape_points)
    state: dict = {}

    def evaluate(ln_k_peak, log10_P_peak, shape, grid):
        if "plan" not in state:
            finite = np.asarray(ln_k_peak, float)[np.isfinite(ln_k_peak)]
            lo, hi = ln_k_range or (float(finite.min()) - 1.0, float(finite.max()) + 1.0)
            state["plan"] = PeakObservables(x, (lo, hi))
        return state["plan"](ln_k_peak, log10_P_peak, shape, grid)

    return evaluate
