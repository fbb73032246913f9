"""Likelihood terms and the constraints.md Sec. 8 check values they rest on."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from scan import constants as C
from scan import likelihood as L
from scan.curves import load_curve, parse_text
from scan.observables import Observables
from scan.observables.cosmo import omega_gamma_h2

DEMO = Path(__file__).resolve().parents[1] / "constraints" / "demo"
A_NG, T_16 = 2.4e-15, 16.03 * C.YEAR_S


# --- constants and conversions (constraints.md Sec. 8) ---
def test_constants():
    assert C.H100_S == pytest.approx(3.240779e-18, rel=1e-7)            # definition
    assert C.GW_OMEGA_PREFACTOR_S2 == pytest.approx(6.264834e35, rel=1e-6)  # Sec. 1.2
    assert C.F_YR_HZ == pytest.approx(3.168809e-8, rel=1e-7)            # Julian year
    assert C.HZ_PER_INV_MPC == pytest.approx(1.5463e-15, rel=1e-5)      # k -> f, Sec. 5d
    assert math.exp(3.044) * 1e-10 == pytest.approx(2.0989e-9, rel=1e-4)  # A_s, Planck 2018


@pytest.mark.parametrize("f,gamma,amp,want", [
    (C.F_YR_HZ, 13 / 3, A_NG, 3.6235e-9), (C.F_YR_HZ, 3.2, A_NG, 3.6235e-9),
    (1 / T_16, 13 / 3, A_NG, 5.6995e-10), (1e-8, 13 / 3, A_NG, 1.6796e-9),
    (1e-8, 3.2, 6.4e-15, 3.2318e-9)])
def test_pta_power_law_omega(f, gamma, amp, want):
    """Omega h^2 = (2pi^2 f_yr^2/3H100^2) A^2 (f/f_yr)^(5-gamma) (Sec. 1.3; A from
    NANOGrav 15 yr, arXiv:2306.16213)."""
    assert L.power_law_omega_h2(f, amp, gamma)[0] == pytest.approx(want, rel=1e-4)


def test_log10_rho_bin1_and_round_trip():
    """T = 16.03 yr, A = 2.4e-15, gamma = 13/3: log10 rho_1 = -6.1492 (Sec. 5b); the rho route
    8 pi^4 T f^5 rho^2/H0^2 equals (2pi^2/3H0^2) f^2 h_c^2 to 1e-12."""
    f = np.arange(1, 6) / T_16
    rho = L.power_law_rho(f, A_NG, 13 / 3, T_16)
    assert np.log10(rho[0]) == pytest.approx(-6.1492, abs=1e-4)
    from scan.curves.schema import y_to_omega_h2
    via_rho = y_to_omega_h2("rho", rho, f, None, T_16)
    np.testing.assert_allclose(via_rho, L.power_law_omega_h2(f, A_NG, 13 / 3), rtol=1e-12)


def test_neff_coefficient_and_bounds():
    """Omega_gamma h^2 = 2.4730e-5 (T0 = 2.7255 K); (7/8)(4/11)^(4/3) Omega_gamma h^2 =
    5.616e-6 (Maggiore 2000, gr-qc/9909001); Delta N_eff = 0.107 / 0.3 -> 6.01e-7 / 1.685e-6."""
    assert omega_gamma_h2() == pytest.approx(2.4730e-5, rel=1e-4)
    assert L.NEFF_COEFFICIENT == pytest.approx(5.616e-6, rel=1e-3)
    assert L.neff_integral_limit(0.107) == pytest.approx(6.01e-7, rel=1e-3)
    assert L.neff_integral_limit(0.3) == pytest.approx(1.685e-6, rel=1e-3)


def test_neff_term_integrates_ln_f():
    f = np.geomspace(1e-12, 1e-2, 500)
    flat = np.full_like(f, 1e-7)
    term = L.NeffBound("n", 0.107, f_min_hz=1e-10, f_max_hz=1e-3)
    i = L.integrated_omega_h2(f, flat, 1e-10, 1e-3)
    assert i == pytest.approx(1e-7 * math.log(1e7), rel=1e-10)  # 1.61e-6 > 6.01e-7
    assert term.loglike(f, flat) == -math.inf
    assert term.loglike(f, flat / 10) == 0.0


def test_half_normal_sigma():
    """sigma = U/(sqrt2 erfinv CL) = U/1.95996 (95 %), U/1.64485 (90 %) (Sec. 5a)."""
    assert L.half_normal_sigma(1.0, 0.95) == pytest.approx(1 / 1.95996, rel=1e-5)
    assert L.half_normal_sigma(1.0, 0.90) == pytest.approx(1 / 1.64485, rel=1e-5)
    assert L.bicep_keck_2021_r().sigma == pytest.approx(0.036 / 1.95996, rel=1e-5)


# --- PBH: Carr et al. 2017 integrals ---
LNM = np.linspace(-15.0, 15.0, 3001)
M = np.exp(LNM)


def lognormal_per_lnm(f_pbh, m_c, sigma):
    """M psi(M) for psi = f/(sqrt(2pi) sigma M) exp(-ln^2(M/M_c)/2 sigma^2)."""
    return f_pbh / (math.sqrt(2 * math.pi) * sigma) * np.exp(-np.log(M / m_c) ** 2 / (2 * sigma**2))


def _bound(name, xs, ys):
    text = (f"#: bcf_version = 1\n#: name = {name}\n#: kind = upper_limit\n#: x_quantity = "
            "mass\n#: x_unit = Msun\n#: y_quantity = f_pbh\n#: y_unit = 1\n#: y_scale = linear\n"
            "#: confidence = 0.95\n#: synthetic = true\n#: citation = test\nx,y\n"
            + "".join(f"{x!r},{y!r}\n" for x, y in zip(xs, ys)))
    return parse_text(text)


def test_lognormal_normalisation():
    """int psi dM = f_PBH (Sec. 5c)."""
    psi_dm = lognormal_per_lnm(0.3, 1.0, 1.0)
    assert np.trapezoid(psi_dm, LNM) == pytest.approx(0.3, rel=1e-8)


def test_carr_integral_constant_and_power_law():
    """Constant F = 1e-2, f = 0.3: I = 30.0; f_max = (M/M0)^-2, sigma = 1, M_c = M0:
    I = e^2 = 7.38906 (Carr et al. 2017, arXiv:1705.05567; Sec. 5c)."""
    const = _bound("const", [1e-30, 1e30], [1e-2, 1e-2])
    with pytest.warns(UserWarning, match="no constraint"):
        power = _bound("power", [1e-10, 1e10], [1e20, 1e-20])  # f_max = (M/1)^-2
    with pytest.warns(UserWarning, match="no constraint"):
        pass_through = _bound("open", [1e-40, 1e-35], [2.0, 2.0])  # outside the model range
    pb = L.PBHBounds.from_curves([const, power, pass_through])
    i = pb.integrals(M, lognormal_per_lnm(0.3, 1.0, 1.0))
    assert i[0] == pytest.approx(30.0, rel=1e-6)
    assert i[2] == 0.0
    i1 = L.PBHBounds.from_curves([power]).integrals(M, lognormal_per_lnm(1.0, 1.0, 1.0))
    assert i1[0] == pytest.approx(math.e**2, rel=1e-6)


def test_pbh_combination_and_binding():
    a = _bound("a", [1e-5, 1e5], [0.5, 0.5])
    b = _bound("b", [1e-5, 1e5], [1.0, 1.0])
    f = lognormal_per_lnm(0.4, 1.0, 0.5)  # I_a = 0.8, I_b = 0.4
    assert L.PBHBounds.from_curves([a, b]).statistic(M, f) == pytest.approx(0.8, rel=1e-6)
    quad = L.PBHBounds.from_curves([a, b], combine="quadrature").statistic(M, f)
    assert quad == pytest.approx(0.8**2 + 0.4**2, rel=1e-6)
    assert L.PBHBounds.from_curves([a, b]).binding(M, f) == "a"
    assert L.PBHBounds.from_curves([a, b]).loglike(M, f) == 0.0
    assert L.PBHBounds.from_curves([a, b]).loglike(M, 2 * f) == -math.inf


# --- upper limits ---
def _ul(method=None, extra=""):
    text = ("#: bcf_version = 1\n#: name = ul\n#: kind = upper_limit\n#: x_quantity = frequency\n"
            "#: x_unit = Hz\n#: y_quantity = omega_gw_h2\n#: y_unit = 1\n#: y_scale = linear\n"
            f"#: confidence = 0.95\n#: synthetic = true\n#: citation = t\n{extra}x,y\n"
            "10,1e-8\n30,1e-9\n100,1e-8\n")
    return L.UpperLimit.from_curve(parse_text(text), method=method, width_dex=0.1)


def test_upper_limit_worst_point_not_sum():
    f = np.geomspace(1, 1000, 2001)
    below = np.full_like(f, 5e-10)
    term = _ul()
    assert term.loglike(f, below) == 0.0
    assert _ul("half_normal").loglike(f, below) == pytest.approx(-0.5 * (1.959964 * 0.5) ** 2,
                                                                 rel=1e-5)
    # denser tabulation of the same model must not change ln L (worst point, not a sum)
    f2 = np.geomspace(1, 1000, 20001)
    assert (_ul("half_normal").loglike(f2, np.full_like(f2, 5e-10))
            == pytest.approx(_ul("half_normal").loglike(f, below), rel=1e-12))
    assert _ul().loglike(f, 2 * below + 1e-9) == -math.inf
    soft = _ul("soft_log").loglike(f, np.full_like(f, 1e-8))  # 1 dex above at 30 Hz
    assert soft == pytest.approx(-0.5 * (1.0 / 0.1) ** 2, rel=1e-6)


def test_upper_limit_narrow_peak_and_no_extrapolation():
    f = np.array([1.0, 29.0, 30.0, 31.0, 1000.0])
    peak = np.array([1e-20, 1e-20, 3e-9, 1e-20, 1e-20])
    assert _ul().loglike(f, peak) == -math.inf         # caught at a model point
    outside = np.geomspace(200, 1000, 50)
    assert _ul().loglike(outside, np.full(50, 1.0)) == 0.0  # no constraint out of range


def test_vectorised_over_models():
    f = np.geomspace(1, 1000, 500)
    batch = np.outer([1e-10, 2e-9], np.ones_like(f))
    np.testing.assert_array_equal(_ul().loglike(f, batch), [0.0, -math.inf])


# --- detected excess and foreground ---
def test_split_normal_excess_peak_and_foreground():
    c = load_curve(DEMO / "pta_excess_kestrel.csv")
    term = L.SplitNormalExcess.from_curve(c)
    f = np.union1d(np.geomspace(1e-10, 1e-6, 400), c.x)  # bins on the model grid
    # a spectrum through the bin centres maximises ln L; any shift lowers it
    exact = np.exp(np.interp(np.log(f), np.log(c.x), np.log(c.y)))
    best = term.loglike(f, exact)
    norm = -np.sum(np.log(np.sqrt(2 * np.pi) * 0.5 * (term.sigma_lo + term.sigma_hi)))
    assert best == pytest.approx(norm, abs=1e-9)
    assert term.loglike(f, exact * 2) < best and term.loglike(f, exact / 2) < best
    # foreground added: model + SMBHB with A equals model' = model + fg without A
    fg = L.smbhb_omega_h2(f, 1e-15)
    obs = Observables(f_hz=f, omega_gw_h2=exact)
    assert term(obs, {"A_smbhb": 1e-15}) == pytest.approx(term.loglike(f, exact + fg), rel=1e-9)
    amps = np.array([0.0, 1e-15])
    np.testing.assert_allclose(term.loglike(f, exact, amps),
                               [best, term.loglike(f, exact + fg)], rtol=1e-12)


def test_smbhb_foreground_formula():
    """h_c = A (f/f_yr)^(-2/3): Omega h^2(f_yr) = 3.6235e-9 for A = 2.4e-15 (Sec. 8)."""
    assert L.smbhb_omega_h2(C.F_YR_HZ, A_NG)[0] == pytest.approx(3.6235e-9, rel=1e-4)


def test_density_grid_excess():
    c = load_curve(DEMO / "pta_free_spectrum_osprey.csv")
    term = L.DensityGridExcess.from_curve(c)
    f = np.union1d(np.geomspace(1e-10, 1e-6, 400), c.x)
    modes = np.exp(np.interp(np.log(f), np.log(c.x), np.log(c.y)))
    at_modes = term.loglike(f, modes)
    want = sum(np.log(d.max()) for d in c.grid_density)
    assert at_modes == pytest.approx(want, rel=1e-9)
    tiny = term.loglike(f, modes * 1e-30)   # clipped to the grid's low edge: finite
    assert np.isfinite(tiny) and tiny < at_modes


# --- sensitivity and CMB priors, total ---
def test_sensitivity_snr_against_noise_curve():
    from scan.curves import noise as N
    c = load_curve(DEMO.parent / "lisa_noise_4yr.csv")
    term = L.Sensitivity.from_curve(c)
    f = np.geomspace(1e-5, 1, 3001)
    on = N.omega_noise_h2(f, N.lisa_strain_psd(f))
    flat = L.Sensitivity.from_curve(c).snr(f, np.full_like(f, 8.3325e-14))
    # the flat amplitude 8.33e-14 is the SNR-10 threshold (Sec. 2.4)
    assert flat == pytest.approx(10.0, rel=5e-3)
    assert term.snr(f, 1e-12 * on / on) == pytest.approx(10 * 1e-12 / 8.3325e-14, rel=5e-3)
    assert term.loglike(f, np.full_like(f, 1e-12)) == 0.0  # "report" mode
    assert L.Sensitivity.from_curve(c, "exclude_detectable").loglike(
        f, np.full_like(f, 1e-12)) == -math.inf
    pli = L.Sensitivity.from_curve(load_curve(DEMO.parent / "lisa_pli_snr10_4yr.csv"))
    assert pli.detectable(f, np.full_like(f, 1e-12)) and not pli.detectable(f, np.full_like(f, 5e-14))
    with pytest.raises(ValueError, match="no SNR"):
        pli.snr(f, np.full_like(f, 1e-12))


def test_cmb_priors_and_total():
    ns, las = L.planck2018_pivot_priors()
    r = L.bicep_keck_2021_r()
    obs = Observables(n_s=0.9649 + 0.0042, ln_1e10_as=3.044, r=0.036)
    total, per = L.total_loglike([ns, las, r], obs)
    assert per["planck2018_n_s"] == pytest.approx(-0.5)
    assert per["planck2018_ln_As"] == 0.0
    assert per["bk18_r"] == pytest.approx(-0.5 * 1.959964**2, rel=1e-6)
    assert total == pytest.approx(-0.5 - 0.5 * 1.959964**2, rel=1e-6)
    assert L.binding_term(per) == "bk18_r"
    with pytest.raises(ValueError, match="two likelihood terms"):
        L.total_loglike([ns, ns], obs)


def test_demo_terms_on_a_pole_like_model():
    """A peaked spectrum near 30 nHz with Omega h^2 ~ 4e-9 fits the invented PTA excess
    better than a flat 1e-10, and every demo term evaluates."""
    terms = L.terms_from_directory(DEMO)
    f = np.geomspace(1e-10, 1e3, 600)
    peak = 4e-9 * np.exp(-0.5 * (np.log(f / 3e-8) / 1.2) ** 2)
    lnm = np.linspace(-50, 10, 400)
    obs = Observables(f_hz=f, omega_gw_h2=peak, m_msun=np.exp(lnm),
               f_pbh_per_lnm=1e-3 * np.exp(-0.5 * ((lnm + 30) / 1.0) ** 2),
               n_s=0.965, ln_1e10_as=3.044, r=0.01)
    total, per = L.total_loglike(terms, obs, {"A_smbhb": 1e-16})
    assert np.isfinite(total) and len(per) == len(terms) >= 7
    flat = obs.replace(omega_gw_h2=np.full_like(f, 1e-10))
    assert (per["demo_kestrel_excess"]
            > L.total_loglike(terms, flat)[1]["demo_kestrel_excess"])
