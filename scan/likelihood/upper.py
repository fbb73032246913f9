"""Upper-limit curves U(x): hard step, half-normal or soft log penalty on the worst point.

constraints.md Sec. 5a: the worst point counts (tabulated points are not independent
measurements), and outside the tabulated range the curve says nothing.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.curves import Curve
from scan.curves.schema import two_sided_z
from scan.likelihood.base import (TINY, GridSpectra, OnGrid, as_result, get, interp_last,
                                  log10_model_at, log10_weights)

METHODS: tuple[str, ...] = ("step", "half_normal", "soft_log")


def half_normal_sigma(limit: float, confidence: float) -> float:
    """sigma of a half-normal whose ``confidence`` quantile is ``limit``: U/(sqrt2 erfinv CL)."""
    return limit / two_sided_z(confidence)


def penalty(log10_ratio: np.ndarray, method: str, z: float, width_dex: float) -> np.ndarray:
    """ln L from the worst log10(y/U) (``-inf`` means no overlap, i.e. no constraint)."""
    log10_ratio = np.asarray(log10_ratio, dtype=float)
    if method == "step":
        return np.where(log10_ratio > 0.0, -np.inf, 0.0)
    if method == "half_normal":
        ratio = 10.0 ** np.minimum(log10_ratio, 150.0)
        return -0.5 * (z * ratio) ** 2
    excess = np.maximum(log10_ratio, 0.0) / width_dex
    return -0.5 * excess**2


@dataclass(frozen=True, eq=False)
class UpperLimit:
    """An upper limit on Omega_GW h^2(f).

    Attributes
    ----------
    name : str
    log10_x : numpy.ndarray [log10 Hz]
    log10_u : numpy.ndarray [log10 of Omega_GW h^2]
    method : {"step", "half_normal", "soft_log"}
    z : float
        sqrt(2) erfinv(CL): y/U at the limit in half-normal sigmas (1.95996 at 95 %).
    width_dex : float
        Width of the soft log penalty [dex].
    """

    name: str
    log10_x: np.ndarray
    log10_u: np.ndarray
    method: str = "step"
    z: float = 1.959963984540054
    width_dex: float = 0.1

    @classmethod
    def from_curve(cls, curve: Curve, method: str | None = None,
                   width_dex: float | None = None) -> "UpperLimit":
        """Build from an ``upper_limit`` curve on Omega_GW h^2 (method from its metadata)."""
        if curve.kind != "upper_limit" or curve.y_quantity != "omega_gw_h2":
            raise ValueError(f"{curve.name}: not an Omega_GW h^2 upper limit")
        method = method or curve.likelihood or "step"
        if method not in METHODS:
            raise ValueError(f"unknown upper-limit method {method!r}; use {METHODS}")
        return cls(curve.name, np.log10(curve.x), np.log10(curve.y), method,
                   two_sided_z(curve.confidence),
                   width_dex or curve.soft_width_dex or 0.1)

    def worst_log10_ratio(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> np.ndarray:
        """max log10(Omega_model/U) over model points and curve points in both ranges."""
        lf = np.log10(f_hz)
        in_curve = (lf >= self.log10_x[0]) & (lf <= self.log10_x[-1])
        lu_at_model = np.interp(lf, self.log10_x, self.log10_u)
        a = np.where(in_curve, np.log10(np.maximum(omega_h2, TINY)) - lu_at_model, -np.inf)
        lm_at_curve, in_model = log10_model_at(f_hz, omega_h2, 10.0**self.log10_x)
        b = np.where(in_model, lm_at_curve - self.log10_u, -np.inf)
        return np.maximum(a.max(axis=-1), b.max(axis=-1))

    def loglike(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> float | np.ndarray:
        """ln L for spectra ``omega_h2`` (..., n) on ``f_hz`` (n,) [Hz]."""
        return as_result(penalty(self.worst_log10_ratio(f_hz, omega_h2), self.method,
                                 self.z, self.width_dex))

    def on_grid(self, f_hz: np.ndarray, m_msun: np.ndarray | None = None) -> "UpperLimitOnGrid":
        """This limit for spectra that always come on ``f_hz`` [Hz] (weights computed once)."""
        f_hz = np.asarray(f_hz, dtype=float)
        lf = np.log10(f_hz)
        cols = np.flatnonzero((lf >= self.log10_x[0]) & (lf <= self.log10_x[-1]))
        lu_at_model = np.interp(lf, self.log10_x, self.log10_u)[cols]
        idx, w, in_model = log10_weights(f_hz, 10.0**self.log10_x)
        return UpperLimitOnGrid(self, cols, lu_at_model, idx[in_model], w[in_model],
                                self.log10_u[in_model])

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        """ln L of the observables' GW spectrum."""
        return self.loglike(np.asarray(get(obs, "f_hz")), np.asarray(get(obs, "omega_gw_h2")))


@dataclass(frozen=True, eq=False)
class UpperLimitOnGrid(OnGrid):
    """:class:`UpperLimit` on a fixed frequency grid: the model points inside the curve and
    the curve points inside the model, with their interpolation weights, found once.

    Attributes
    ----------
    term : UpperLimit
    cols : numpy.ndarray of int
        Model frequencies inside the curve's range.
    lu_at_cols : numpy.ndarray [log10 Omega_GW h^2]
        The limit there.
    idx, w : numpy.ndarray
        Log-log interpolation of the model at the curve points inside the model's range.
    lu_inside : numpy.ndarray [log10 Omega_GW h^2]
        The limit at those curve points.
    """

    term: UpperLimit
    cols: np.ndarray
    lu_at_cols: np.ndarray
    idx: np.ndarray
    w: np.ndarray
    lu_inside: np.ndarray

    def worst_log10_ratio(self, spectra: GridSpectra) -> np.ndarray:
        """As :meth:`UpperLimit.worst_log10_ratio` (the same numbers)."""
        ly = spectra.log10_omega
        worst = np.full(ly.shape[:-1], -np.inf)
        if self.cols.size:
            worst = np.maximum(worst, (ly[..., self.cols] - self.lu_at_cols).max(axis=-1))
        if self.idx.size:
            at_curve = interp_last(ly, self.idx, self.w) - self.lu_inside
            worst = np.maximum(worst, at_curve.max(axis=-1))
        return worst

    def __call__(self, spectra: GridSpectra, nuisance=None) -> float | np.ndarray:
        t = self.term
        return as_result(penalty(self.worst_log10_ratio(spectra), t.method, t.z, t.width_dex))
