"""From a curvature spectrum to what detectors and black-hole bounds see.

One pure stage shared by ``zetascan observe`` (a user's table), ``zetascan solve`` (the
exact spectrum) and later the surrogate: Ω_GW,0 h²(f) from :mod:`scan.observables.sigw` and the PBH
mass function from :mod:`scan.observables.pbh`, on frequency and mass grids derived from the table.
"""
from __future__ import annotations

import warnings

import numpy as np

from scan.observables import cosmo, sigw
from scan.observables.pbh import PBHConventions, plan_pbh
from scan.observables.record import Observables, peak_of


def frequency_grid(k: np.ndarray, n_f: int) -> np.ndarray:
    """Log-spaced frequencies [Hz] from the table's first k to twice its last k."""
    return np.geomspace(cosmo.k_to_f(k[0]), cosmo.k_to_f(2.0 * k[-1]), n_f)


def mass_grid(k: np.ndarray, conventions: PBHConventions, n_m: int, dof=None,
              n_eff: float = cosmo.N_EFF_DEFAULT) -> np.ndarray:
    """Log-spaced PBH masses [M_sun] covering the horizon masses of the table."""
    m_hi = float(cosmo.horizon_mass_msun(k[0], dof, n_eff)) * max(conventions.K,
                                                                     conventions.gamma)
    m_lo = float(cosmo.horizon_mass_msun(k[-1], dof, n_eff)) * 1e-4
    return np.geomspace(m_lo, m_hi, n_m)


def compute_observables(k: np.ndarray, P_zeta: np.ndarray, *,
                        conventions: PBHConventions = PBHConventions(), n_f: int = 200,
                        n_m: int = 200, dof=None,
                        n_eff: float = cosmo.N_EFF_DEFAULT) -> Observables:
    """Ω_GW h²(f) and f_PBH(M) of a tabulated spectrum.

    Parameters
    ----------
    k : ndarray
        Strictly increasing wavenumbers [Mpc⁻¹].
    P_zeta : ndarray
        Curvature power spectrum at ``k`` (log-interpolated; zero outside the table).
    conventions : PBHConventions
        Window, criterion, threshold, critical collapse, Ω_DM h².
    n_f, n_m : int
        Sizes of the frequency and mass grids.
    dof : optional
        g_*(T): None for the built-in Standard Model, a ``DofTable``, or a pair.
    n_eff : float
        N_eff today (radiation density and g_* today).

    Returns
    -------
    Observables
    """
    k = np.asarray(k, dtype=float)
    P_zeta = np.asarray(P_zeta, dtype=float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        sigw.check_spectrum(P_zeta)
    f = frequency_grid(k, n_f)
    omega = sigw.plan_sigw(k, f_out=f, dof=dof, n_eff=n_eff).omega_gw_h2(P_zeta)
    M = mass_grid(k, conventions, n_m, dof, n_eff)
    pbh = plan_pbh(k, M, conventions, dof=dof, n_eff=n_eff).evaluate(P_zeta)
    f_peak, omega_peak = peak_of(f, omega)
    return Observables(f_hz=f, omega_gw_h2=omega, m_msun=pbh.M, f_pbh_per_lnm=pbh.f_pbh,
                       f_pbh_total=pbh.f_pbh_total, f_gw_peak=f_peak,
                       omega_gw_h2_peak=omega_peak, conventions=pbh.conventions,
                       notes=tuple(str(w.message) for w in caught))
