"""Precomputed PBH evaluation for a fixed spectrum grid and output masses."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan import cosmo
from scan.pbh.abundance import (abundance_coefficient, beta_monochromatic, beta_weighted,
                                critical_kernel, density)
from scan.pbh.conventions import PBHConventions
from scan.pbh.variance import variance_matrix


@dataclass(frozen=True)
class PBHResult:
    """f_PBH(M) per ln M with everything needed to reproduce it.

    Attributes
    ----------
    M : ndarray [M_sun]
    f_pbh : ndarray [1]
        Fraction of dark matter per ln M.
    f_pbh_total : float [1]
        int f dln M over all masses (not only the output grid).
    M_H : ndarray [M_sun]
        Horizon masses of the formation epochs.
    sigma2 : ndarray [1]
        Smoothed variance at each M_H.
    conventions : PBHConventions
    """

    M: np.ndarray
    f_pbh: np.ndarray
    f_pbh_total: float
    M_H: np.ndarray
    sigma2: np.ndarray
    conventions: PBHConventions


@dataclass(frozen=True)
class PBHPlan:
    """The P_zeta-independent parts of f_PBH(M) (see :func:`plan_pbh`)."""

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

    def sigma2(self, P_zeta) -> tuple[np.ndarray, np.ndarray]:
        """sigma^2 [1] and <k^2> R^2 [1] at every formation horizon mass."""
        P = np.asarray(P_zeta, dtype=float)
        s0 = self._v0 @ P
        kR2 = (self._v1 @ P) / np.where(s0 > 0, s0, 1.0) if self._v1.size else np.ones_like(s0)
        return s0, kR2

    def evaluate(self, P_zeta) -> PBHResult:
        """f_PBH(M) per ln M [1] and the total for ``P_zeta`` [1] on ``k_in``."""
        s0, kR2 = self.sigma2(P_zeta)
        return self.from_variance(s0, kR2)

    def from_variance(self, sigma2, kR2=None) -> PBHResult:
        """As :meth:`evaluate`, from sigma^2 (and <k^2>R^2 for peaks) at ``M_H``."""
        conv = self.conventions
        s0 = np.maximum(np.asarray(sigma2, dtype=float), 1e-300)
        kR2 = np.ones_like(s0) if kR2 is None else np.asarray(kR2, dtype=float)
        if conv.mass_function == "monochromatic":
            f_h = self._coef * beta_monochromatic(s0, kR2, conv)   # per ln M = per ln M_H
            f = _log_interp(self.M, conv.gamma * self.M_H, f_h)
            total = float(np.sum(self._wln * f_h))
        else:
            p = density(self._y, s0[None, :], kR2[None, :], conv)
            f = (self._weight * p) @ (self._wln * self._coef)
            total = float(np.sum(self._wln * self._coef * beta_weighted(s0, kR2, conv)))
        return PBHResult(self.M, f, total, self.M_H, s0, conv)


def _log_interp(x, xp, fp):
    """Interpolate fp (>= 0) in ln x, ln fp; zero outside xp."""
    order = np.argsort(xp)
    xp, fp = np.log(xp[order]), fp[order]
    lf = np.interp(np.log(x), xp, np.log(np.maximum(fp, 1e-300)), left=-np.inf, right=-np.inf)
    out = np.exp(lf)
    return np.where(out > 1e-290, out, 0.0)


def plan_pbh(k_in, M_msun, conventions: PBHConventions | None = None, *,
             n_formation: int = 256, dof: cosmo.Dof = None,
             n_eff: float = cosmo.N_EFF_DEFAULT) -> PBHPlan:
    """Precompute f_PBH(M) for spectra on ``k_in`` [Mpc^-1] at masses ``M_msun`` [M_sun].

    Formation epochs: ``n_formation`` horizon scales k_H log-spaced over the table's
    range (R = 1/k_H), weighted by the trapezoid rule in ln M_H.  Masses may be given
    as an astropy Quantity (e.g. grams).
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
    y = weight = None
    if conv.mass_function == "critical":
        y, weight, _ = critical_kernel(M, M_H, conv)
    return PBHPlan(k_in, M, M_H, conv, variance_matrix(k_in, 1 / k_h, conv.window, 0),
                   v1, coef, w, y, weight)


def f_pbh(k_in, P_zeta, M_msun, conventions: PBHConventions | None = None,
          **plan_kw) -> PBHResult:
    """One-shot f_PBH(M) per ln M for ``P_zeta`` [1] on ``k_in`` [Mpc^-1]; M [M_sun]."""
    return plan_pbh(k_in, M_msun, conventions, **plan_kw).evaluate(P_zeta)
