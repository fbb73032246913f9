"""Sensitivity curves: SNR of a model spectrum, for "detectable or not" statements.

With a noise curve (``curve_form = noise``) the SNR is computed directly,
SNR^2 = c T int df (Omega_GW/Omega_n)^2 (c = 1 "single", 2 "cross"; ``scan.curves.noise.snr``).
A power-law-integrated curve is exact only for power laws (constraints.md Sec. 2.5): there
"detectable" means the spectrum touches the curve somewhere, and no SNR is given.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scan.curves import Curve
from scan.curves.noise import SNR_FACTORS
from scan.likelihood.base import (TINY, GridSpectra, OnGrid, as_result, get, interp_last,
                                  interp_weights)

MODES: tuple[str, ...] = ("report", "exclude_detectable", "require_detectable")
_TWO_LN10 = 2.0 * math.log(10.0)
#: Terms of the SNR integral below e^-_TAIL of its largest are counted as e^-_TAIL of it.
_TAIL = 60.0


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
        nodes = self._snr_nodes(f_hz)
        if nodes is None:
            return as_result(np.zeros(np.shape(omega_h2)[:-1]))
        idx, w, ln, ln_g = nodes
        lm = interp_last(np.log10(np.maximum(omega_h2, TINY)), idx, w)
        return as_result(self._snr_of(lm, ln, ln_g))

    def _snr_nodes(self, f_hz: np.ndarray) -> tuple[np.ndarray, ...] | None:
        """Integration nodes of the SNR (model and curve points in both ranges, log10 f):
        the model's interpolation weights there, log10 Omega_n, and ln of the weights g
        [Hz] of int df = int d ln f f by the trapezoid rule in ln f; None without
        overlap."""
        self._require_noise()
        lf = np.log10(np.asarray(f_hz, dtype=float))
        lo, hi = max(lf[0], self.log10_f[0]), min(lf[-1], self.log10_f[-1])
        if lo >= hi:
            return None
        grid = np.union1d(lf[(lf >= lo) & (lf <= hi)],
                          self.log10_f[(self.log10_f >= lo) & (self.log10_f <= hi)])
        idx, w = interp_weights(lf, grid)
        f = 10.0**grid
        d = np.diff(np.log(f))
        trapezoid = 0.5 * (np.concatenate(([0.0], d)) + np.concatenate((d, [0.0])))
        return idx, w, np.interp(grid, self.log10_f, self.log10_omega), np.log(f * trapezoid)

    def _require_noise(self) -> None:
        if self.form != "noise":
            raise ValueError(f"{self.name}: a power-law-integrated curve gives no SNR for a "
                             "general spectrum; use a noise curve (curve_form = noise)")

    def _snr_of(self, lm: np.ndarray, ln: np.ndarray, ln_g: np.ndarray) -> np.ndarray:
        """SNR from log10 Omega_GW h^2 (``lm``) and log10 Omega_n h^2 (``ln``) at the nodes
        with integration weights ``exp(ln_g)`` [Hz] (``_snr_nodes``).

        The integrand (Omega/Omega_n)^2 g is summed relative to its largest node, with
        terms below e^-:data:`_TAIL` of it taken as that (a relative change below 1e-23):
        every exponential then has a moderate argument, which is both exact to rounding
        and fast (a tail of ~1e-300 values makes ``exp`` several times slower).
        """
        b = _TWO_LN10 * (lm - ln) + ln_g                    # ln[(Omega/Omega_n)^2 g]
        top = np.max(b, axis=-1, keepdims=True)
        integral = np.exp(top[..., 0]) * np.exp(np.maximum(b - top, -_TAIL)).sum(axis=-1)
        return np.sqrt(SNR_FACTORS[self.convention] * self.t_obs_s * integral)

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

    def on_grid(self, f_hz: np.ndarray, m_msun: np.ndarray | None = None
                ) -> "SensitivityOnGrid":
        """This curve for spectra that always come on ``f_hz`` [Hz] (nodes found once)."""
        f_hz = np.asarray(f_hz, dtype=float)
        if self.form == "noise":
            return SensitivityOnGrid(self, self._snr_nodes(f_hz), None, None)
        lf = np.log10(f_hz)
        cols = np.flatnonzero((lf >= self.log10_f[0]) & (lf <= self.log10_f[-1]))
        return SensitivityOnGrid(self, None, cols,
                                 np.interp(lf, self.log10_f, self.log10_omega)[cols])


#: exp(x) is exactly 0.0 in double precision below x = -745.2: a row whose integrand
#: (Omega/Omega_n)^2 g stays below exp(_ZERO_LN) at every node has SNR 0 (not computed).
_ZERO_LN = -750.0


@dataclass(frozen=True, eq=False)
class SensitivityOnGrid(OnGrid):
    """:class:`Sensitivity` on a fixed frequency grid (SNR nodes or PLI points found once).

    Attributes
    ----------
    term : Sensitivity
    nodes : tuple or None
        Noise form: ``Sensitivity._snr_nodes`` of the grid (None: no overlap).
    cols, curve_at_cols : numpy.ndarray or None
        Power-law-integrated form: model points inside the curve and the curve there.
    """

    term: Sensitivity
    nodes: tuple[np.ndarray, ...] | None
    cols: np.ndarray | None
    curve_at_cols: np.ndarray | None

    def snr(self, spectra: GridSpectra) -> np.ndarray:
        """SNR of every spectrum (computed once per ``spectra``), shape (...,)."""
        return spectra.once(("snr", id(self)), lambda: self._snr(spectra))

    def _snr(self, spectra: GridSpectra) -> np.ndarray:
        self.term._require_noise()
        ly = spectra.log10_omega
        out = np.zeros(ly.shape[:-1])
        if self.nodes is None:
            return out
        idx, w, ln, ln_g = self.nodes
        start = idx.min()
        window = ly[..., start:idx.max() + 2]               # the samples the nodes read
        # log10 Omega at a node is at most the largest of the samples it interpolates
        top = window.max(axis=-1)
        live = ~(_TWO_LN10 * (top - ln.min()) + ln_g.max() < _ZERO_LN)  # NaN rows computed
        if np.all(live):
            return self.term._snr_of(interp_last(window, idx - start, w), ln, ln_g)
        if np.any(live):
            out[live] = self.term._snr_of(interp_last(window[live], idx - start, w), ln, ln_g)
        return out

    def detectable(self, spectra: GridSpectra) -> np.ndarray:
        """As :meth:`Sensitivity.detectable`."""
        if self.term.form == "noise":
            return self.snr(spectra) >= self.term.snr_threshold
        excess = spectra.log10_omega[..., self.cols] - self.curve_at_cols
        return np.any(excess >= 0.0, axis=-1)

    def __call__(self, spectra: GridSpectra, nuisance=None) -> float | np.ndarray:
        t = self.term
        if t.mode == "report":
            return as_result(np.zeros(np.shape(spectra.omega)[:-1]))
        seen = np.asarray(self.detectable(spectra))
        bad = seen if t.mode == "exclude_detectable" else ~seen
        return as_result(np.where(bad, -np.inf, 0.0))
