"""Likelihood terms planned on fixed grids (scan.likelihood.grid) against the direct terms.

The planned forms must give the numbers of ``term(obs, nuisance)``: bit for bit where the
operations are the same (interpolation weights found once, log10 Omega taken once), to
rounding where a sum became a matrix product (PBH and N_eff integrals) or the SNR is
summed relative to its largest node.  Tolerances of 1e-12 relative are rounding of sums
of a few hundred terms (common practice: a few hundred ulp).  The check values of the
terms themselves are in tests/test_likelihood.py.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from scan import likelihood as L
from scan.curves import load_curve
from scan.likelihood.base import TINY, GridSpectra
from scan.likelihood.grid import DirectTerm, plan_terms
from scan.observables import Observables

C = Path(__file__).resolve().parents[1] / "constraints"
DEMO = C / "demo"
RTOL = 1e-12


def gw_terms() -> list:
    """Every Omega_GW term kind with each of its options (demo curves, LISA 4 yr)."""
    ul = load_curve(DEMO / "ground_upper_limit_heron.csv")
    kestrel = load_curve(DEMO / "pta_excess_kestrel.csv")
    osprey = load_curve(DEMO / "pta_free_spectrum_osprey.csv")
    noise = load_curve(C / "lisa_noise_4yr.csv")
    pli = load_curve(C / "lisa_pli_snr10_4yr.csv")
    terms = [L.UpperLimit.from_curve(ul, method=m) for m in L.upper.METHODS]
    terms = [L.UpperLimit(f"{t.name}_{t.method}", t.log10_x, t.log10_u, t.method, t.z,
                          t.width_dex) for t in terms]
    terms += [L.SplitNormalExcess.from_curve(kestrel),
              L.SplitNormalExcess("kestrel_no_fg", *_excess_args(kestrel), foreground=False),
              L.DensityGridExcess.from_curve(osprey)]
    for mode in L.sensitivity.MODES:
        for curve in (noise, pli):
            t = L.Sensitivity.from_curve(curve, mode)
            terms.append(L.Sensitivity(f"{t.name}_{mode}", t.log10_f, t.log10_omega, t.form,
                                       t.snr_threshold, t.t_obs_s, t.convention, mode))
    # a weaker threshold so that some rows are detectable and some not
    t = L.Sensitivity.from_curve(noise, "exclude_detectable")
    terms.append(L.Sensitivity("lisa_snr_1e6", t.log10_f, t.log10_omega, t.form, 1e6,
                               t.t_obs_s, "cross", "exclude_detectable"))
    terms += [L.NeffBound("neff_step", 0.2), L.NeffBound("neff_hn", 1e-6, method="half_normal"),
              L.NeffBound("neff_band", 1e-6, 1e-8, 1e-2, "half_normal")]
    return terms


def _excess_args(curve):
    t = L.SplitNormalExcess.from_curve(curve)
    return t.f_hz, t.mu, t.sigma_lo, t.sigma_hi


def pbh_terms() -> list:
    curves = [load_curve(DEMO / name) for name in ("fpbh_evaporation_demo.csv",
                                                     "fpbh_microlensing_demo.csv",
                                                     "fpbh_accretion_demo.csv")]
    return [L.PBHBounds.from_curves(curves, f"pbh_{c}_{m}", combine=c, method=m)
            for c in ("max", "quadrature") for m in ("step", "soft_log")]


def spectra(f_hz: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Log-normal peaks from nHz to kHz, 0 outside a window of 3 e-folds each side (as
    the shared grids give them), 1e-6..1e-18 high; one row all zero."""
    m = 40
    centre = np.exp(rng.uniform(math.log(1e-9), math.log(1e3), m))
    height = 10.0 ** rng.uniform(-18, -6, m)
    width = rng.uniform(0.3, 1.5, m)
    x = np.log(f_hz[None, :] / centre[:, None])
    omega = height[:, None] * np.exp(-0.5 * (x / width[:, None]) ** 2)
    omega[np.abs(x) > 3.0] = 0.0
    omega[0] = 0.0
    return omega


def mass_functions(m_msun: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    m = 40
    centre = rng.uniform(math.log(1e-18), math.log(1e4), m)
    amp = 10.0 ** rng.uniform(-12, 1, m)
    x = np.log(m_msun)[None, :] - centre[:, None]
    f = amp[:, None] * np.exp(-0.5 * (x / rng.uniform(0.3, 2.0, m)[:, None]) ** 2)
    f[1] = 0.0
    return f


GRIDS = {
    "nHz_to_kHz": np.geomspace(1e-10, 1e4, 239),   # every curve inside
    "cuts_pta_bins": np.geomspace(5e-9, 1e2, 180),  # some PTA bins outside, UL partly
    "below_lisa": np.geomspace(1e-10, 1e-6, 60),    # no LISA, no ground overlap
}


def observables(f_hz, rng, n=40):
    masses = np.geomspace(1e-20, 1e6, 64)
    return Observables(f_hz=f_hz, omega_gw_h2=spectra(f_hz, rng)[:n], m_msun=masses,
                              f_pbh_per_lnm=mass_functions(masses, rng)[:n], n_s=0.965,
                              ln_1e10_as=3.044, r=0.01)


def assert_same(planned, direct, exact: bool):
    planned, direct = np.asarray(planned, float), np.asarray(direct, float)
    assert planned.shape == direct.shape
    if exact:
        np.testing.assert_array_equal(planned, direct)
    else:
        np.testing.assert_allclose(planned, direct, rtol=RTOL, atol=0.0)


@pytest.mark.parametrize("grid", list(GRIDS))
def test_planned_gw_terms_equal_the_direct_terms(grid):
    rng = np.random.default_rng(11)
    obs = observables(GRIDS[grid], rng)
    nuisance = {"A_smbhb": 10.0 ** rng.uniform(-16, -14, 40)}
    terms = gw_terms()
    plan = plan_terms(terms, obs.f_hz, obs.m_msun)
    assert plan.covers(obs)
    assert not any(isinstance(p, DirectTerm) for p in plan.planned)
    view = plan.spectra(obs)
    values = plan.loglikes(view, nuisance)
    for term in terms:
        # equal to rounding: a sum over bins may be taken in another order (memory layout)
        assert_same(values[term.name], term(obs, nuisance), exact=False)
    for planned, term in zip(plan.planned, terms):
        if isinstance(term, L.NeffBound):
            i_gw = L.integrated_omega_h2(obs.f_hz, obs.omega_gw_h2, term.f_min_hz,
                                         term.f_max_hz)
            assert_same(view.omega @ planned.v, i_gw, exact=False)
        if isinstance(term, L.UpperLimit):
            assert_same(planned.worst_log10_ratio(view),
                        term.worst_log10_ratio(obs.f_hz, obs.omega_gw_h2), exact=True)
        if isinstance(term, L.Sensitivity) and term.form == "noise":
            assert_same(plan.snr(term.name, view), term.snr(obs.f_hz, obs.omega_gw_h2),
                        exact=False)
        if isinstance(term, L.Sensitivity) and term.mode != "report":
            assert_same(planned.detectable(view),
                        term.detectable(obs.f_hz, obs.omega_gw_h2), exact=True)
    if grid == "nHz_to_kHz":  # the draw has detectable and undetectable rows
        assert 0 < np.sum(values["lisa_snr_1e6"] == -np.inf) < 40
        assert np.isfinite(values["demo_heron_ul_half_normal"]).all()


def test_planned_pbh_bounds_equal_the_direct_integrals():
    rng = np.random.default_rng(5)
    obs = observables(GRIDS["nHz_to_kHz"], rng)
    terms = pbh_terms()
    plan = plan_terms(terms, obs.f_hz, obs.m_msun)
    view = plan.spectra(obs)
    for planned, term in zip(plan.planned, terms):
        direct = term.integrals(obs.m_msun, obs.f_pbh_per_lnm)
        assert_same(planned.integrals(view), direct, exact=False)
        lnl = planned(view)
        assert_same(lnl, term(obs), exact=term.method == "step")
        assert 0 < np.sum(lnl == 0.0) < 40        # some rows allowed, some not
    # without masses the f_PBH terms are called as they are
    assert all(isinstance(p, DirectTerm) for p in plan_terms(terms, obs.f_hz).planned)


def test_non_finite_rows_are_integrated_directly():
    """0 * inf is NaN in a matrix product: a row with inf outside a bound's mass range
    (or the N_eff band) must give the direct integral, which never reads that sample."""
    rng = np.random.default_rng(2)
    obs = observables(GRIDS["nHz_to_kHz"], rng)
    omega, f_pbh = obs.omega_gw_h2.copy(), obs.f_pbh_per_lnm.copy()
    omega[3, -1] = np.inf                        # 1e4 Hz: outside the 1e-8..1e-2 Hz band
    f_pbh[4, -1] = np.inf                        # 1e6 M_sun: beyond every demo bound
    obs = Observables(f_hz=obs.f_hz, omega_gw_h2=omega, m_msun=obs.m_msun,
                             f_pbh_per_lnm=f_pbh)
    neff = L.NeffBound("neff_band", 1e-6, 1e-8, 1e-2, "half_normal")
    terms = [neff, *pbh_terms()[:1]]
    plan = plan_terms(terms, obs.f_hz, obs.m_msun)
    view = plan.spectra(obs)
    values = plan.loglikes(view)
    assert np.isfinite(values[neff.name][3]) and np.isfinite(values[neff.name]).all()
    assert_same(values[neff.name], neff(obs), exact=False)
    direct = terms[1].integrals(obs.m_msun, f_pbh)
    assert np.isfinite(direct[4]).all()
    assert_same(plan.planned[1].integrals(view), direct, exact=False)


def test_snr_equals_the_trapezoid_of_the_ratio_squared_and_zero_rows_are_zero():
    """SNR^2 = c T int df (Omega/Omega_n)^2 (Thrane & Romano 2013, arXiv:1310.5300), as
    the trapezoid in ln f of 10^(2 (log10 Omega - log10 Omega_n)) f on the union of model
    and curve points (the formula before the SNR was summed relative to its largest
    node); rows far below the noise give exactly 0."""
    term = L.Sensitivity.from_curve(load_curve(C / "lisa_noise_4yr.csv"))
    rng = np.random.default_rng(3)
    f = GRIDS["nHz_to_kHz"]
    omega = spectra(f, rng)
    omega[1] = 1e-290                            # 277 dex below the noise: SNR 0
    omega[2] = np.where(omega[2] > 0, 1e-160, 0.0)   # SNR ~1e-153: computed, not skipped
    lf = np.log10(f)
    lo, hi = max(lf[0], term.log10_f[0]), min(lf[-1], term.log10_f[-1])
    grid = np.union1d(lf[(lf >= lo) & (lf <= hi)],
                      term.log10_f[(term.log10_f >= lo) & (term.log10_f <= hi)])
    lm = np.array([np.interp(grid, lf, np.log10(np.maximum(row, TINY))) for row in omega])
    ratio2 = 10.0 ** (2.0 * (lm - np.interp(grid, term.log10_f, term.log10_omega)))
    want = np.sqrt(term.t_obs_s * np.trapezoid(ratio2 * 10.0**grid, grid * math.log(10.0),
                                               axis=-1))
    direct = term.snr(f, omega)
    # below SNR ~1e-145 the reference's integrand is subnormal (< 2.2e-308) and has lost
    # digits (row 2, SNR 2.6e-153: 1e-10); the tested formula sums relative to its largest
    np.testing.assert_allclose(direct, want, rtol=RTOL, atol=1e-140)
    assert 0.0 < direct[2] < 1e-140
    plan = plan_terms([term], f)
    planned = plan.snr(term.name, plan.spectra(Observables(f_hz=f, omega_gw_h2=omega)))
    np.testing.assert_allclose(planned, direct, rtol=RTOL, atol=0.0)
    assert planned[0] == planned[1] == direct[1] == 0.0 and planned[2] == direct[2]
    assert np.sum(planned > 1.0) > 3               # the draw has signals LISA would see


def test_log10_omega_is_the_floored_logarithm_bit_for_bit():
    omega = np.array([[0.0, 1e-300, 2e-300, 1e-12, np.nan, 1e-320, np.inf]])
    got = GridSpectra(Observables(omega_gw_h2=omega)).log10_omega
    np.testing.assert_array_equal(got, np.log10(np.maximum(omega, TINY)))
    rng = np.random.default_rng(0)
    omega = spectra(GRIDS["nHz_to_kHz"], rng)
    got = GridSpectra(Observables(omega_gw_h2=omega)).log10_omega
    np.testing.assert_array_equal(got, np.log10(np.maximum(omega, TINY)))


def test_covers_only_the_planned_grids_and_names_stay_unique():
    rng = np.random.default_rng(1)
    obs = observables(GRIDS["nHz_to_kHz"], rng)
    scalars = [*L.planck2018_pivot_priors(), L.bicep_keck_2021_r()]
    terms = gw_terms()[:2] + pbh_terms()[:1] + scalars
    plan = plan_terms(terms, obs.f_hz, obs.m_msun)
    assert [type(p) for p in plan.planned[-3:]] == [DirectTerm] * 3
    values = plan.loglikes(plan.spectra(obs))
    for term in scalars:
        assert values[term.name] == term(obs)
    other = Observables(f_hz=obs.f_hz * 1.01, omega_gw_h2=obs.omega_gw_h2,
                               m_msun=obs.m_msun)
    one = Observables(f_hz=obs.f_hz, omega_gw_h2=obs.omega_gw_h2[0],
                             m_msun=obs.m_msun)
    masses = Observables(f_hz=obs.f_hz, omega_gw_h2=obs.omega_gw_h2,
                                m_msun=obs.m_msun[::-1])
    no_masses = Observables(f_hz=obs.f_hz, omega_gw_h2=obs.omega_gw_h2)
    assert plan.covers(obs) and not any(plan.covers(o) for o in (other, one, masses,
                                                                  no_masses))
    assert plan_terms(terms[:2], obs.f_hz).covers(no_masses)
    twice = plan_terms([terms[0], terms[0]], obs.f_hz)
    with pytest.raises(ValueError, match="two likelihood terms"):
        twice.loglikes(twice.spectra(obs))
    with pytest.raises(KeyError, match="no planned sensitivity"):
        plan.snr("nope", plan.spectra(obs))
