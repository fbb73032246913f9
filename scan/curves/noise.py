"""Detector noise models and sensitivity curves computed from them (pure functions).

* LISA instrument noise of Robson, Cornish & Liu 2019 (CQG 36, 105011, arXiv:1803.01944),
  with the optional galactic confusion noise of the same paper;
* Omega_n h^2 = (2 pi^2 / 3 H100^2) f^3 S_n (constraints.md Sec. 1.1);
* the SNR of a spectrum against a noise curve, SNR^2 = c T int df (Omega/Omega_n)^2 with
  c = 1 ("single": one auto-correlated detector) or c = 2 ("cross": a cross-correlated
  pair; Thrane & Romano 2013, PRD 88, 124032, arXiv:1310.5300);
* the power-law-integrated (PLI) curve of Thrane & Romano 2013.
"""
from __future__ import annotations

import math

import numpy as np

from scan.constants import GW_OMEGA_PREFACTOR_S2, YEAR_S

#: LISA arm length [m] and transfer frequency f* = c/(2 pi L) [Hz] (Robson et al. 2019).
LISA_ARM_M: float = 2.5e9
LISA_F_STAR_HZ: float = 19.09e-3
#: Galactic confusion noise amplitude [Hz^-1 at f = 1 Hz, f in Hz] and the per-duration
#: (alpha, beta, kappa, gamma, f_k [Hz]) of Robson et al. 2019, Table 1.
LISA_CONFUSION_A: float = 9e-45
LISA_CONFUSION_TABLE: dict[float, tuple[float, float, float, float, float]] = {
    0.5: (0.133, 243.0, 482.0, 917.0, 2.58e-3),
    1.0: (0.171, 292.0, 1020.0, 1680.0, 2.15e-3),
    2.0: (0.165, 299.0, 611.0, 1340.0, 1.73e-3),
    4.0: (0.138, -221.0, 521.0, 1680.0, 1.13e-3),
}
SNR_FACTORS: dict[str, float] = {"single": 1.0, "cross": 2.0}


def lisa_oms_psd(f: np.ndarray) -> np.ndarray:
    """Optical-metrology displacement noise P_OMS [m^2 Hz^-1] at f [Hz] (15 pm/sqrt(Hz))."""
    return (1.5e-11) ** 2 * (1.0 + (2e-3 / f) ** 4)


def lisa_acc_psd(f: np.ndarray) -> np.ndarray:
    """Test-mass acceleration noise P_acc [m^2 s^-4 Hz^-1] at f [Hz] (3 fm s^-2/sqrt(Hz))."""
    return (3e-15) ** 2 * (1.0 + (0.4e-3 / f) ** 2) * (1.0 + (f / 8e-3) ** 4)


def lisa_confusion_psd(f: np.ndarray, t_obs_yr: float = 4.0) -> np.ndarray:
    """Galactic confusion noise S_c(f) [Hz^-1] for a mission of ``t_obs_yr`` years.

    Raises
    ------
    ValueError
        ``t_obs_yr`` is not one of the tabulated 0.5, 1, 2, 4 years.
    """
    if t_obs_yr not in LISA_CONFUSION_TABLE:
        raise ValueError(f"galactic confusion noise is tabulated for "
                         f"{sorted(LISA_CONFUSION_TABLE)} years, not {t_obs_yr}")
    a, b, k, g, fk = LISA_CONFUSION_TABLE[t_obs_yr]
    f = np.asarray(f, dtype=float)
    return (LISA_CONFUSION_A * f ** (-7.0 / 3.0) * np.exp(-f**a + b * f * np.sin(k * f))
            * (1.0 + np.tanh(g * (fk - f))))


def lisa_strain_psd(f: np.ndarray, confusion: bool = False,
                    t_obs_yr: float = 4.0) -> np.ndarray:
    """Sky-averaged LISA strain sensitivity S_n(f) [Hz^-1] (Robson et al. 2019).

    S_n = P_n / R + S_c with P_n = P_OMS/L^2 + 2 (1 + cos^2(f/f*)) P_acc / ((2 pi f)^4 L^2)
    and R = (3/10) / (1 + 0.6 (f/f*)^2).

    Parameters
    ----------
    f : numpy.ndarray [Hz]
    confusion : bool
        Add the galactic confusion noise for a ``t_obs_yr`` mission.
    t_obs_yr : float [yr]
    """
    f = np.asarray(f, dtype=float)
    p_n = (lisa_oms_psd(f) + 2.0 * (1.0 + np.cos(f / LISA_F_STAR_HZ) ** 2)
           * lisa_acc_psd(f) / (2.0 * math.pi * f) ** 4) / LISA_ARM_M**2
    response = 0.3 / (1.0 + 0.6 * (f / LISA_F_STAR_HZ) ** 2)
    s_n = p_n / response
    return s_n + lisa_confusion_psd(f, t_obs_yr) if confusion else s_n


def omega_noise_h2(f: np.ndarray, s_n: np.ndarray) -> np.ndarray:
    """Noise as energy density, Omega_n h^2 = (2 pi^2 / 3 H100^2) f^3 S_n (dimensionless)."""
    return GW_OMEGA_PREFACTOR_S2 * np.asarray(f) ** 3 * np.asarray(s_n)


def _int_df(f: np.ndarray, integrand: np.ndarray) -> np.ndarray:
    """int df integrand, trapezoid in ln f along the last axis."""
    return np.trapezoid(integrand * f, np.log(f), axis=-1)


def snr(f: np.ndarray, omega_h2: np.ndarray, omega_n_h2: np.ndarray, t_obs_s: float,
        convention: str = "single") -> np.ndarray:
    """SNR of a spectrum Omega_GW h^2(f) against Omega_n h^2(f) on the same grid.

    Parameters
    ----------
    f : numpy.ndarray [Hz]
        Increasing frequencies (the integration grid).
    omega_h2, omega_n_h2 : numpy.ndarray [1]
        Signal (any leading batch axes) and noise on ``f``.
    t_obs_s : float [s]
    convention : {"single", "cross"}
        SNR^2 = T int (Omega/Omega_n)^2 df, or twice that for a cross-correlated pair.
    """
    ratio = np.asarray(omega_h2) / np.asarray(omega_n_h2)
    return np.sqrt(SNR_FACTORS[convention] * t_obs_s * _int_df(f, ratio**2))


def flat_threshold_amplitude(f: np.ndarray, omega_n_h2: np.ndarray, snr_threshold: float,
                             t_obs_s: float, convention: str = "single") -> float:
    """Amplitude of a flat spectrum reaching ``snr_threshold``: rho/sqrt(c T int Omega_n^-2)."""
    return float(snr_threshold / snr(f, np.ones_like(f), omega_n_h2, t_obs_s, convention))


def pli_curve(f: np.ndarray, omega_n_h2: np.ndarray, snr_threshold: float, t_obs_s: float,
              betas: np.ndarray | None = None, convention: str = "single",
              f_out: np.ndarray | None = None) -> np.ndarray:
    """Power-law-integrated sensitivity Omega_PI h^2 (Thrane & Romano 2013, Sec. III).

    For each slope beta the amplitude reaching the threshold is
    Omega_beta = rho / sqrt(c T int df (f/f_ref)^(2 beta) / Omega_n^2); the curve is
    max_beta Omega_beta (f/f_ref)^beta.

    Parameters
    ----------
    f, omega_n_h2 : numpy.ndarray [Hz], [1]
        Noise curve (integration grid).
    snr_threshold : float
    t_obs_s : float [s]
    betas : numpy.ndarray, optional
        Slopes; default -10..10 in steps of 0.05.
    convention : {"single", "cross"}
    f_out : numpy.ndarray [Hz], optional
        Where to evaluate the envelope (default ``f``).

    Returns
    -------
    numpy.ndarray [1]
    """
    f = np.asarray(f, dtype=float)
    betas = np.linspace(-10.0, 10.0, 401) if betas is None else np.asarray(betas, float)
    f_out = f if f_out is None else np.asarray(f_out, dtype=float)
    f_ref = math.sqrt(f[0] * f[-1])
    x = np.log(f / f_ref)
    # log of the integrand (f/f_ref)^(2 beta) / Omega_n^2, stabilised per beta
    log_g = 2.0 * betas[:, None] * x[None, :] - 2.0 * np.log(omega_n_h2)[None, :]
    shift = log_g.max(axis=1, keepdims=True)
    integral = _int_df(f, np.exp(log_g - shift))
    log_amp = (math.log(snr_threshold) - 0.5 * (np.log(SNR_FACTORS[convention] * t_obs_s
                                                       * integral) + shift[:, 0]))
    log_curve = log_amp[:, None] + betas[:, None] * np.log(f_out / f_ref)[None, :]
    return np.exp(log_curve.max(axis=0))


def lisa_sensitivity(f: np.ndarray, snr_threshold: float = 10.0, t_obs_yr: float = 4.0,
                     confusion: bool = False, form: str = "power_law_integrated",
                     f_out: np.ndarray | None = None) -> np.ndarray:
    """LISA Omega_n h^2 (``form="noise"``) or its PLI curve on ``f_out`` (default ``f``)."""
    omega_n = omega_noise_h2(f, lisa_strain_psd(f, confusion, t_obs_yr))
    if form == "noise":
        return omega_n if f_out is None else np.exp(np.interp(np.log(f_out), np.log(f),
                                                              np.log(omega_n)))
    return pli_curve(f, omega_n, snr_threshold, t_obs_yr * YEAR_S, f_out=f_out)
