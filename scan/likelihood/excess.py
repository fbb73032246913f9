"""A detected GW excess given per frequency bin, plus the SMBH-binary foreground.

Factorised per-bin likelihood (constraints.md Sec. 5b): ln L = sum_k ln p_k(m_k) with
m_k = log10[Omega_model h^2(f_k) + Omega_fg h^2(f_k; A)], where p_k is a split normal in
log10 Omega_GW h^2 (central value, asymmetric errors) or a density tabulated on a grid of
log10 Omega_GW h^2 (interpolated, clipped to the grid, floored).  Inter-bin correlations
are ignored.  The model is taken as zero at bins outside its frequency range.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scan.constants import F_YR_HZ, GW_OMEGA_PREFACTOR_S2
from scan.curves import Curve
from scan.curves.schema import two_sided_z
from scan.likelihood.base import (TINY, GridSpectra, OnGrid, as_result, get, interp_last,
                                  log10_model_at, log10_weights, nuisance_value)

#: Nuisance key of the foreground amplitude A (h_c = A (f/f_yr)^(-2/3)).
FOREGROUND_KEY: str = "A_smbhb"


def power_law_omega_h2(f_hz: np.ndarray, amplitude, gamma: float = 13 / 3) -> np.ndarray:
    """Omega_GW h^2 of h_c = A (f/f_yr)^((3-gamma)/2): (2 pi^2 f_yr^2/3H100^2) A^2 (f/f_yr)^(5-gamma).

    ``amplitude`` may be an array over models (it broadcasts against a trailing f axis).
    constraints.md Sec. 1.3; gamma = 13/3 is the SMBH-binary value.
    """
    a = np.asarray(amplitude, dtype=float)[..., None]
    f = np.asarray(f_hz, dtype=float)
    return GW_OMEGA_PREFACTOR_S2 * F_YR_HZ**2 * a**2 * (f / F_YR_HZ) ** (5.0 - gamma)


def power_law_rho(f_hz: np.ndarray, amplitude: float, gamma: float, t_obs_s: float) -> np.ndarray:
    """Timing-residual amplitude rho [s] per bin of width 1/T for the same power law.

    rho^2 = S(f)/T with S = A^2/(12 pi^2) (f/f_yr)^(-gamma) f_yr^(-3) (constraints.md 5b).
    """
    f = np.asarray(f_hz, dtype=float)
    s = amplitude**2 / (12 * math.pi**2) * (f / F_YR_HZ) ** (-gamma) / F_YR_HZ**3
    return np.sqrt(s / t_obs_s)


def smbhb_omega_h2(f_hz: np.ndarray, amplitude) -> np.ndarray:
    """The SMBH-binary foreground, h_c = A (f/1 yr^-1)^(-2/3), as Omega_GW h^2."""
    return power_law_omega_h2(f_hz, amplitude, 13.0 / 3.0)


def _model_at_bins(f_hz, omega_h2, bins_hz, foreground: bool, amplitude) -> np.ndarray:
    """log10 of model (zero outside its range) plus foreground at the bins."""
    lm, inside = log10_model_at(np.asarray(f_hz), np.asarray(omega_h2), bins_hz)
    return _with_foreground(np.where(inside, 10.0**lm, 0.0), bins_hz, foreground, amplitude)


def _with_foreground(model: np.ndarray, bins_hz, foreground: bool, amplitude) -> np.ndarray:
    """log10 of the model at the bins plus (optionally) the foreground, floored."""
    total = model + smbhb_omega_h2(bins_hz, amplitude) if foreground else model
    return np.log10(np.maximum(total, TINY))


@dataclass(frozen=True, eq=False)
class BinsOnGrid(OnGrid):
    """An excess term on a fixed frequency grid: its bins inside the model's range and
    their log-log interpolation weights, found once (the numbers of ``_model_at_bins``).

    Attributes
    ----------
    term : SplitNormalExcess or DensityGridExcess
    inside : numpy.ndarray of bool
        Bins inside the grid (the model is 0 at the others).
    idx, w : numpy.ndarray
        Interpolation of log10 Omega_GW h^2 at the bins inside.
    """

    term: "SplitNormalExcess | DensityGridExcess"
    inside: np.ndarray
    idx: np.ndarray
    w: np.ndarray

    @classmethod
    def plan(cls, term, f_hz: np.ndarray) -> "BinsOnGrid":
        """Weights of ``term``'s bins on the model frequencies ``f_hz`` [Hz]."""
        idx, w, inside = log10_weights(np.asarray(f_hz, dtype=float), term.f_hz)
        return cls(term, inside, idx[inside], w[inside])

    def __call__(self, spectra: GridSpectra, nuisance=None) -> float | np.ndarray:
        t = self.term
        ly = spectra.log10_omega
        model = np.zeros(ly.shape[:-1] + (t.f_hz.size,))
        if self.idx.size:
            model[..., self.inside] = 10.0 ** interp_last(ly, self.idx, self.w)
        amp = nuisance_value(nuisance, FOREGROUND_KEY, t.default_amplitude)
        return t.score_bins(_with_foreground(model, t.f_hz, t.foreground, amp))


@dataclass(frozen=True, eq=False)
class SplitNormalExcess:
    """Per-bin split normal in log10 Omega_GW h^2.

    Attributes
    ----------
    name : str
    f_hz : numpy.ndarray [Hz]
        Bin frequencies.
    mu, sigma_lo, sigma_hi : numpy.ndarray [dex]
        Centre and the lower/upper one-sigma widths.
    foreground : bool
        Add the SMBH-binary foreground with amplitude ``nuisance["A_smbhb"]``.
    default_amplitude : float
        A used when the nuisance dict has none.
    """

    name: str
    f_hz: np.ndarray
    mu: np.ndarray
    sigma_lo: np.ndarray
    sigma_hi: np.ndarray
    foreground: bool = True
    default_amplitude: float = 0.0

    @classmethod
    def from_curve(cls, curve: Curve, foreground: bool = True,
                   default_amplitude: float = 0.0) -> "SplitNormalExcess":
        """From a ``detection`` curve: interval [y_lo, y_hi] of probability ``interval``."""
        if curve.kind != "detection":
            raise ValueError(f"{curve.name}: not a detection curve")
        z = two_sided_z(curve.interval)
        mu = np.log10(curve.y)
        return cls(curve.name, curve.x, mu, (mu - np.log10(curve.y_lo)) / z,
                   (np.log10(curve.y_hi) - mu) / z, foreground, default_amplitude)

    def loglike(self, f_hz, omega_h2, amplitude=None) -> float | np.ndarray:
        """ln L (normalised split normals) for spectra (..., n) on ``f_hz`` [Hz]."""
        amp = self.default_amplitude if amplitude is None else amplitude
        return self.score_bins(_model_at_bins(f_hz, omega_h2, self.f_hz, self.foreground, amp))

    def score_bins(self, m: np.ndarray) -> float | np.ndarray:
        """ln L of log10 Omega_GW h^2 (model plus foreground) at the bins (..., n_bins)."""
        d = m - self.mu
        sigma = np.where(d < 0.0, self.sigma_lo, self.sigma_hi)
        norm = np.log(math.sqrt(2 * math.pi) * 0.5 * (self.sigma_lo + self.sigma_hi))
        return as_result(np.sum(-0.5 * (d / sigma) ** 2 - norm, axis=-1))

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        amp = nuisance_value(nuisance, FOREGROUND_KEY, self.default_amplitude)
        return self.loglike(get(obs, "f_hz"), get(obs, "omega_gw_h2"), amp)

    def on_grid(self, f_hz: np.ndarray, m_msun: np.ndarray | None = None) -> BinsOnGrid:
        """This term for spectra that always come on ``f_hz`` [Hz] (weights found once)."""
        return BinsOnGrid.plan(self, f_hz)


@dataclass(frozen=True, eq=False)
class DensityGridExcess:
    """Per-bin density on a grid of log10 Omega_GW h^2.

    Attributes
    ----------
    name : str
    f_hz : numpy.ndarray [Hz]
    grids : tuple of numpy.ndarray [log10 Omega_GW h^2]
    log_density : tuple of numpy.ndarray
        ln of the floored density per unit log10 Omega_GW h^2.
    foreground, default_amplitude
        As in :class:`SplitNormalExcess`.
    """

    name: str
    f_hz: np.ndarray
    grids: tuple[np.ndarray, ...]
    log_density: tuple[np.ndarray, ...]
    foreground: bool = True
    default_amplitude: float = 0.0

    @classmethod
    def from_curve(cls, curve: Curve, floor: float | None = None, foreground: bool = True,
                   default_amplitude: float = 0.0) -> "DensityGridExcess":
        """From a ``posterior_grid`` curve; ``floor`` is relative to each bin's peak
        (default: the curve's ``density_floor``, else 1e-4)."""
        if curve.kind != "posterior_grid":
            raise ValueError(f"{curve.name}: not a posterior_grid curve")
        floor = floor or curve.density_floor or 1e-4
        logs = tuple(np.log(np.maximum(d, floor * d.max())) for d in curve.grid_density)
        return cls(curve.name, curve.x, curve.grid_log10_y, logs, foreground,
                   default_amplitude)

    def loglike(self, f_hz, omega_h2, amplitude=None) -> float | np.ndarray:
        """ln L for spectra (..., n) on ``f_hz`` [Hz]; the model is clipped to each grid."""
        amp = self.default_amplitude if amplitude is None else amplitude
        return self.score_bins(_model_at_bins(f_hz, omega_h2, self.f_hz, self.foreground, amp))

    def score_bins(self, m: np.ndarray) -> float | np.ndarray:
        """ln L of log10 Omega_GW h^2 (model plus foreground) at the bins (..., n_bins)."""
        total = 0.0
        for k, (grid, logd) in enumerate(zip(self.grids, self.log_density)):
            total = total + np.interp(m[..., k], grid, logd)
        return as_result(total)

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        amp = nuisance_value(nuisance, FOREGROUND_KEY, self.default_amplitude)
        return self.loglike(get(obs, "f_hz"), get(obs, "omega_gw_h2"), amp)

    def on_grid(self, f_hz: np.ndarray, m_msun: np.ndarray | None = None) -> BinsOnGrid:
        """This term for spectra that always come on ``f_hz`` [Hz] (weights found once)."""
        return BinsOnGrid.plan(self, f_hz)
