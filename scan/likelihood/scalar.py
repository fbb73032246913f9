"""Scalar bounds: integrated GW energy vs Delta N_eff, and CMB priors at the pivot.

* int d ln f Omega_GW,0 h^2 <= (7/8)(4/11)^(4/3) Omega_gamma h^2 Delta N_eff
  = 5.616e-6 Delta N_eff (Maggiore 2000, Phys. Rept. 331, 283, gr-qc/9909001).
* Planck 2018 VI (A&A 641, A6, arXiv:1807.06209), TT,TE,EE+lowE+lensing:
  n_s = 0.9649 +- 0.0042, ln(10^10 A_s) = 3.044 +- 0.014 (Gaussian, correlation ignored).
* BICEP/Keck 2021 (PRL 127, 151301, arXiv:2110.00483): r_0.05 < 0.036 at 95 %.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scan.curves.schema import two_sided_z
from scan.likelihood.base import (GridSpectra, OnGrid, as_result, get, interp_last, interp_weights,
                                  product_or_direct)
from scan.observables.cosmo import omega_gamma_h2

#: (7/8)(4/11)^(4/3) Omega_gamma h^2: integrated Omega_GW h^2 per unit Delta N_eff.
NEFF_COEFFICIENT: float = (7.0 / 8.0) * (4.0 / 11.0) ** (4.0 / 3.0) * omega_gamma_h2()


def neff_integral_limit(delta_neff: float) -> float:
    """Largest int d ln f Omega_GW,0 h^2 allowed by ``delta_neff``."""
    return NEFF_COEFFICIENT * delta_neff


def integrated_omega_h2(f_hz: np.ndarray, omega_h2: np.ndarray, f_min_hz: float,
                        f_max_hz: float) -> np.ndarray:
    """int d ln f Omega_GW h^2 over [f_min, f_max] ∩ the model range (linear in ln f)."""
    lf = np.log(np.asarray(f_hz, dtype=float))
    lo, hi = max(lf[0], math.log(f_min_hz)), min(lf[-1], math.log(f_max_hz))
    if lo >= hi:
        return np.zeros(np.shape(omega_h2)[:-1])
    grid = np.concatenate(([lo], lf[(lf > lo) & (lf < hi)], [hi]))
    idx, w = interp_weights(lf, grid)
    return np.trapezoid(interp_last(np.asarray(omega_h2, dtype=float), idx, w), grid, axis=-1)


def one_sided(value, limit: float, method: str, z: float) -> np.ndarray:
    """ln L of an upper limit on a scalar: step, or half-normal with sigma = limit/z."""
    value = np.asarray(value, dtype=float)
    if method == "step":
        return np.where(value > limit, -np.inf, 0.0)
    return -0.5 * (z * value / limit) ** 2


@dataclass(frozen=True, eq=False)
class NeffBound:
    """Upper limit on the integrated GW energy from Delta N_eff.

    Attributes
    ----------
    name : str
    delta_neff : float
    f_min_hz, f_max_hz : float [Hz]
        Integration range (modes inside the horizon at the epoch of the bound).
    method : {"step", "half_normal"}
    confidence : float
        Confidence level of ``delta_neff`` (for the half-normal width).
    """

    name: str
    delta_neff: float
    f_min_hz: float = 1e-10
    f_max_hz: float = math.inf
    method: str = "step"
    confidence: float = 0.95

    @property
    def limit(self) -> float:
        """Allowed int d ln f Omega_GW h^2."""
        return neff_integral_limit(self.delta_neff)

    def loglike(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> float | np.ndarray:
        i_gw = integrated_omega_h2(f_hz, omega_h2, self.f_min_hz, self.f_max_hz)
        return self.loglike_of_integral(i_gw)

    def loglike_of_integral(self, i_gw) -> float | np.ndarray:
        """ln L of int d ln f Omega_GW h^2 = ``i_gw``."""
        return as_result(one_sided(i_gw, self.limit, self.method,
                                   two_sided_z(self.confidence)))

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        return self.loglike(get(obs, "f_hz"), get(obs, "omega_gw_h2"))

    def on_grid(self, f_hz: np.ndarray, m_msun: np.ndarray | None = None) -> "NeffOnGrid":
        """This bound for spectra that always come on ``f_hz`` [Hz]."""
        f_hz = np.asarray(f_hz, dtype=float)
        # the integral is linear in Omega: its coefficients integrate the unit vectors
        v = integrated_omega_h2(f_hz, np.eye(f_hz.size), self.f_min_hz, self.f_max_hz)
        return NeffOnGrid(self, f_hz, v)


@dataclass(frozen=True, eq=False)
class NeffOnGrid(OnGrid):
    """:class:`NeffBound` on a fixed grid: int d ln f Omega_GW h^2 = Omega @ v.

    The sums of :func:`integrated_omega_h2` in another order (equal to rounding); rows with
    a non-finite Omega (a non-finite product: 0 * inf is NaN) are integrated directly.

    Attributes
    ----------
    term : NeffBound
    f_hz : numpy.ndarray [Hz]
    v : numpy.ndarray [1]
        Interpolation times trapezoid weights in ln f.
    """

    term: NeffBound
    f_hz: np.ndarray
    v: np.ndarray

    def __call__(self, spectra: GridSpectra, nuisance=None) -> float | np.ndarray:
        t = self.term
        i_gw = product_or_direct(spectra.omega, self.v, lambda omega: integrated_omega_h2(
            self.f_hz, omega, t.f_min_hz, t.f_max_hz))
        return t.loglike_of_integral(i_gw)


@dataclass(frozen=True)
class GaussianPrior:
    """-2 ln L = ((value - mean)/sigma)^2 on the observable ``key``."""

    name: str
    key: str
    mean: float
    sigma: float

    def loglike(self, value) -> float | np.ndarray:
        return as_result(-0.5 * ((np.asarray(value, dtype=float) - self.mean) / self.sigma) ** 2)

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        return self.loglike(get(obs, self.key))


@dataclass(frozen=True)
class OneSidedLimit:
    """An upper limit on the scalar observable ``key`` at ``confidence``."""

    name: str
    key: str
    limit: float
    confidence: float = 0.95
    method: str = "half_normal"

    @property
    def sigma(self) -> float:
        """Half-normal width limit / (sqrt2 erfinv CL)."""
        return self.limit / two_sided_z(self.confidence)

    def loglike(self, value) -> float | np.ndarray:
        return as_result(one_sided(value, self.limit, self.method, two_sided_z(self.confidence)))

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        return self.loglike(get(obs, self.key))


def planck2018_pivot_priors() -> tuple[GaussianPrior, GaussianPrior]:
    """Gaussian priors on n_s and ln(10^10 A_s) (Planck 2018 VI, arXiv:1807.06209)."""
    return (GaussianPrior("planck2018_n_s", "n_s", 0.9649, 0.0042),
            GaussianPrior("planck2018_ln_As", "ln_1e10_as", 3.044, 0.014))


def bicep_keck_2021_r(method: str = "half_normal") -> OneSidedLimit:
    """r_0.05 < 0.036 at 95 % (BICEP/Keck 2021, arXiv:2110.00483)."""
    return OneSidedLimit("bk18_r", "r", 0.036, 0.95, method)
