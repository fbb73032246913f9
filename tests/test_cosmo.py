"""Conversions k-f-T-M, Omega_r h^2, c_g and g_*(T).

Check values: shared/physics/observables.md (sect. 2-4, computed), with the formula
sources named there."""
import math

import numpy as np
import pytest
from astropy import units as u

from scan.errors import InputFileError
from scan.observables import cosmo, gstar

G106, G10 = (106.75, 106.75), (10.75, 10.75)


def test_frequency_of_k():
    # f = c k / 2 pi; 1.5463e-15 Hz per Mpc^-1 (observables.md sect. 3, computed)
    assert cosmo.k_to_f(1.0) == pytest.approx(1.5463e-15, rel=1e-4)
    assert cosmo.f_to_k(cosmo.k_to_f(3.7)) == pytest.approx(3.7, rel=1e-12)
    assert cosmo.f_to_k(1 * u.mHz) == pytest.approx(6.467e11, rel=1e-3)


def test_omega_gamma_and_radiation():
    # 2.473e-5 for T0 = 2.7255 K (Fixsen 2009, arXiv:0911.1955); Omega_r from
    # observables.md sect. 2, computed: 4.158e-5 (N_eff=3), 4.184e-5 (3.046)
    assert cosmo.omega_gamma_h2(2.7255) == pytest.approx(2.473e-5, rel=1e-3)
    assert cosmo.omega_radiation_h2(3.0) == pytest.approx(4.158e-5, rel=1e-3)
    assert cosmo.omega_radiation_h2(3.046) == pytest.approx(4.184e-5, rel=1e-3)


def test_dof_today_counting():
    # photons + 3 nu at (4/11)^{1/3} T: 3.363, 3.909 (counting, common practice)
    g0, gs0 = cosmo.dof_today(3.0)
    assert g0 == pytest.approx(3.363, abs=1e-3) and gs0 == pytest.approx(3.909, abs=1e-3)


def test_cg_values():
    # observables.md sect. 2 (computed with the rounded 3.36 / 3.91): 0.3865, 0.8307
    today = (3.36, 3.91)
    assert cosmo.transfer_cg(106.75, 106.75, today=today) == pytest.approx(0.3865, rel=1e-3)
    assert cosmo.transfer_cg(10.75, 10.75, today=today) == pytest.approx(0.8307, rel=1e-3)
    # exact counting (3.3626, 3.9091) is 0.12% lower; c_g ∝ g^{-1/3} when g = g_s
    exact = cosmo.transfer_cg(106.75, 106.75, 3.0)
    assert exact == pytest.approx(0.3865, rel=2e-3)
    assert exact / cosmo.transfer_cg(10.75, 10.75, 3.0) == pytest.approx(
        (106.75 / 10.75)**(-1 / 3), rel=1e-12)


def test_reentry_wavenumber_and_temperature():
    # k = 1.714e7 Mpc^-1 at T = 1 GeV (g = 106.75); k = 1e6 -> T = 85.6 MeV (g = 10.75)
    # (observables.md sect. 3, computed; k = aH with entropy conservation)
    assert cosmo.k_of_temperature(1.0, G106, 3.0) == pytest.approx(1.714e7, rel=1e-2)
    assert cosmo.temperature_of_k(1e6, G10, 3.0) == pytest.approx(0.0856, rel=1e-2)


def test_horizon_masses():
    # M_H(T = 1 MeV, g = 10.75) = 1.50e5 M_sun; M_H(k = 1e6) = 20.5 M_sun first-principles
    # (13.97 for g = 106.75); f(M_H = 1 M_sun) = 7.00e-9 Hz (observables.md sect. 3)
    assert cosmo.horizon_mass_of_temperature(1e-3, G10) == pytest.approx(1.50e5, rel=1e-2)
    assert cosmo.horizon_mass_msun(1e6, G10, 3.0) == pytest.approx(20.5, rel=1e-2)
    assert cosmo.horizon_mass_msun(1e6, G106, 3.0) == pytest.approx(13.97, rel=1e-2)
    assert cosmo.f_of_horizon_mass(1.0, G10, 3.0) == pytest.approx(7.00e-9, rel=1e-2)


def test_horizon_mass_inverse_and_scaling():
    k = np.geomspace(1e2, 1e15, 9)
    m = cosmo.horizon_mass_msun(k)
    # inversion by linear interpolation on a 3200-point ln T grid: ~1e-6 round trip
    assert np.allclose(cosmo.k_of_horizon_mass(m), k, rtol=1e-5)
    assert np.all(np.diff(m) < 0)
    # constant g: M_H ∝ k^-2 exactly
    mc = cosmo.horizon_mass_msun(k, G106)
    assert np.allclose(mc * k**2, mc[0] * k[0]**2, rtol=1e-6)


def test_mass_units():
    assert cosmo.grams_to_msun(cosmo.msun_to_grams(2.5)) == pytest.approx(2.5, rel=1e-14)
    assert cosmo.msun_to_grams(1.0) == pytest.approx(1.988e33, rel=1e-3)  # IAU 2015
    assert cosmo.as_msun(1.988e33 * u.g) == pytest.approx(1.0, rel=1e-3)
    assert cosmo.pbh_mass_msun(1e6, 0.2, G10, 3.0) == pytest.approx(0.2 * 20.47, rel=1e-2)


@pytest.mark.parametrize("T, g_rho, g_s, tol", [
    (1e4, 106.75, 106.75, 0.01),  # all SM relativistic (counting)
    (5e-3, 10.75, 10.75, 0.03),  # gamma, e+-, 3 nu (counting)
    (1e-6, 3.363, 3.909, 0.002),  # today, N_eff = 3 (counting)
])
def test_gstar_plateaus(T, g_rho, g_s, tol):
    table = gstar.standard_model()
    assert table.rho(T) == pytest.approx(g_rho, abs=tol)
    assert table.s(T) == pytest.approx(g_s, abs=tol)


def test_gstar_monotone_and_qcd_band():
    # our ideal-gas table: monotone; 17.5 at 0.1 GeV and 76.4 at 1 GeV agree with the
    # independent ideal-gas table of observables.md sect. 4 (computed) to 2%
    table = gstar.standard_model()
    T = np.geomspace(1e-6, 1e4, 400)
    assert np.all(np.diff(table.rho(T)) > -1e-9)
    assert table.rho(0.1) == pytest.approx(17.5, rel=0.02)
    assert table.rho(1.0) == pytest.approx(76.4, rel=0.02)


def test_gstar_table_loader(tmp_path):
    good = tmp_path / "g.csv"
    good.write_text("# T,g_rho,g_s\nT_GeV,g_rho,g_s\n1e-3,10.75,10.75\n1,70,69\n100,106,106\n")
    table = gstar.load_table(good)
    assert table.rho(1.0) == pytest.approx(70) and table.s(1e5) == pytest.approx(106)
    bad = tmp_path / "bad.csv"
    bad.write_text("T,g_rho,g_s\n1e-3,10.75,10.75\n1e-4,10,10\n")
    with pytest.raises(InputFileError, match="line 3"):
        gstar.load_table(bad)
    bad.write_text("T,g_rho,g_s\n1e-3,10.75\n")
    with pytest.raises(InputFileError, match="line 2.*3 columns"):
        gstar.load_table(bad)
    bad.write_text("1e-3,-1,10\n1,2,3\n")
    with pytest.raises(InputFileError, match="line 1, column 'g_rho'"):
        gstar.load_table(bad)


def test_transfer_uses_table():
    # constant g = 106.75, N_eff = 3.046: c_g Omega_r h^2 = 1.617e-5 (observables.md sect. 2)
    assert cosmo.gw_transfer_h2(1e12, G106, 3.046) == pytest.approx(1.617e-5, rel=3e-3)
    assert math.isfinite(float(cosmo.gw_transfer_h2(1e6)))
