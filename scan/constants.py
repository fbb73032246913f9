"""Physical constants as plain floats (SI unless the name says otherwise).

Values come from astropy (CODATA 2018/2022 and IAU 2015 nominal values) at import time,
so hot loops never touch ``astropy.units``.  Units are in the names: ``MPC_M`` is one
megaparsec in metres, ``M_SUN_G`` one solar mass in grams.
"""
from __future__ import annotations

import math
from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _version

from astropy import constants as _c
from astropy import units as _u

try:
    #: The installed zetascan version (``scan.__version__`` re-exports it).
    ZETASCAN_VERSION: str = _version("zetascan")
except PackageNotFoundError:  # running from a source tree without installation
    ZETASCAN_VERSION = "0.0.0+unknown"

C_M_S: float = float(_c.c.si.value)                    # speed of light [m/s]
G_SI: float = float(_c.G.si.value)                     # Newton's constant [m^3 kg^-1 s^-2]
HBAR_SI: float = float(_c.hbar.si.value)               # [J s]
K_B_SI: float = float(_c.k_B.si.value)                 # [J/K]
EV_J: float = float((1 * _u.eV).to_value(_u.J))        # one electronvolt [J]
GEV_J: float = 1e9 * EV_J
MPC_M: float = float((1 * _u.Mpc).to_value(_u.m))      # one megaparsec [m]
M_SUN_KG: float = float(_c.M_sun.si.value)             # IAU nominal GM_sun / CODATA G [kg]
M_SUN_G: float = 1e3 * M_SUN_KG
YEAR_S: float = float((1 * _u.yr).to_value(_u.s))      # Julian year [s]
F_YR_HZ: float = 1.0 / YEAR_S                          # 1/yr [Hz]
H100_S: float = float((100 * _u.km / _u.s / _u.Mpc).to_value(1 / _u.s))  # 100 km/s/Mpc [1/s]
#: Reduced Planck mass (8 pi G)^-1/2 in GeV.
M_PLANCK_REDUCED_GEV: float = math.sqrt(HBAR_SI * C_M_S / (8 * math.pi * G_SI)) * C_M_S**2 / GEV_J
#: Hz per Mpc^-1: f = c k / (2 pi).
HZ_PER_INV_MPC: float = C_M_S / (2 * math.pi * MPC_M)
#: CMB temperature today [K] (Fixsen 2009, arXiv:0911.1955).
T_CMB_K: float = 2.7255
#: 2 pi^2 / (3 H100^2) [s^2]: Omega_GW h^2 = GW_OMEGA_PREFACTOR_S2 * f^2 h_c^2 = ... * f^3 S_h
#: (Maggiore 2000, gr-qc/9909001, Sec. 2; constraints.md Sec. 1.2: 6.264834e35 s^2).
GW_OMEGA_PREFACTOR_S2: float = 2.0 * math.pi**2 / (3.0 * H100_S**2)
#: Boltzmann constant in GeV per kelvin.
K_B_GEV_PER_K: float = K_B_SI / GEV_J
#: hbar c in GeV m (converts GeV^-1 to metres).
HBARC_GEV_M: float = HBAR_SI * C_M_S / GEV_J
#: One Mpc^-1 expressed in GeV (natural units, hbar = c = 1).
INV_MPC_GEV: float = HBARC_GEV_M / MPC_M
#: One GeV of mass in kilograms.
GEV_KG: float = GEV_J / C_M_S**2
#: One solar mass in GeV.
M_SUN_GEV: float = M_SUN_KG / GEV_KG
#: 100 km/s/Mpc expressed in GeV (H0 = h * H100_GEV).
H100_GEV: float = H100_S * HBAR_SI / GEV_J
#: Dimensionless Hubble parameter h of Planck 2018 (TT,TE,EE+lowE+lensing: 0.674;
#: Planck 2018 VI, arXiv:1807.06209, Table 2) used by the N* matching.
H_LITTLE: float = 0.674
#: Hubble rate today for h = H_LITTLE [1/s].
H0_S: float = H_LITTLE * H100_S
#: Effective entropy degrees of freedom today, 2 + (7/8)·2·3·(4/11) = 43/11 (photons and
#: three neutrino species; Kolb & Turner 1990, "The Early Universe").
G_S0: float = 43.0 / 11.0
#: Planck 2018 amplitude at k* = 0.05 Mpc^-1: ln(10^10 A_s) = 3.044
#: (Planck 2018 VI, arXiv:1807.06209, Table 2).
LN_1E10_AS_PLANCK18: float = 3.044
