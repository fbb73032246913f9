"""Conversions between wavenumber, frequency, temperature and horizon mass; Omega_r h^2.

Conventions (all public functions): k in Mpc^-1, f in Hz, T in GeV, masses in M_sun.
astropy Quantities are accepted where noted (converted at the boundary); everything
inside is plain floats / numpy arrays.

Re-entry of a mode is defined from first principles as k = a H (no O(1) fudge factor),
during radiation domination with entropy conservation,

    a/a_0 = (g_*s0 / g_*s(T))^{1/3} T_0 / T,   H^2 = (pi^2/90) g_*(T) T^4 / M_Pl^2,

and the horizon mass is M_H = (4 pi / 3) rho H^-3 = 4 pi M_Pl^2 / H (M_Pl reduced).
This gives M_H = 20.5 M_sun (g_*/10.75)^{-1/6} (k / 1e6 Mpc^-1)^{-2} for g_* = g_*s;
published shortcuts use 17 M_sun or 12.6 M_sun (a spread of 1.6x).  The relations hold
in radiation domination only (T >> 1 eV, k >> 0.01 Mpc^-1).

``dof`` arguments select g_*(T), g_*s(T): ``None`` for the default table
(:func:`scan.observables.gstar.default_table`: Saikawa & Shirai 2018), a
:class:`scan.observables.gstar.DofTable`, or a constant pair
``(g_rho, g_s)``.
"""
from __future__ import annotations

import math
from typing import Union

import numpy as np
from astropy import units as u

from scan import constants as C
from scan.observables.gstar import DofTable, default_table

#: Default effective number of neutrino species for today's radiation density.
N_EFF_DEFAULT: float = 3.044
#: Fraction (7/8)(4/11)^{4/3}: neutrino energy per species relative to photons.
_NU_FACTOR: float = (7 / 8) * (4 / 11)**(4 / 3)

Dof = Union[None, DofTable, tuple[float, float]]


def _value(x, unit) -> np.ndarray | float:
    """Strip an astropy Quantity to ``unit``; plain numbers are assumed in ``unit``."""
    if isinstance(x, u.Quantity):
        return x.to_value(unit)
    return np.asarray(x, dtype=float) if np.ndim(x) else float(x)


_INV_MPC = 1 / u.Mpc  # built once: composing the unit costs ~40 us per call


def k_to_f(k_Mpc):
    """Frequency f = c k / (2 pi).

    Parameters
    ----------
    k_Mpc : array_like [Mpc^-1] or Quantity

    Returns
    -------
    f : ndarray or float [Hz]
    """
    return _value(k_Mpc, _INV_MPC) * C.HZ_PER_INV_MPC


def f_to_k(f_Hz):
    """Wavenumber k = 2 pi f / c [Mpc^-1] of a frequency ``f_Hz`` [Hz] (or Quantity)."""
    return _value(f_Hz, u.Hz) / C.HZ_PER_INV_MPC


def grams_to_msun(m_g):
    """Mass in M_sun from grams (a Quantity of any mass unit is also accepted)."""
    return _value(m_g, u.g) / C.M_SUN_G


def msun_to_grams(m):
    """Mass in grams [g] from solar masses ``m`` [M_sun]."""
    return _value(m, u.Msun) * C.M_SUN_G


def as_msun(m):
    """A mass in M_sun: Quantities (e.g. grams) are converted, plain numbers are M_sun."""
    return _value(m, u.Msun)


def omega_gamma_h2(T0_K: float = C.T_CMB_K) -> float:
    """Photon density today Omega_gamma h^2 [1] for CMB temperature ``T0_K`` [K]."""
    T0 = _value(T0_K, u.K) * C.K_B_GEV_PER_K
    rho_gamma = math.pi**2 / 15 * T0**4
    return rho_gamma / _rho_crit_over_h2_gev4()


def omega_radiation_h2(n_eff: float = N_EFF_DEFAULT, T0_K: float = C.T_CMB_K) -> float:
    """Radiation today, photons plus ``n_eff`` massless neutrinos: Omega_r h^2 [1].

    Omega_r h^2 = Omega_gamma h^2 [1 + N_eff (7/8)(4/11)^{4/3}] (not astropy's Planck18,
    whose neutrino density includes a 0.06 eV mass).
    """
    return omega_gamma_h2(T0_K) * (1 + n_eff * _NU_FACTOR)


def _rho_crit_over_h2_gev4() -> float:
    """Critical density for h = 1, 3 H_100^2 M_Pl^2 [GeV^4]."""
    return 3 * C.H100_GEV**2 * C.M_PLANCK_REDUCED_GEV**2


def dof_today(n_eff: float = N_EFF_DEFAULT) -> tuple[float, float]:
    """(g_*0, g_*s0) today [1]: photons plus ``n_eff`` neutrinos at T_nu = (4/11)^{1/3} T.

    N_eff = 3 gives 3.363, 3.909; the entropy count scales linearly with N_eff.
    """
    g0 = 2 + 2 * n_eff * _NU_FACTOR
    gs0 = 2 + 2 * n_eff * (7 / 8) * (4 / 11)
    return g0, gs0


def _dof_at(dof: Dof, T) -> tuple[np.ndarray, np.ndarray]:
    """g_*(T), g_*s(T) from a ``dof`` selector (None, DofTable or constant pair)."""
    T = np.asarray(T, dtype=float)
    if dof is None:
        dof = default_table()
    if isinstance(dof, DofTable):
        return dof.rho(T), dof.s(T)
    g, gs = dof
    return np.full(T.shape, float(g)), np.full(T.shape, float(gs))


def transfer_cg(g_rho, g_s, n_eff: float = N_EFF_DEFAULT, today: tuple[float, float] | None = None):
    """c_g = (g_*(T_c)/g_*0) (g_*s0/g_*s(T_c))^{4/3} [1] (dilution of GWs vs radiation).

    ``today`` overrides (g_*0, g_*s0); by default they follow ``n_eff`` (:func:`dof_today`).
    """
    g0, gs0 = dof_today(n_eff) if today is None else today
    return (np.asarray(g_rho) / g0) * (gs0 / np.asarray(g_s))**(4 / 3)


def hubble_gev(T_GeV, dof: Dof = None):
    """Hubble rate H(T) [GeV] in radiation domination."""
    g, _ = _dof_at(dof, T_GeV)
    return np.sqrt(math.pi**2 * g / 90) * np.asarray(T_GeV)**2 / C.M_PLANCK_REDUCED_GEV


def k_of_temperature(T_GeV, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Wavenumber k = a H [Mpc^-1] of the mode re-entering at temperature ``T_GeV`` [GeV]."""
    T = np.asarray(T_GeV, dtype=float)
    _, gs = _dof_at(dof, T)
    gs0 = dof_today(n_eff)[1]
    T0 = C.T_CMB_K * C.K_B_GEV_PER_K
    a = (gs0 / gs)**(1 / 3) * T0 / T
    return a * hubble_gev(T, dof) / C.INV_MPC_GEV


def horizon_mass_of_temperature(T_GeV, dof: Dof = None):
    """Horizon mass M_H = 4 pi M_Pl^2 / H [M_sun] at temperature ``T_GeV`` [GeV]."""
    return 4 * math.pi * C.M_PLANCK_REDUCED_GEV**2 / hubble_gev(T_GeV, dof) / C.M_SUN_GEV


def _ln_grid(dof: Dof, n_eff: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """ln T, ln k(T), ln M_H(T) on a dense grid (1e-8 to 1e8 GeV) for inversions."""
    T = np.geomspace(1e-8, 1e8, 3200)
    return (np.log(T), np.log(k_of_temperature(T, dof, n_eff)),
            np.log(horizon_mass_of_temperature(T, dof)))


def temperature_of_k(k_Mpc, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Re-entry temperature T [GeV] of the mode k [Mpc^-1] (k = a H, see module doc)."""
    lnT, lnk, _ = _ln_grid(dof, n_eff)
    x = np.log(_value(k_Mpc, _INV_MPC))
    return np.exp(_interp_extrap(x, lnk, lnT))


def _interp_extrap(x, xp, fp):
    """Linear interpolation in (xp, fp), extrapolated linearly beyond the ends."""
    order = np.argsort(xp)
    xp, fp = xp[order], fp[order]
    y = np.interp(x, xp, fp)
    lo_slope = (fp[1] - fp[0]) / (xp[1] - xp[0])
    hi_slope = (fp[-1] - fp[-2]) / (xp[-1] - xp[-2])
    y = np.where(x < xp[0], fp[0] + lo_slope * (x - xp[0]), y)
    return np.where(x > xp[-1], fp[-1] + hi_slope * (x - xp[-1]), y)


def horizon_mass_msun(k_Mpc, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Horizon mass M_H [M_sun] when the mode k [Mpc^-1] re-enters (k = a H)."""
    return horizon_mass_of_temperature(temperature_of_k(k_Mpc, dof, n_eff), dof)


def k_of_horizon_mass(M_H_msun, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Wavenumber k [Mpc^-1] re-entering when the horizon mass is ``M_H_msun`` [M_sun]."""
    _, lnk, lnM = _ln_grid(dof, n_eff)
    return np.exp(_interp_extrap(np.log(as_msun(M_H_msun)), lnM, lnk))


def temperature_of_horizon_mass(M_H_msun, dof: Dof = None):
    """Temperature T [GeV] at which the horizon mass equals ``M_H_msun`` [M_sun]."""
    lnT, _, lnM = _ln_grid(dof, N_EFF_DEFAULT)
    return np.exp(_interp_extrap(np.log(as_msun(M_H_msun)), lnM, lnT))


def pbh_mass_msun(k_Mpc, gamma: float = 0.2, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """PBH mass M = gamma M_H(k) [M_sun] (Carr 1975's gamma ~ 0.2)."""
    return gamma * horizon_mass_msun(k_Mpc, dof, n_eff)


def f_of_horizon_mass(M_H_msun, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Frequency [Hz] of the mode re-entering at horizon mass ``M_H_msun`` [M_sun]."""
    return k_to_f(k_of_horizon_mass(M_H_msun, dof, n_eff))


def horizon_mass_of_f(f_Hz, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """Horizon mass [M_sun] at re-entry of the mode with frequency ``f_Hz`` [Hz]."""
    return horizon_mass_msun(f_to_k(f_Hz), dof, n_eff)


def gw_transfer_h2(k_Mpc, dof: Dof = None, n_eff: float = N_EFF_DEFAULT):
    """c_g(T_c(k)) Omega_r,0 h^2 [1]: multiply Omega_GW(eta_c, k) by it to get today's h^2.

    T_c is the re-entry temperature of k; Omega_r,0 h^2 uses ``n_eff`` massless
    neutrinos, and g_*0, g_*s0 the same ``n_eff`` (:func:`dof_today`).
    """
    T = temperature_of_k(k_Mpc, dof, n_eff)
    g, gs = _dof_at(dof, T)
    return transfer_cg(g, gs, n_eff) * omega_radiation_h2(n_eff)
