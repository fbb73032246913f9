"""Precomputed PBH evaluation for a fixed spectrum grid and output masses."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.observables import cosmo
from scan.observables.pbh.abundance import (_relation, abundance_coefficient, beta_monochromatic,
                                            beta_weighted, critical_kernel)
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.kernel import MassKernel, mass_function, mass_kernel
from scan.observables.pbh.tables import BetaTable, beta_table, beta_tabulated
from scan.observables.pbh.variance import variance_matrix

#: exp(-nu^2/2) is exactly 0 in double precision for nu^2/2 >= this (exp underflows to 0
#: below -745.2).
UNDERFLOW_HALF_NU2: float = 760.0


@dataclass(frozen=True)
class PBHResult:
    """f_PBH(M) per ln M with everything needed to reproduce it.

    For a stack of m spectra (see :meth:`PBHPlan.evaluate`) the spectrum-dependent
    attributes carry a leading axis of length m.

    Attributes
    ----------
    M : ndarray [M_sun]
        Output masses, shape (n_M,).
    f_pbh : ndarray [1]
        Fraction of dark matter per ln M, shape (n_M,) or (m, n_M).
    f_pbh_total : float or ndarray [1]
        int f dln M over all masses (not only the output grid): a float for one
        spectrum, shape (m,) for a stack.
    M_H : ndarray [M_sun]
        Horizon masses of the formation epochs, shape (n_H,).
    sigma2 : ndarray [1]
        Smoothed variance at each M_H, shape (n_H,) or (m, n_H).
    conventions : PBHConventions
    f_pbh_total_gaussian : float or ndarray or None [1]
        The same spectra's total with Gaussian zeta, beside a non-Gaussian one
        (:class:`scan.observables.pbh.ng_stack.MappedStackPlan`); None otherwise.
    """

    M: np.ndarray
    f_pbh: np.ndarray
    f_pbh_total: float | np.ndarray
    M_H: np.ndarray
    sigma2: np.ndarray
    conventions: PBHConventions
    f_pbh_total_gaussian: float | np.ndarray | None = None


@dataclass(frozen=True)
class PBHPlan:
    """The P_zeta-independent parts of f_PBH(M) (see :func:`plan_pbh`).

    Every method takes one spectrum, shape (n_k,), or a stack of m spectra on the same
    table, shape (m, n_k), and then returns arrays with a leading axis of length m.
    """

    k_in: np.ndarray
    M: np.ndarray
    M_H: np.ndarray
    conventions: PBHConventions
    _v0: np.ndarray
    _v1: np.ndarray
    _coef: np.ndarray
    _wln: np.ndarray
    _y: np.ndarray | None
    _weight: np.ndarray | None
    _kernel: MassKernel | None = None
    _beta_table: BetaTable | None = None

    def sigma2(self, P_zeta) -> tuple[np.ndarray, np.ndarray]:
        """sigma^2 [1] and <k^2> R^2 [1] at every formation horizon mass.

        Parameters
        ----------
        P_zeta : array_like [1]
            Shape (n_k,) or (m, n_k) on ``k_in``.

        Returns
        -------
        sigma2, kR2 : ndarray [1]
            Each of shape (n_H,) or (m, n_H).
        """
        P = np.asarray(P_zeta, dtype=float)
        if P.ndim not in (1, 2) or P.shape[-1] != self.k_in.size:
            raise ValueError(f"P_zeta must have shape ({self.k_in.size},) or "
                             f"(m, {self.k_in.size}), got {P.shape}")
        # columns where every spectrum vanishes add exactly 0: skip them (a walker's
        # window covers a fraction of the shared table)
        cols = np.flatnonzero(np.any(P != 0, axis=tuple(range(P.ndim - 1))))
        lo, hi = (int(cols[0]), int(cols[-1]) + 1) if cols.size else (0, 0)
        s0 = P[..., lo:hi] @ self._v0[:, lo:hi].T
        kR2 = (P[..., lo:hi] @ self._v1[:, lo:hi].T) / np.where(s0 > 0, s0, 1.0) \
            if self._v1.size else np.ones_like(s0)
        return s0, kR2

    def evaluate(self, P_zeta) -> PBHResult:
        """f_PBH(M) per ln M [1] and the total for one or a stack of spectra on ``k_in``.

        Parameters
        ----------
        P_zeta : array_like [1]
            Shape (n_k,) for one spectrum or (m, n_k) for m spectra (evaluated together).

        Returns
        -------
        PBHResult
            ``f_pbh`` of shape (n_M,) or (m, n_M); ``f_pbh_total`` a float or shape (m,).
        """
        s0, kR2 = self.sigma2(P_zeta)
        return self.from_variance(s0, kR2)

    def from_variance(self, sigma2, kR2=None) -> PBHResult:
        """As :meth:`evaluate`, from sigma^2 (and <k^2>R^2 for peaks) at ``M_H``.

        Parameters
        ----------
        sigma2 : array_like [1]
            Shape (n_H,) or (m, n_H).
        kR2 : array_like [1], optional
            <k^2> R^2, same shape (default 1; used by ``peaks`` only).

        Returns
        -------
        PBHResult
        """
        conv = self.conventions
        s0 = np.maximum(np.asarray(sigma2, dtype=float), 1e-300)
        kR2 = np.ones_like(s0) if kR2 is None else np.broadcast_to(
            np.asarray(kR2, dtype=float), s0.shape)
        if conv.mass_function == "monochromatic":
            f_h = self._coef * beta_monochromatic(s0, kR2, conv)   # per ln M = per ln M_H
            f = _log_interp(self.M, conv.gamma * self.M_H, f_h)
            total = np.sum(self._wln * f_h, axis=-1)
        else:
            f, total = self._critical(np.atleast_2d(s0), np.atleast_2d(kR2))
            f, total = (f, total) if s0.ndim > 1 else (f[0], total[0])
        total = float(total) if s0.ndim == 1 else total
        return PBHResult(self.M, f, total, self.M_H, s0, conv)

    def _critical(self, s2: np.ndarray, k2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Critical collapse: f(M) [1], shape (m, n_M), and the totals [1], shape (m,).

        f(M) = sum_H weight(M, M_H) p(y(M, M_H)) w_H F(M_H) and the total
        sum_H w_H F(M_H) beta_weighted over the live (spectrum, epoch) pairs; the others
        contribute exactly 0 (:func:`_live_epochs`).

        Parameters
        ----------
        s2, k2 : ndarray [1]
            sigma^2 (> 0) and <k^2> R^2, shape (m, n_H).
        """
        conv = self.conventions
        live = _live_epochs(s2, k2, conv)
        n_h = s2.shape[1]
        i, h = np.divmod(np.flatnonzero(live | self._kernel.force), n_h)  # by spectrum
        f = mass_function(self._kernel, s2, k2, i, h, conv)
        if self._kernel.force.any():
            i, h = np.divmod(np.flatnonzero(live), n_h)
        s, k = s2[i, h], k2[i, h]
        beta = beta_tabulated(self._beta_table, s, k) if self._beta_table is not None \
            else beta_weighted(s, k, conv)
        total = np.bincount(i, weights=(self._wln * self._coef)[h] * beta,
                            minlength=s2.shape[0])
        return f, total


def _live_epochs(sigma2: np.ndarray, kR2: np.ndarray, conv: PBHConventions) -> np.ndarray:
    """Where the density of the Gaussian variable can be non-zero for some y >= y_th.

    Every critical-collapse node (the mass function's and :func:`beta_weighted`'s) has
    y >= y_th > 0, and every density carries the factor exp(-nu^2/2), nu = y/sigma;
    where nu_th^2/2 >= 760 that factor is exactly 0 in double precision (exp
    underflows to 0 below -745.2), so the epoch contributes exactly 0 and need not be
    evaluated.  NaN or infinite inputs stay live so that they propagate as before.

    Parameters
    ----------
    sigma2, kR2 : ndarray [1]
        sigma^2 (> 0) and <k^2> R^2 per epoch (any equal shapes).
    conv : PBHConventions

    Returns
    -------
    ndarray of bool
    """
    y_th, _ = _relation(conv)
    # nu^2/2 >= 760  <=>  sigma^2 <= y_th^2 / 1520 (NaN stays live)
    return ~(sigma2 <= y_th * y_th / (2 * UNDERFLOW_HALF_NU2)) | ~np.isfinite(kR2)


def _log_interp(x, xp, fp):
    """Interpolate fp (>= 0, last axis along xp) in ln x, ln fp; zero outside xp.

    Linear interpolation as :func:`numpy.interp` (same formula), for every row of ``fp``.
    """
    order = np.argsort(xp)
    lxp = np.log(xp[order])
    lfp = np.log(np.maximum(np.asarray(fp)[..., order], 1e-300))
    lx = np.log(x)
    j = np.clip(np.searchsorted(lxp, lx, side="right") - 1, 0, lxp.size - 2)
    slope = (lfp[..., j + 1] - lfp[..., j]) / (lxp[j + 1] - lxp[j])
    lf = slope * (lx - lxp[j]) + lfp[..., j]
    lf = np.where(lx == lxp[-1], lfp[..., -1:], lf)
    lf = np.where((lx < lxp[0]) | (lx > lxp[-1]), -np.inf, lf)
    out = np.exp(lf)
    return np.where(out > 1e-290, out, 0.0)


def plan_pbh(k_in, M_msun, conventions: PBHConventions | None = None, *,
             n_formation: int = 256, dof: cosmo.Dof = None,
             n_eff: float = cosmo.N_EFF_DEFAULT, tabulate: bool = True) -> PBHPlan:
    """Precompute f_PBH(M) for spectra on ``k_in`` [Mpc^-1] at masses ``M_msun`` [M_sun].

    Formation epochs: ``n_formation`` horizon scales k_H log-spaced over the table's
    range (R = 1/k_H), weighted by the trapezoid rule in ln M_H.  Masses may be given
    as an astropy Quantity (e.g. grams).  ``tabulate``: the mass-weighted beta of
    critical collapse from a table in nu_th (:mod:`scan.observables.pbh.tables`, equal to the direct
    quadrature to rounding; ~4 ms to build), else by the direct quadrature per epoch.
    """
    conv = conventions or PBHConventions()
    k_in = np.asarray(k_in, dtype=float)
    M = np.atleast_1d(np.asarray(cosmo.as_msun(M_msun), dtype=float))
    k_h = np.geomspace(k_in[0], k_in[-1], n_formation)
    M_H = np.asarray(cosmo.horizon_mass_msun(k_h, dof, n_eff))
    lnm = np.log(M_H)
    w = np.zeros_like(lnm)
    w[:-1] += 0.5 * np.abs(np.diff(lnm))
    w[1:] += 0.5 * np.abs(np.diff(lnm))
    coef = np.asarray(abundance_coefficient(M_H, dof, conv.omega_dm_h2, n_eff))
    v1 = variance_matrix(k_in, 1 / k_h, conv.window, 1) if conv.criterion == "peaks" \
        else np.empty((0, k_in.size))
    y = weight = kernel = table = None
    if conv.mass_function == "critical":
        y, weight, _ = critical_kernel(M, M_H, conv)
        kernel = mass_kernel(y, weight, w * coef, conv)
        table = beta_table(conv) if tabulate else None
    return PBHPlan(k_in, M, M_H, conv, variance_matrix(k_in, 1 / k_h, conv.window, 0),
                   v1, coef, w, y, weight, kernel, table)


def f_pbh(k_in, P_zeta, M_msun, conventions: PBHConventions | None = None,
          **plan_kw) -> PBHResult:
    """One-shot f_PBH(M) per ln M for ``P_zeta`` [1] on ``k_in`` [Mpc^-1]; M [M_sun]."""
    return plan_pbh(k_in, M_msun, conventions, **plan_kw).evaluate(P_zeta)
