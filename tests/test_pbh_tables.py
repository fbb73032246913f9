"""Fast paths of the batched f_PBH evaluation against the direct computations they replace.

* :mod:`scan.observables.pbh.tables`: the mass-weighted beta from a table in nu_th against the
  48-node quadrature :func:`scan.observables.pbh.abundance.beta_weighted` (and the same quadrature in
  extended precision);
* :mod:`scan.observables.pbh.kernel`: the mass function and ``half_exp`` against the density of
  :func:`scan.observables.pbh.abundance.density` on :func:`scan.observables.pbh.abundance.critical_kernel`, and
  against numpy's exp;
* a plan with tables against one without (``plan_pbh(..., tabulate=False)``).

The physics of the direct paths is tested in tests/test_pbh.py against
shared/physics/observables.md sect. 5-6 (Carr et al. 2010, arXiv:0912.5297; Young, Musco
& Byrnes 2019, arXiv:1904.00984); here the check is that the fast paths compute the same
numbers.

Tolerances (common practice, from IEEE 754 binary64 rounding): beta carries the factor
exp(-nu_th^2/2) with nu_th^2/2 up to 760, so a relative rounding eps = 1.1e-16 of the
exponent's inputs becomes ~760 eps ~ 1e-13 in beta for either path; measured against the
quadrature in 80-bit extended precision the direct path is off by up to 5e-13 and the
table by up to 1.4e-13 (C_th from 0.1 to 0.66).  RTOL = 2e-12 bounds their difference
with margin and is 1e9 times below the |Delta ln f| ~ 1e-3 a sampler needs
(observables.md sect. 6: d ln f / d ln A ~ 30).  Values below 1e-290 (ATOL) are formed
from subnormal numbers (normal doubles end at 2.2e-308; the direct path multiplies
factors that underflow) and lose digits; such abundances are physically zero.
"""
import dataclasses
import math

import numpy as np
import pytest
from scipy import integrate

from scan.observables import cosmo
from scan.observables.pbh import PBHConventions, beta_weighted, plan_pbh
from scan.observables.pbh.abundance import _BETA_W, _BETA_Z, _relation, critical_kernel, density
from scan.observables.pbh.kernel import half_exp, mass_function
from scan.observables.pbh.tables import TOLERANCE, V_RANGE, beta_table, beta_tabulated

RTOL, ATOL = 2e-12, 1e-290
#: nu_th^2/2 < 760 is the live range (plan._live_epochs); beyond it beta is exactly 0.
V_LIVE = math.sqrt(2 * 760.0)
CASES = [("compaction", t) for t in (0.1, 0.3, 0.4, 0.5, 0.6, 0.66)] + \
    [("press-schechter", t) for t in (0.3, 0.45, 0.6)] + [("peaks", t) for t in (0.45, 0.6)]


def _pairs(conv: PBHConventions, n: int = 4000, seed: int = 0):
    """sigma^2 with nu_th log-uniform in [0.5, sqrt(1520)] (below the table too) and
    <k^2> R^2 in [0.5, 5]."""
    rng = np.random.default_rng(seed)
    y_th, _ = _relation(conv)
    v = np.exp(rng.uniform(math.log(0.5), math.log(V_LIVE), n))
    return (y_th / v)**2, rng.uniform(0.5, 5.0, n), v


def _beta_extended(s2: np.ndarray, kR2: np.ndarray, conv: PBHConventions) -> np.ndarray:
    """The quadrature of beta_weighted in numpy's extended precision (long double)."""
    L = np.longdouble
    y_th, y_max = (L(v) for v in _relation(conv))
    gam = L(conv.gamma_c)
    sig = np.sqrt(s2.astype(L))[:, None]
    span = np.minimum(y_max - y_th, 14 * sig)
    a = _BETA_Z.astype(L)**(1 / gam)
    y = y_th + span * a
    dy = span * a / (_BETA_Z.astype(L) * gam)
    excess = (y - y_th) * (1 - L(0.375) * (y + y_th)) if conv.criterion == "compaction" \
        else y - y_th
    nu = y / sig
    if conv.criterion == "peaks":
        p = (kR2.astype(L)[:, None] / 3)**L(1.5) * (nu**3 - 3 * nu) * np.exp(-nu * nu / 2) \
            / (3 * L(math.pi) * sig)
    else:
        p = L(conv.ps_factor) * np.exp(-nu * nu / 2) / (np.sqrt(2 * L(math.pi)) * sig)
    return (L(conv.K) * excess**gam * p * dy) @ _BETA_W.astype(L)


@pytest.mark.parametrize("criterion, threshold", CASES)
@pytest.mark.parametrize("gamma_c", [0.36, 0.3558])
def test_table_equals_direct_quadrature(criterion, threshold, gamma_c):
    conv = PBHConventions(criterion=criterion, threshold=threshold, gamma_c=gamma_c)
    table = beta_table(conv)
    branches = [b for b in (table.scaled, table.fixed) if b is not None]
    assert branches and all(b.error <= TOLERANCE for b in branches)
    s2, k2, v = _pairs(conv)
    fast, direct = beta_tabulated(table, s2, k2), beta_weighted(s2, k2, conv)
    np.testing.assert_allclose(fast, direct, rtol=RTOL, atol=ATOL)
    # the check covered what it claims: normal values over the live range, down to ~1e-290
    normal = direct > ATOL
    assert v[normal].max() > 36 and direct[normal].min() < 1e-280
    below = v < V_RANGE[0]          # not tabulated: the direct path (on fewer pairs, so
    np.testing.assert_allclose(fast[below], direct[below], rtol=1e-15)  # BLAS rounding)


@pytest.mark.parametrize("criterion, threshold", [("compaction", 0.66), ("compaction", 0.5),
                                                  ("press-schechter", 0.45), ("peaks", 0.45)])
def test_table_against_extended_precision(criterion, threshold):
    # the table reproduces the quadrature (not only the double-precision code) to rounding
    if np.finfo(np.longdouble).eps >= np.finfo(float).eps:
        pytest.skip("no extended precision on this platform")
    conv = PBHConventions(criterion=criterion, threshold=threshold)
    s2, k2, v = _pairs(conv, 2000, seed=1)
    inside = v >= V_RANGE[0]
    ref = _beta_extended(s2[inside], k2[inside], conv)
    fast = beta_tabulated(beta_table(conv), s2[inside], k2[inside])
    normal = ref > ATOL
    err = np.abs(fast[normal] / ref[normal] - 1).astype(float)
    assert err.max() < 5e-13


@pytest.mark.parametrize("criterion", ["press-schechter", "peaks"])
def test_linear_table_serves_any_threshold(criterion):
    # linear criteria: ln S does not depend on delta_c, one table gives every row's beta
    table = beta_table(PBHConventions(criterion=criterion, threshold=0.5))
    rng = np.random.default_rng(4)
    delta_c = rng.uniform(0.3, 0.7, 300)
    v = np.exp(rng.uniform(math.log(0.8), math.log(V_LIVE), 300))
    s2, k2 = (delta_c / v)**2, rng.uniform(0.5, 5.0, 300)
    fast = beta_tabulated(table, s2, k2, delta_c)
    direct = np.array([beta_weighted(s, k, PBHConventions(criterion=criterion,
                                                          threshold=d))[0]
                       for s, k, d in zip(s2, k2, delta_c)])
    np.testing.assert_allclose(fast, direct, rtol=RTOL, atol=ATOL)
    compaction = beta_table(PBHConventions())
    with pytest.raises(ValueError, match="linear"):
        beta_tabulated(compaction, s2, k2, delta_c)


@pytest.mark.filterwarnings("ignore:invalid value:RuntimeWarning")  # the direct path's
def test_non_finite_inputs_take_the_direct_path():
    conv = PBHConventions(criterion="peaks", threshold=0.45)
    s2 = np.array([np.nan, 1e-3, np.inf, 1e-3])
    k2 = np.array([1.0, np.nan, 1.0, np.inf])
    fast = beta_tabulated(beta_table(conv), s2, k2)
    np.testing.assert_array_equal(fast, beta_weighted(s2, k2, conv))


def test_half_exp():
    # exp(2x) to <= 2 ulp on libm's fast path; exactly 0 where exp(2x) underflows to 0
    x = np.concatenate([np.linspace(-380.0, 0.0, 100001), [-np.inf, np.nan, -1e300]])
    ref = np.exp(2 * x)
    out = half_exp(x)
    normal, tiny = ref > 1e-307, ref <= 1e-307
    # each exp within 1 ulp (glibc and numpy's SIMD exp; common practice, from memory):
    # exp(x)² is within 2·1 + 0.5 ulp, the reference within 1, so 3.5 ulp of 2^-52 apart
    # (5e-16 was 2.25 ulp, and this machine's exp already reaches 2: 4.44e-16)
    np.testing.assert_allclose(out[normal], ref[normal], rtol=3.5 * 2.0**-52, atol=0)
    assert np.all(np.abs(out[tiny] - ref[tiny]) <= 1e-307)
    assert np.all(out[x <= -373.0] == 0) and np.all(ref[x <= -373.0] == 0)
    assert np.isnan(out[-2]) and out[-3] == 0 and out[-1] == 0
    where = np.arange(x.size) % 2 == 0
    masked = half_exp(x, where)
    assert np.all(masked[~where] == 0)
    np.testing.assert_array_equal(masked[where], out[where])


def _reference_mass_function(plan, s2, k2, live):
    """The mass function as the plan computed it before (abundance.density on the
    critical_kernel grid), row by row."""
    conv = plan.conventions
    y, weight, _ = critical_kernel(plan.M, plan.M_H, conv)
    f = np.zeros((s2.shape[0], plan.M.size))
    for i in range(s2.shape[0]):
        h = np.flatnonzero(live[i])
        p = density(y.T[h], s2[i, h][:, None], k2[i, h][:, None], conv)
        f[i] = np.sum(weight.T[h] * p * (plan._wln * plan._coef)[h][:, None], axis=0)
    return f


@pytest.mark.parametrize("criterion, threshold", [("compaction", 0.5),
                                                  ("press-schechter", 0.45),
                                                  ("peaks", 0.45)])
def test_mass_function_equals_density_on_the_kernel(criterion, threshold):
    conv = PBHConventions(criterion=criterion, threshold=threshold)
    k = np.geomspace(1e9, 1e15, 300)
    M = np.geomspace(float(cosmo.horizon_mass_msun(k[-1])) * 1e-3,
                     float(cosmo.horizon_mass_msun(k[0])), 32)
    plan = plan_pbh(k, M, conv)
    rng = np.random.default_rng(5)
    y_th, _ = _relation(conv)
    s2 = (y_th / rng.uniform(3.0, 39.0, (6, plan.M_H.size)))**2
    k2 = rng.uniform(0.5, 5.0, s2.shape)
    live = rng.uniform(size=s2.shape) < 0.3
    live[2] = False                                        # a row without live epochs
    i, h = np.nonzero(live)
    fast = mass_function(plan._kernel, s2, k2, i, h, conv)
    ref = _reference_mass_function(plan, s2, k2, live)
    assert np.any(ref > 1e-10) and np.any(ref == 0)
    np.testing.assert_allclose(fast, ref, rtol=RTOL, atol=ATOL)


@pytest.mark.parametrize("criterion, threshold", [("compaction", 0.5),
                                                  ("press-schechter", 0.45),
                                                  ("peaks", 0.45)])
def test_tabulated_plan_equals_direct_plan(criterion, threshold):
    # whole plans: f(M) and totals with the beta table and without; totals from ~1e-200
    # to ~1 (log-normal peaks) and a row without power
    k = np.geomspace(1e9, 1e15, 300)
    M = np.geomspace(float(cosmo.horizon_mass_msun(k[-1])) * 1e-3,
                     float(cosmo.horizon_mass_msun(k[0])), 32)
    conv = PBHConventions(criterion=criterion, threshold=threshold)
    fast, slow = plan_pbh(k, M, conv), plan_pbh(k, M, conv, tabulate=False)
    assert fast._beta_table is not None and slow._beta_table is None
    y_th, _ = _relation(conv)
    amps = np.array([0.0, 4e-3, 6e-3, 1e-2, 2e-2, 4e-2, 8e-2]) * (y_th / 0.45)**2
    widths = np.array([0.3, 0.3, 0.2, 0.5, 0.3, 1.0, 0.1])
    P = amps[:, None] * np.exp(-np.log(k / 1e12)**2 / (2 * widths[:, None]**2))
    a, b = fast.evaluate(P), slow.evaluate(P)
    assert b.f_pbh_total[0] == 0 and b.f_pbh_total.max() > 1e-3
    assert 0 < b.f_pbh_total[1:].min() < 1e-100
    np.testing.assert_allclose(a.f_pbh_total, b.f_pbh_total, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(a.f_pbh, b.f_pbh, rtol=RTOL, atol=ATOL)
    np.testing.assert_array_equal(a.sigma2, b.sigma2)
    one = fast.evaluate(P[3])
    assert one.f_pbh_total == pytest.approx(a.f_pbh_total[3], rel=1e-12)


def test_sigma2_skips_empty_columns_only():
    # columns where every spectrum vanishes are skipped: the same sigma^2 as the full
    # matrix product, to BLAS rounding (1e-14 relative, common practice)
    k = np.geomspace(1e9, 1e15, 300)
    conv = PBHConventions(criterion="peaks", threshold=0.45)
    plan = plan_pbh(k, [1e-10, 1.0], conv)
    P = np.zeros((3, k.size))
    P[0, 40:90], P[1, 60:200], P[2, 250:] = 1e-2, 3e-2, 2e-2
    s0, kR2 = plan.sigma2(P)
    full = P @ plan._v0.T
    np.testing.assert_allclose(s0, full, rtol=1e-14, atol=0)
    with np.errstate(invalid="ignore"):
        ref = (P @ plan._v1.T) / full
    np.testing.assert_allclose(kR2[full > 0], ref[full > 0], rtol=1e-13, atol=0)
    zero = plan.sigma2(np.zeros(k.size))
    assert np.all(zero[0] == 0) and zero[0].shape == (plan.M_H.size,)
    nan = plan.sigma2(np.where(np.arange(k.size) == 5, np.nan, 0.0))[0]
    assert np.all(np.isnan(nan))


def test_threshold_plan_uses_the_table_for_linear_criteria():
    # per-row delta_c through the (threshold-free) table equals plan_pbh at that delta_c
    from scan.observables.pbh import plan_pbh_thresholds

    k = np.geomspace(1e9, 1e15, 300)
    M = np.geomspace(float(cosmo.horizon_mass_msun(k[-1])) * 1e-3,
                     float(cosmo.horizon_mass_msun(k[0])), 16)
    conv = PBHConventions(criterion="press-schechter", threshold=0.5)
    P = np.array([a * np.exp(-np.log(k / 1e12)**2 / (2 * 0.4**2)) for a in (1e-2, 2e-2)])
    t = np.array([0.42, 0.58])
    res = plan_pbh_thresholds(k, M, conv, (0.41, 0.6)).evaluate(P, t)
    for row, tj, tot in zip(P, t, res.f_pbh_total):
        ref = plan_pbh(k, M, dataclasses.replace(conv, threshold=tj),
                       tabulate=False).evaluate(row)
        assert tot == pytest.approx(ref.f_pbh_total, rel=RTOL)


@pytest.mark.parametrize("threshold", [0.1, 0.2, 0.55, 0.66])
@pytest.mark.parametrize("gamma_c", [0.36, 0.28])
def test_direct_quadrature_error_against_qaws(threshold, gamma_c):
    """The rule of :func:`beta_weighted` (:func:`beta_rule`: 48 points in z = ((y -
    y_th)/span)^gamma_c) against scipy's QAWS (QUADPACK's algebraic-weight rule, Piessens
    et al. 1983, weight (y - y_th)^gamma_c, epsrel 1e-13), e^{-nu_th^2/2} scaled out, over
    nu_th up to 37 (e^{-nu^2/2} = 1e-297 is still normal) and gamma_c from the default 0.36 down to 0.28 (the
    smallest QCD-era exponent, scan/observables/pbh/qcd.py).  Bound 3e-12: the rule's own
    error (measured against a 20 x 200-point composite rule, beta_rule: <= 2.3e-12 for
    gamma_c 0.27 ... 0.36) plus QAWS's epsrel 1e-13 plus the rounding of either value,
    ~760 eps = 1.7e-13 each (the factor e^{-nu^2/2} with nu^2/2 up to 760, module doc).
    The former rule, 48-point Gauss-Legendre in z, failed it by two orders (4e-10 high
    at nu_th = 37: the integrand is not analytic at z = 0 and steep, see beta_rule); the
    identity check of issue 15
    (tests/test_pbh_ng_stack.py) compares the non-Gaussian stack with this rule."""
    conv = PBHConventions(window="top-hat", threshold=threshold, gamma_c=gamma_c)
    y_th, y_max = _relation(conv)
    for nu in (2.0, 10.0, 23.0, 30.0, 37.0):
        s = y_th / nu

        def scaled(y, s=s):
            if y <= y_th:                     # QUADPACK may sample the end point
                return 0.0
            return conv.K * (1 - 0.375 * (y + y_th))**gamma_c \
                * math.exp(-0.5 * (y - y_th) * (y + y_th) / (s * s))

        ref = integrate.quad(scaled, y_th, y_max, weight="alg", wvar=(gamma_c, 0),
                             epsabs=0, epsrel=1e-13, limit=200)[0]
        ref *= conv.ps_factor / (math.sqrt(2 * math.pi) * s) * math.exp(-0.5 * nu * nu)
        assert abs(beta_weighted(s * s, 1.0, conv)[0] / ref - 1) <= 3e-12
