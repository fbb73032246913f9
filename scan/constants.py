"""Physical constants as plain floats (SI unless the name says otherwise).

Values come from astropy (CODATA 2018/2022 and IAU 2015 nominal values) at import time,
so hot loops never touch ``astropy.units``.  Units are in the names: ``MPC_M`` is one
megaparsec in metres, ``M_SUN_G`` one solar mass in grams.
"""
from __future__ import annotations

import math

from astropy import constants as _c
from astropy import units as _u

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
