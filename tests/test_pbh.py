"""PBH variance, thresholds, mass function and f_PBH.

Check values: shared/physics/observables.md sect. 5-6 (computed) with the sources named
there: Carr et al. 2010 (arXiv:0912.5297), Harada, Yoo & Kohri 2013 (arXiv:1309.4201),
Young, Musco & Byrnes 2019 (arXiv:1904.00984)."""
import math

import numpy as np
import pytest
from scipy import optimize

from scan.errors import ConfigError
from scan.observables import cosmo
from scan.observables.pbh import (PBHConventions, abundance_coefficient, beta_monochromatic,
                                  compaction_linear_threshold, compaction_nonlinear, delta_c_harada,
                                  fpbh_prefactor, plan_pbh, variance, variance_delta)
from scan.observables.pbh.variance import variance_integrand

X = np.geomspace(0.1, 10, 20001)


def test_prefactor():
    # 1.673e8 for gamma = 0.2, g = 106.75, Omega_DM h^2 = 0.12, g_*s0 = 3.909 (Carr+10 form,
    # observables.md sect. 5.5, computed); scales as gamma^{1/2} / Omega_DM h^2
    c = fpbh_prefactor(0.2, 106.75, 0.12, n_eff=3.0)
    assert c == pytest.approx(1.673e8, rel=1e-2)
    assert fpbh_prefactor(0.8, 106.75, 0.24, n_eff=3.0) == pytest.approx(c, rel=1e-6)


def test_thresholds():
    assert delta_c_harada(1 / 3) == pytest.approx(0.41354, abs=1e-5)  # HYK13
    assert compaction_linear_threshold(0.5) == pytest.approx(2 / 3, abs=1e-10)  # YMB19
    # table of observables.md sect. 5.6, computed
    for c_th, c_l in [(0.4, 0.490), (0.45, 0.573), (0.55, 0.776), (0.6, 0.912)]:
        assert compaction_linear_threshold(c_th) == pytest.approx(c_l, abs=1e-3)
        assert compaction_nonlinear(compaction_linear_threshold(c_th)) == pytest.approx(c_th)


def test_window_variance_ratio():
    # delta spectrum: Gaussian maximum at kR = 1.3685; top-hat max ~13x larger
    # (observables.md sect. 5.1, 5.2, computed)
    g, t = variance_integrand(X), variance_integrand(X, "top-hat")
    assert X[g.argmax()] == pytest.approx(1.3685, rel=1e-3)
    assert t.max() / g.max() == pytest.approx(13, rel=0.05)


def _f_delta(A, M=1e-12, gamma=0.2):
    """Monochromatic f_PBH at M for a delta spectrum placed at the variance maximum."""
    conv = PBHConventions(criterion="press-schechter", threshold=0.45,
                          mass_function="monochromatic", ps_factor=2.0, gamma=gamma)
    m_h = M / gamma
    k_h = cosmo.k_of_horizon_mass(m_h)
    s2 = variance_delta(1.3685 * k_h, A, 1 / k_h)
    return float(abundance_coefficient(m_h, None, 0.12, 3.0) * beta_monochromatic(s2, 1.0, conv))


def test_required_amplitude_and_slope():
    # A = 3.54e-2 for f_PBH = 1 (delta P, PS erfc, Gaussian W, delta_c = 0.45,
    # M = 1e-12 M_sun) and d ln f / d ln A ~ 31 (observables.md sect. 6, computed)
    A = optimize.brentq(lambda a: math.log(_f_delta(a)), 1e-2, 0.2, xtol=1e-12)
    assert A == pytest.approx(3.54e-2, rel=1e-2)
    h = 1e-3
    slope = (math.log(_f_delta(A * (1 + h))) - math.log(_f_delta(A * (1 - h)))) / (2 * h)
    assert slope == pytest.approx(31, rel=0.05)


def test_tabulated_variance_matches_delta():
    # a narrow log-normal on a table reproduces the delta-spectrum variance (finite-width
    # corrections ~ Delta^2 (d ln g / d ln k)^2 ~ 4e-4 at kR = 3 for Delta = 0.002)
    k = np.geomspace(0.98, 1.02, 400)
    d = 0.002
    P = np.exp(-np.log(k)**2 / (2 * d * d)) / (math.sqrt(2 * math.pi) * d)
    R = np.array([0.5, 1.3685, 3.0])
    assert variance(k, P, R) == pytest.approx(variance_delta(1.0, 1.0, R), rel=1e-3)


@pytest.mark.parametrize("criterion, threshold", [
    ("compaction", 0.5), ("press-schechter", 0.45), ("peaks", 0.45)])
def test_mass_function_integrates_to_total(criterion, threshold):
    # the total (quadrature in C_l per epoch) equals int f dlnM of the mass function
    k_star = 1e12
    k = np.geomspace(k_star / 30, k_star * 30, 256)
    P = 3e-2 * np.exp(-np.log(k / k_star)**2 / (2 * 0.3**2))
    m_peak = float(cosmo.horizon_mass_msun(k_star))
    M = np.geomspace(m_peak * 1e-6, m_peak * 1e3, 400)
    conv = PBHConventions(criterion=criterion, threshold=threshold)
    res = plan_pbh(k, M, conv).evaluate(P)
    assert res.conventions is conv
    assert res.f_pbh_total > 0
    assert np.trapezoid(res.f_pbh, np.log(M)) == pytest.approx(res.f_pbh_total, rel=1e-3)


def test_nonlinear_compaction_needs_larger_amplitude():
    # C_th = 0.5 <-> C_l,th = 2/3 lifts the required amplitude by (0.667/0.5)^2 = 1.78
    # (observables.md sect. 5.6): compare nu^2 at equal beta
    conv_l = PBHConventions(criterion="press-schechter", threshold=0.5,
                            mass_function="monochromatic")
    conv_c = PBHConventions(criterion="compaction", threshold=0.5,
                            mass_function="monochromatic")
    s2 = 4e-3
    b_lin = beta_monochromatic(s2, 1.0, conv_l)
    s2c = optimize.brentq(lambda s: math.log(beta_monochromatic(s, 1.0, conv_c) / b_lin),
                          1e-3, 1e-1)
    assert s2c / s2 == pytest.approx((2 / 3 / 0.5)**2, rel=1e-3)


def test_conventions_validated():
    with pytest.raises(ConfigError, match="window"):
        PBHConventions(window="sharp-k")
    with pytest.raises(ConfigError, match="2/3"):
        PBHConventions(criterion="compaction", threshold=0.7)
    attrs = PBHConventions().as_attrs()
    assert attrs["window"] == "gaussian" and attrs["threshold"] == 0.5


@pytest.mark.parametrize("mass_function", ["critical", "monochromatic"])
@pytest.mark.parametrize("criterion, threshold", [
    ("compaction", 0.5), ("press-schechter", 0.45), ("peaks", 0.45)])
def test_batched_equals_loop(criterion, threshold, mass_function):
    # a stack of spectra gives, row by row, the one-spectrum results (including rows
    # with no PBHs at all and rows whose epochs are only partly above the underflow)
    k_star = 1e12
    k = np.geomspace(k_star / 30, k_star * 30, 200)
    m_peak = float(cosmo.horizon_mass_msun(k_star))
    M = np.geomspace(m_peak * 1e-6, m_peak * 1e3, 50)
    conv = PBHConventions(criterion=criterion, threshold=threshold,
                          mass_function=mass_function)
    plan = plan_pbh(k, M, conv)
    amps = np.array([0.0, 1e-4, 6e-3, 1e-2, 2e-2, 3e-2, 6e-2])
    widths = np.array([0.3, 0.3, 0.2, 0.5, 0.3, 1.0, 0.1])
    P = amps[:, None] * np.exp(-np.log(k / k_star)**2 / (2 * widths[:, None]**2))
    res = plan.evaluate(P)
    loop = [plan.evaluate(row) for row in P]
    assert res.f_pbh.shape == (7, M.size) and res.f_pbh_total.shape == (7,)
    assert res.sigma2.shape == (7, plan.M_H.size)
    assert isinstance(loop[0].f_pbh_total, float) and loop[0].f_pbh_total == 0
    assert loop[-1].f_pbh_total > 0
    tot = np.array([r.f_pbh_total for r in loop])
    # the stack and one spectrum sum sigma^2 over the 200 k nodes in another order (matrix
    # product vs matrix-vector): positive terms, so <= 200 eps relative (Higham 2002,
    # sect. 4.2); f ~ exp(-nu^2/2) with nu^2/2 <= 760 multiplies that by up to 760
    # (measured: sigma^2 1.4e-15, f 5.1e-13 — 1e-12 left only a factor 2 for other BLAS)
    sums = 200 * np.finfo(float).eps / 2
    assert res.f_pbh_total == pytest.approx(tot, rel=760 * sums, abs=0)
    assert res.f_pbh == pytest.approx(np.array([r.f_pbh for r in loop]), rel=760 * sums, abs=0)
    assert res.sigma2 == pytest.approx(np.array([r.sigma2 for r in loop]), rel=sums, abs=0)
    with pytest.raises(ValueError, match="shape"):
        plan.evaluate(P[:, 1:])
