"""Exact curvature and tensor spectra from Mukhanov-Sasaki modes.

Public API
----------
compute_spectrum(bg, *, N_star, n_modes, k_star, ln10As, settings, ...) -> Spectrum
solve_modes(bg, table, N_k, settings, N_stop) -> ModeResult   (V0 = 1, modes by exit e-fold)
build_table(bg, N_lo, N_hi, tol) -> BackgroundTable
ModeSettings, Spectrum, ModeResult, PivotValues, BackgroundLike

Modules: ``protocol`` (background interface), ``table`` (Hermite table of ln eps1, ln H),
``initial`` (Bunch-Davies data), ``solver`` (vectorised Hamiltonian-form modes),
``grid`` (k grid), ``features`` (peak/dip refinement), ``normalise`` (A_s, n_s, r),
``spectrum`` (the result and the entry point).
"""
from scan.modes.normalise import PivotValues, iterate_normalisation, tilt_and_running
from scan.modes.protocol import BackgroundLike
from scan.modes.settings import ModeSettings
from scan.modes.solver import ModeResult, solve_modes
from scan.modes.spectrum import Spectrum, compute_spectrum, invalid_spectrum
from scan.modes.table import BackgroundTable, build_table

__all__ = ["BackgroundLike", "BackgroundTable", "ModeResult", "ModeSettings", "PivotValues",
           "Spectrum", "build_table", "compute_spectrum", "invalid_spectrum",
           "iterate_normalisation", "solve_modes", "tilt_and_running"]
