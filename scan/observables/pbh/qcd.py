"""The collapse threshold across the QCD crossover: C_th follows the equation of state.

The softer equation of state w(T) < 1/3 of the QCD crossover lowers the pressure that
resists collapse, so the threshold dips for horizon masses around a solar mass (Musco,
Jedamzik & Young 2024, PRD 109, 083506, arXiv:2303.07980: PBH abundances on the QCD scale
enhanced by ~1e3 for nearly scale-invariant spectra, mass function peaked at 1.9 M_sun;
Franciolini, Musco, Pani & Urbano 2022, arXiv:2209.05959).  Our opt-in convention
``harada-scaled`` (``[observables] qcd_threshold``) is a simplified stand-in for their
simulations: the configured radiation-era threshold scaled by the Harada, Yoo & Kohri 2013
(arXiv:1309.4201) threshold at the equation of state of each formation epoch,

    C_th(M_H) = C_th * delta_c(w(T(M_H))) / delta_c(1/3),

with w from the run's g_* table through the thermodynamic identity (zero chemical
potential) rho = (pi^2/30) g_rho T^4, s = (rho + p)/T = (2 pi^2/45) g_s T^3, i.e.
w = p/rho = (4/3) g_s/g_rho - 1.  Below T = 3 MeV (neutrino decoupling: species at
different temperatures, where the identity does not hold) w = 1/3 is used.  The
critical-collapse K and gamma_c are kept fixed (they also vary with w).

Units: masses [M_sun], T [GeV], w and thresholds [1].
"""
from __future__ import annotations

import numpy as np

from scan.observables import cosmo

QCD_THRESHOLDS: tuple[str, ...] = ("off", "harada-scaled")
#: Below this temperature [GeV] w = 1/3 (neutrinos decouple: g_s/g_rho no longer gives w).
T_DECOUPLING_GEV: float = 3e-3


def equation_of_state(T_GeV, dof: cosmo.Dof = None) -> np.ndarray:
    """w(T) = (4/3) g_s/g_rho - 1 [1] of the g_* table (1/3 below 3 MeV)."""
    T = np.asarray(T_GeV, dtype=float)
    g, gs = cosmo._dof_at(dof, T)
    return np.where(T > T_DECOUPLING_GEV, 4 / 3 * gs / g - 1, 1 / 3)


def delta_c_of_w(w) -> np.ndarray:
    """Harada, Yoo & Kohri 2013 threshold [3(1+w)/(5+3w)] sin^2(pi sqrt(w)/(1+3w)) [1]."""
    w = np.asarray(w, dtype=float)
    return 3 * (1 + w) / (5 + 3 * w) * np.sin(np.pi * np.sqrt(w) / (1 + 3 * w))**2


def epoch_thresholds(M_H_msun, threshold: float, dof: cosmo.Dof = None) -> np.ndarray:
    """C_th(M_H) [1] of ``harada-scaled`` for horizon masses ``M_H_msun`` [M_sun]."""
    T = cosmo.temperature_of_horizon_mass(np.asarray(M_H_msun, dtype=float), dof)
    return threshold * delta_c_of_w(equation_of_state(T, dof)) / delta_c_of_w(1 / 3)
