"""Non-Gaussian PBH abundance against published results (issue 15, acceptance item 2).

What the search tool returns of the papers is their opening (abstract and introduction),
not their bodies, so no figure or table value of a paper's body could be read here.  Two
kinds of published check are made instead:

* abstract-level statements, with the tolerance such a statement allows (Taoso & Urbano
  2021; Biagetti et al. 2021);
* an exact published closed form: for the logarithmic map of an ultra-slow-roll phase,
  C_l = C_G F'(zeta_G) = C_G / (1 - lambda zeta_G) is the ratio of two correlated normal
  variables, whose density is Hinkley's (1969) closed form.  The abundance built on it
  (one adaptive quadrature per formation epoch) is the reference for the tool's f_PBH.
"""
import math

import numpy as np
import pytest
from scipy import integrate, optimize, special

from scan.observables.pbh import (
    PBHConventions,
    abundance_coefficient,
    compaction_linear_threshold,
    plan_pbh,
)
from scan.observables.pbh.ng_density import ln_density
from scan.observables.pbh.nongaussian import compaction_density, plan_nongaussian
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of

K = np.geomspace(1e5, 1e8, 300)
M = np.geomspace(1e-2, 1e3, 40)
K_PEAK = np.sqrt(K[0] * K[-1])
TARGET = 1e-3


def _lognormal(amplitude: float, width: float) -> np.ndarray:
    """P_zeta = A exp(-ln^2(k/k_p)/(2 width^2)) / (sqrt(2 pi) width) [1] on ``K``."""
    x = np.log(K / K_PEAK)
    return amplitude * np.exp(-0.5 * (x / width)**2) / (np.sqrt(2 * np.pi) * width)


@pytest.fixture(scope="module")
def top_hat_plan():
    # Ferrante, Franciolini, Iovino & Urbano 2023 (arXiv:2211.01728) conventions: real-space
    # top-hat window, zeta_G at the shell (sin x / x), threshold statistics of the
    # compaction function with C = C_l - (3/8) C_l^2, type I; C_th = 0.55 (a top-hat value
    # in the range 0.5-0.6 of Musco 2019 profiles, from memory); critical collapse with
    # K = 3.3, gamma_c = 0.36.
    conv = PBHConventions(window="top-hat", threshold=0.55)
    return plan_nongaussian(plan_pbh(K, M, conv, n_formation=64), 64)


@pytest.mark.parametrize("width", [0.1, 0.5])
def test_usr_local_fnl_moves_the_needed_amplitude_by_a_factor_two_to_three(top_hat_plan,
                                                                           width):
    # Taoso & Urbano 2021 (arXiv:2102.03610, abstract, confirmed with the search tool):
    # with threshold statistics of the compaction function and its non-linear relation,
    # the (predominantly local) non-Gaussianity of ultra-slow-roll models changes the PBH
    # abundance, but "this effect can be compensated by a small change, of a factor 2÷3 at
    # most, of the amplitude of the primordial power spectrum".  We take the largest
    # local f_NL of that class, 5/2 (ultra-slow roll ending abruptly, Namjoo, Firouzjahi &
    # Sasaki 2013, arXiv:1210.3692), zeta = zeta_G + (3/5) f_NL zeta_G^2, and log-normal
    # peaks (their spectra come from inflaton potentials we do not reproduce).  Measured
    # A_Gaussian / A_non-Gaussian at f_PBH = 1e-3: 2.16 (width 0.1), 2.80 (0.5); 3.07 at
    # width 0.7 and 3.39 at width 1.0, i.e. broad peaks exceed their bound by <= 13 %.
    # Asserted for the narrow and moderate peaks: the ratio lies in [2, 3], the band the
    # abstract states; monotonicity of f_PBH in A turns this into two evaluations.
    gaussian = top_hat_plan.base

    def log_excess(log_a):
        return np.log(gaussian.evaluate(_lognormal(np.exp(log_a), width)).f_pbh_total
                      / TARGET)

    a_gauss = np.exp(optimize.brentq(log_excess, np.log(1e-3), np.log(1.0), xtol=1e-9))
    usr = zeta_map_of("local", f_nl=2.5)
    at_half = top_hat_plan.evaluate(_lognormal(a_gauss / 2, width), usr).f_pbh_total
    at_third = top_hat_plan.evaluate(_lognormal(a_gauss / 3, width), usr).f_pbh_total
    assert at_third < TARGET < at_half
    # the identity map at A_Gaussian returns the target: the root is found to 1e-9 in ln A
    # and d ln f / d ln A = O(30) here, so f to ~3e-8 (asserted 1e-6)
    same = top_hat_plan.evaluate(_lognormal(a_gauss, width), ZetaMap()).f_pbh_total
    assert same == pytest.approx(TARGET, rel=1e-6)


# --- The logarithmic map: the density of C_l in closed form (Hinkley 1969) -------------
#
# Hinkley, D. V. 1969, "On the ratio of two correlated normal random variables",
# Biometrika 56(3), 635-639 (title, journal and pages confirmed with the search tool; the
# formula's text was not readable there).  For (X, Y) bivariate normal with means
# (mu_x, mu_y), standard deviations (s_x, s_y) and correlation rho, and for w = X/Y,
#
#   a^2(w) = w^2/s_x^2 - 2 rho w/(s_x s_y) + 1/s_y^2,
#   b(w)   = mu_x w/s_x^2 - rho (mu_x + mu_y w)/(s_x s_y) + mu_y/s_y^2,
#   c      = mu_x^2/s_x^2 - 2 rho mu_x mu_y/(s_x s_y) + mu_y^2/s_y^2,
#   d(w)   = exp[(b^2 - c a^2) / (2 (1 - rho^2) a^2)],
#
# and his eq. (1) (from memory) is the density over both signs of Y.  The tool counts only
# the branch Y = 1 - lambda zeta_G > 0 (beyond it F is undefined, zeta_map.py), whose
# density int_0^inf y p(w y, y) dy is, completing the square in y (derived here; the sum
# of this over (mu_x, mu_y) and (-mu_x, -mu_y) is Hinkley's two-branch form):
#
#   g_+(w) = b d Phi(b / (sqrt(1 - rho^2) a)) / (sqrt(2 pi) s_x s_y a^3)
#            + sqrt(1 - rho^2) exp(-c / (2 (1 - rho^2))) / (2 pi s_x s_y a^2).
#
# Here X = C_G (mean 0, variance sigma_c^2), Y = 1 - lambda zeta_G (mean 1, standard
# deviation |lambda| sigma_r) and cov(X, Y) = -lambda sigma_cr^2.  At large w, a ~ w/s_x
# and b ~ -rho w/(s_x s_y): g_+ ~ L / w^2, a Cauchy tail, as Biagetti, De Luca,
# Franciolini, Kehagias & Riotto 2021 (arXiv:2105.07810, abstract, confirmed with the
# search tool) state for the ultra-slow-roll formation probability: "it interpolates
# between a Gaussian at small values of the average density contrast and a Cauchy
# probability distribution at large values".

#: (sigma_c^2, sigma_cr^2, sigma_r^2) of a formation epoch near the peak of a spectrum
#: (C_G and zeta_G comparable) and of a far epoch (sigma_c^2 << sigma_r^2: C_l is large
#: only on the ridge next to lambda zeta_G = 1); as tests/test_pbh_nongaussian.py.
PEAK_EPOCH = (0.01, 0.006, 0.008)
FAR_EPOCH = (3.03e-6, 8.19e-5, 5.93e-3)
TYPE_I_C = np.array([0.05, 0.3, 0.6, 0.9, 1.2, 4 / 3])


def _ratio_branch(w, s_x: float, s_y: float, rho: float, mu_y: float = 1.0):
    """g_+(w) [1]: density of X/Y over Y > 0 for mu_x = 0 (the closed form above)."""
    w = np.asarray(w, dtype=float)
    s = math.sqrt(1 - rho * rho)
    a = np.sqrt(w * w / s_x**2 - 2 * rho * w / (s_x * s_y) + 1 / s_y**2)
    b = -rho * mu_y * w / (s_x * s_y) + mu_y / s_y**2
    c = mu_y**2 / s_y**2
    d = np.exp((b * b - c * a * a) / (2 * s * s * a * a))
    return (b * d * special.ndtr(b / (s * a)) / (math.sqrt(2 * math.pi) * s_x * s_y * a**3)
            + s * math.exp(-c / (2 * s * s)) / (2 * math.pi * s_x * s_y * a * a))


def _ratio_parameters(s_c2: float, s_cr: float, s_r2: float, lam: float):
    """(s_x, s_y, rho) of X = C_G, Y = 1 - lambda zeta_G."""
    s_x, s_y = math.sqrt(s_c2), abs(lam) * math.sqrt(s_r2)
    return s_x, s_y, -lam * s_cr / (s_x * s_y)


def _log_map_density(c, s_c2, s_cr, s_r2, lam):
    """g(C_l) [1] for the logarithmic map, from Hinkley's closed form."""
    return _ratio_branch(c, *_ratio_parameters(s_c2, s_cr, s_r2, lam))


@pytest.mark.parametrize("lam", [3.0, -2.0])
@pytest.mark.parametrize("epoch", [PEAK_EPOCH, FAR_EPOCH])
def test_closed_form_is_the_density_of_the_positive_branch(epoch, lam):
    # The reference itself: it integrates to P(Y > 0) = Phi(1/(|lambda| sigma_r)) (exact),
    # adaptive quadrature at epsrel 1e-12 -> asserted 1e-10; and it is the defining
    # integral int_0^inf y p(c y, y) dy (quad, epsrel 1e-12 -> asserted 1e-10).
    s_x, s_y, rho = _ratio_parameters(*epoch, lam)
    total = integrate.quad(lambda w: float(_ratio_branch(w, s_x, s_y, rho)), -np.inf,
                           np.inf, epsabs=0, epsrel=1e-12, limit=500)[0]
    assert total == pytest.approx(special.ndtr(1 / s_y), rel=1e-10)
    norm = 1 / (2 * math.pi * s_x * s_y * math.sqrt(1 - rho * rho))

    def joint_on_ray(y, w):
        x = w * y
        q = ((x / s_x)**2 - 2 * rho * x * (y - 1) / (s_x * s_y) + ((y - 1) / s_y)**2)
        return y * norm * math.exp(-0.5 * q / (1 - rho * rho))

    for w in (0.3, 1.2):
        ref = integrate.quad(joint_on_ray, 0, np.inf, args=(w,), epsabs=0, epsrel=1e-12,
                             limit=500)[0]
        assert float(_ratio_branch(w, s_x, s_y, rho)) == pytest.approx(ref, rel=1e-10)


@pytest.mark.parametrize("lam", [3.0, -2.0])
@pytest.mark.parametrize("epoch", [PEAK_EPOCH, FAR_EPOCH])
def test_tool_density_matches_hinkley(epoch, lam):
    # scan.observables.pbh.ng_density derives its own closed form (an erfc in
    # u = 1 - lambda zeta_G), used by the stacked and the per-spectrum paths alike.  Two
    # closed forms, so agreement to rounding: their exponents reach |ln g| ~ 1e2 and
    # Hinkley's d(w) subtracts terms of that size (~1e2 x 1e-16 x the cancellation);
    # measured <= 2e-13 here, asserted 1e-10.  Into the Cauchy tail too (C_l = 10, 100:
    # outside type I, but the same formula).
    zmap = zeta_map_of("logarithmic", log_lambda=lam)
    c = np.concatenate([TYPE_I_C, [10.0, 100.0]])
    ref = _log_map_density(c, *epoch, lam)
    np.testing.assert_allclose(np.exp(ln_density(c, *epoch, zmap)), ref, rtol=1e-10)
    np.testing.assert_allclose(compaction_density(c, *epoch, zmap), ref, rtol=1e-10)


def test_the_density_has_a_cauchy_tail():
    # Biagetti et al. 2021 (abstract): Cauchy at large values.  From the closed form,
    # w^2 g_+(w) -> L = [-rho s_x / s_y^2 e^{-1/(2 s_y^2)} Phi(-rho/(s_y s)) / sqrt(2 pi)
    #                    + s s_x e^{-1/(2 s^2 s_y^2)} / (2 pi s_y)],  s = sqrt(1 - rho^2),
    # with corrections O(1/w) (our expansion; the tool's density follows the closed form
    # to C_l = 100, test above).
    s_x, s_y, rho = _ratio_parameters(*PEAK_EPOCH, 3.0)
    s = math.sqrt(1 - rho * rho)
    amp = (-rho * s_x / s_y**2 * math.exp(-0.5 / s_y**2) * special.ndtr(-rho / (s_y * s))
           / math.sqrt(2 * math.pi) + s * s_x * math.exp(-0.5 / (s * s_y)**2)
           / (2 * math.pi * s_y))
    excess = [w * w * float(_ratio_branch(w, s_x, s_y, rho)) / amp - 1
              for w in (1e2, 1e3, 1e4)]
    # measured 3.3e-2, 3.3e-3, 3.3e-4: -> 0 like 1/w; the ratio of the first two is 10.1,
    # the O(1/w^2) term moving it by ~1 % (asserted 5 %)
    assert 0 < excess[2] < excess[1] < excess[0] < 0.05
    assert excess[0] / excess[1] == pytest.approx(10, rel=0.05)


def _closed_form_total(plan, P, lam: float) -> float:
    """f_PBH total [1] from Hinkley's density: sum over the plan's formation epochs
    (trapezoid in ln M_H, the entropy-conservation coefficient) of
    beta = int_{C_l,th}^{4/3} K (C - C_th)^gamma_c g(C_l) dC_l by adaptive quadrature.

    C - C_th = (C_l - C_l,th)(1 - (3/8)(C_l + C_l,th)), so the endpoint singularity
    (C_l - C_l,th)^gamma_c is quad's algebraic weight and the rest is smooth."""
    conv = plan.base.conventions
    s_c2, _ = plan.base.sigma2(P)
    s_cr, s_r2 = plan.v_cr @ P, plan.v_r @ P
    ln_m = np.log(plan.base.M_H)
    weight = np.zeros_like(ln_m)
    weight[:-1] += 0.5 * np.abs(np.diff(ln_m))
    weight[1:] += 0.5 * np.abs(np.diff(ln_m))
    coef = abundance_coefficient(plan.base.M_H, None, conv.omega_dm_h2)
    y_th = compaction_linear_threshold(conv.threshold)
    total = 0.0
    for h in range(s_c2.size):
        def integrand(y, h=h):
            return (conv.K * (1 - 0.375 * (y + y_th))**conv.gamma_c
                    * float(_log_map_density(y, s_c2[h], s_cr[h], s_r2[h], lam)))
        beta = integrate.quad(integrand, y_th, 4 / 3, weight="alg", wvar=(conv.gamma_c, 0),
                              epsabs=0, epsrel=1e-12, limit=200)[0]
        total += weight[h] * coef[h] * beta
    return total


@pytest.mark.parametrize("window, threshold, amplitude, lam", [
    ("top-hat", 0.55, 0.0005, 3.0), ("top-hat", 0.55, 0.002, 3.0),
    ("top-hat", 0.55, 0.003, 3.0), ("gaussian", 0.5, 0.025, 3.0),
    ("top-hat", 0.55, 0.003, -2.0)])
def test_abundance_matches_the_closed_form(window, threshold, amplitude, lam):
    # Ultra-slow roll ending abruptly: lambda = 3 (f_NL = 5/2; Namjoo, Firouzjahi & Sasaki
    # 2013, arXiv:1210.3692); lambda = -2 (f_NL = -5/3) for the other sign; log-normal
    # peak of width 0.5.  Reference: the closed-form density integrated by adaptive
    # quadrature per epoch (_closed_form_total), the same epochs and abundance
    # coefficients as the tool.  What remains is the tool's y = C_l rule (48 points in
    # z = ((C_l - C_l,th)/span)^gamma_c, abundance.beta_rule, then 4 x 16 points on the
    # tail), written for Gaussian tails and here integrating a Cauchy-like one: its
    # difference from the adaptive reference was 3.3e-7, 3.8e-8, 1.9e-8, 1.2e-9 and
    # 1.0e-7 for these cases (measured with the former 48-point Gauss-Legendre rule in z),
    # asserted 1e-6.  The amplitude 5e-4 puts the edge
    # 1/lambda at 14.9 sigma_r or more at every epoch, beyond the +-12 sigma_r of the
    # per-spectrum quadrature the closed form replaced (which returned 2.5e-43 here, 1/250
    # of the closed form's 6.1e-41).
    conv = PBHConventions(window=window, threshold=threshold)
    plan = plan_nongaussian(plan_pbh(K, M, conv, n_formation=64), 64)
    P = _lognormal(amplitude, 0.5)
    ours = plan.evaluate(P, zeta_map_of("logarithmic", log_lambda=lam)).f_pbh_total
    assert ours > 1e-60                       # far above underflow: not a vacuous match
    assert ours == pytest.approx(_closed_form_total(plan, P, lam), rel=1e-6)


@pytest.mark.parametrize("amplitude", [0.002, 0.003])
def test_usr_abundance_is_orders_of_magnitude_above_the_gaussian(amplitude):
    # Biagetti et al. 2021 (arXiv:2105.07810, abstract): the USR abundance "may be larger
    # than the Gaussian one by several orders of magnitude".  Top-hat window, C_th = 0.55,
    # lambda = 3: f_PBH = 9.7e-5 and 1.0 against 1.4e-91 and 2.4e-59 with Gaussian zeta
    # for the same spectra (measured); asserted: more than 3 orders of magnitude.
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_nongaussian(plan_pbh(K, M, conv, n_formation=64), 64)
    P = _lognormal(amplitude, 0.5)
    usr = plan.evaluate(P, zeta_map_of("logarithmic", log_lambda=3.0)).f_pbh_total
    assert usr > 1e3 * plan.base.evaluate(P).f_pbh_total
