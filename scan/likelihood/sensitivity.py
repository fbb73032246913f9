"""Sensitivity curves: SNR of a model spectrum, for "detectable or not" statements.

With a noise curve (``curve_form = noise``) the SNR is computed directly,
SNR^2 = c T int df (Omega_GW/Omega_n)^2 (c = 1 "single", 2 "cross"; ``scan.noise.snr``).
A power-law-integrated curve is exact only for power laws (constraints.md Sec. 2.5): there
"detectable" means the spectrum touches the curve somewhere, and no SNR is given.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.curves import Curve
from scan.likelihood.base import TINY, as_result, get, interp_last, interp_weights
from scan.noise import SNR_FACTORS

MODES: tuple[str, ...] = ("report", "exclude_detectable", "require_detectable")


@dataclass(frozen=True, eq=False)
class Sensitivity:
    """A sensitivity curve as a term.

    Attributes
    ----------
    name : str
    log10_f : numpy.ndarray [log10 Hz]
    log10_omega : numpy.ndarray
        log10 of Omega_n h^2 (``form="noise"``) or of the PLI curve.
    form : {"noise", "power_law_integrated"}
    snr_threshold : float
    t_obs_s : float [s]
    convention : {"single", "cross"}
    mode : {"report", "exclude_detectable", "require_detectable"}
        ``report`` contributes ln L = 0; the others are a step on detectability.
    """

    name: str
    log10_f: np.ndarray
    log10_omega: np.ndarray
    form: str
    snr_threshold: float
    t_obs_s: float
    convention: str = "single"
    mode: str = "report"

    @classmethod
    def from_curve(cls, curve: Curve, mode: str = "report") -> "Sensitivity":
        """From a ``sensitivity`` curve (threshold, time and convention from its metadata)."""
        if curve.kind != "sensitivity":
            raise ValueError(f"{curve.name}: not a sensitivity curve")
        if mode not in MODES:
            raise ValueError(f"unknown sensitivity mode {mode!r}; use {MODES}")
        return cls(curve.name, np.log10(curve.x), np.log10(curve.y), curve.curve_form,
                   curve.snr_threshold, curve.t_obs_s, curve.snr_convention, mode)

    def snr(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> float | np.ndarray:
        """SNR of spectra (..., n) on ``f_hz`` [Hz]; 0 without overlap.

        Raises
        ------
        ValueError
            For a power-law-integrated curve (no noise curve to integrate against).
        """
        if self.form != "noise":
            raise ValueError(f"{self.name}: a power-law-integrated curve gives no SNR for a "
                             "general spectrum; use a noise curve (curve_form = noise)")
        lf = np.log10(np.asarray(f_hz, dtype=float))
        lo, hi = max(lf[0], self.log10_f[0]), min(lf[-1], self.log10_f[-1])
        if lo >= hi:
            return as_result(np.zeros(np.shape(omega_h2)[:-1]))
        grid = np.union1d(lf[(lf >= lo) & (lf <= hi)],
                          self.log10_f[(self.log10_f >= lo) & (self.log10_f <= hi)])
        idx, w = interp_weights(lf, grid)
        lm = interp_last(np.log10(np.maximum(omega_h2, TINY)), idx, w)
        ln = np.interp(grid, self.log10_f, self.log10_omega)
        ratio2 = 10.0 ** (2.0 * (lm - ln))
        f = 10.0**grid
        integral = np.trapezoid(ratio2 * f, np.log(f), axis=-1)
        return as_result(np.sqrt(SNR_FACTORS[self.convention] * self.t_obs_s * integral))

    def detectable(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> bool | np.ndarray:
        """SNR >= threshold (noise curve) or the spectrum reaches the PLI curve."""
        if self.form == "noise":
            return np.asarray(self.snr(f_hz, omega_h2)) >= self.snr_threshold
        lf = np.log10(np.asarray(f_hz, dtype=float))
        inside = (lf >= self.log10_f[0]) & (lf <= self.log10_f[-1])
        excess = (np.log10(np.maximum(omega_h2, TINY))
                  - np.interp(lf, self.log10_f, self.log10_omega))
        return np.any(inside & (excess >= 0.0), axis=-1)

    def loglike(self, f_hz: np.ndarray, omega_h2: np.ndarray) -> float | np.ndarray:
        """0, or -inf when the detectability required by ``mode`` fails."""
        if self.mode == "report":
            return as_result(np.zeros(np.shape(omega_h2)[:-1]))
        seen = np.asarray(self.detectable(f_hz, omega_h2))
        bad = seen if self.mode == "exclude_detectable" else ~seen
        return as_result(np.where(bad, -np.inf, 0.0))

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        return self.loglike(get(obs, "f_hz"), get(obs, "omega_gw_h2"))
