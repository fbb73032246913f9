"""The stacked non-Gaussian f_PBH (scan/observables/pbh/ng_stack.py, ng_density.py).

References: the joint (C_G, zeta_G) density of Ferrante, Franciolini, Iovino & Urbano 2023
(arXiv:2211.01728); the integral over zeta_G is checked against scipy.integrate.quad (an
independent adaptive quadrature, rtol 1e-12) and the stack against the per-spectrum
path (scan/observables/pbh/nongaussian.py, itself checked against quad in
tests/test_pbh_nongaussian.py).
"""
from __future__ import annotations

import itertools
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, special

from scan.observables.pbh import PBHConventions, plan_pbh
from scan.observables.pbh.ng_closed import half_moment_table, ln_half_moment_table
from scan.observables.pbh.ng_density import (
    BOUND_SPLIT,
    _ln_far_curve_bound,
    _ln_local,
    _series,
    ln_density,
    ln_density_bound,
    ln_density_pairs,
)
from scan.observables.pbh.ng_stack import (
    LN_NEGLIGIBLE,
    _live,
    plan_pbh_mapped,
    plan_stacked,
)
from scan.observables.pbh.nongaussian import plan_nongaussian
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of

sys.path.insert(0, str(Path(__file__).parent / "bench"))
from bench_pbh_nongaussian import spectra

#: (sigma_c, correlation, sigma_r): two epochs of the benchmark's spectra and a weakly
#: correlated one.
VARIANCES = [(0.07, 0.6, 0.09), (0.05, 0.2, 0.1), (0.1, 0.66, 0.1)]


def _quad_ln_density(c, s_c, cor, s_r, zmap):
    """ln g(c) by scipy quad on 1/400-wide panels of zeta_G in [-8, 8] (rtol 1e-12)."""
    s_c2, s_cr, s_r2 = s_c * s_c, cor * s_c * s_r, s_r * s_r
    a, t2 = s_cr / s_r2, s_c2 - s_cr * s_cr / s_r2
    lo, hi = zmap.domain()

    def ln_f(x):
        slope = float(zmap.slope(x))
        if not (lo < x < hi) or slope == 0 or not math.isfinite(slope):
            return -math.inf
        return -0.5 * x * x / s_r2 - 0.5 * (c / slope - a * x)**2 / t2 - math.log(abs(slope))

    grid = np.linspace(max(-8, lo), min(8, hi), 6401)
    shift = max(ln_f(x) for x in grid)
    total = sum(integrate.quad(lambda x: math.exp(ln_f(x) - shift), u, v, epsabs=0,
                               epsrel=1e-12, limit=200)[0]
                for u, v in zip(grid[:-1:16], grid[16::16]))
    return math.log(total) + shift - math.log(2 * math.pi * math.sqrt(s_r2 * t2))


@pytest.mark.parametrize("lam", [3.0, -2.0])
def test_logarithmic_closed_form_matches_quad(lam):
    """The closed form (erfc) equals the quadrature: |d ln g| <= 1e-8, i.e. quad's rtol
    1e-12 times the panels' count plus the closed form's rounding (exponents ~ 10-100)."""
    zmap = zeta_map_of("logarithmic", log_lambda=lam)
    for s_c, cor, s_r in VARIANCES:
        for c in (0.78, 1.05, 1.33):
            got = float(ln_density(c, s_c**2, cor * s_c * s_r, s_r**2, zmap))
            assert got == pytest.approx(_quad_ln_density(c, s_c, cor, s_r, zmap), abs=1e-8)


@pytest.mark.parametrize("lam", [3.0, -2.0, 0.5])
def test_compiled_logarithmic_form_matches_array_code(lam):
    """The compiled closed form per pair (ng_closed.log_map_density) is the array code's
    formula in another order (and the array code itself where mu < 0, which these
    random variances reach for every lambda): equal to a few rounding errors of the
    largest term, |d ln g| <= 16 eps (|ln g| + 10) (our bound, common practice: about
    a dozen operations of <= 1 ulp each)."""
    rng = np.random.default_rng(2)
    s_c, cor, s_r = rng.uniform(0.005, 0.4, 500), rng.uniform(-0.3, 0.95, 500), \
        rng.uniform(0.005, 0.5, 500)
    c = np.linspace(0.7756, 4 / 3, 9)
    zmap = zeta_map_of("logarithmic", log_lambda=lam)
    v = (s_c**2, cor * s_c * s_r, s_r**2)
    got = ln_density_pairs(c, *v, zmap, 0.9)
    ref = ln_density(c, *(x[:, None] for x in v), zmap, 0.9)
    assert np.all(np.isfinite(got))
    assert np.all(np.abs(got - ref) <= 16 * np.finfo(float).eps * (np.abs(ref) + 10))


def test_half_moment_table_matches_scipy_erfc():
    """ln H(x) = ln(e^{-x^2} + sqrt(pi) x erfc(-x)) on [0, 6) from the piecewise degree-9
    table against scipy's erfc at 20001 points.  Bound 1e-14: the interpolation error of
    an entire function at degree 9 on pieces of width 3/16 is far below rounding; ten
    Horner steps on values <= ln(12 sqrt(pi)) = 3.06 (ulp 4.4e-16) and the reference's
    own rounding give ~20 ulp (our bound; measured 3.6e-15)."""
    table = half_moment_table()
    x = np.linspace(0.0, 6.0, 20001)[:-1]
    ref = np.log(np.exp(-x * x) + math.sqrt(math.pi) * x * special.erfc(-x))
    got = np.array([ln_half_moment_table(v, table) for v in x])
    assert np.max(np.abs(got - ref)) <= 1e-14


def test_erfc_tail_series_matches_scipy():
    """1 - sqrt(pi) z erfcx(z) from its asymptotic series (used above z = 100) against
    scipy's erfcx at z = 30-100.  Bound: the series' first omitted term, 945/(32 z^10),
    over the value ~1/(2 z^2), i.e. 59/z^8, plus the direct difference's cancellation,
    2 z^2 eps (measured 9e-11 at z = 30, 2e-12 at z = 100)."""
    z = np.array([30.0, 50.0, 100.0])
    direct = 1 - math.sqrt(math.pi) * z * special.erfcx(z)
    bound = 60.0 / z**8 + 2 * z * z * np.finfo(float).eps      # 945/16 = 59.06, rounded up
    assert np.all(np.abs(_series(z) / direct - 1) <= bound)


@pytest.mark.parametrize("f_nl", [1.0, 5.0, -2.0])
def test_local_gauss_hermite_matches_quad(f_nl):
    """Adaptive Gauss-Hermite per branch (both branches of the quadratic map).  The
    16-point rule's error is estimated by doubling it: the estimate must bound the
    actual error (up to the 32-point rule's own, <= 1e-6 here; measured 1.4e-7) and the
    error stays below 5e-5 in ln g (measured 1.1e-5 over these and the benchmark's
    variances; a few times the doubling change, common practice)."""
    zmap = zeta_map_of("local", f_nl=f_nl)
    for s_c, cor, s_r in VARIANCES:
        for c in (0.78, 1.05, 1.33):
            args = [np.array([v]) for v in (c, s_c**2, cor * s_c * s_r, s_r**2)]
            exact = _quad_ln_density(c, s_c, cor, s_r, zmap)
            g16, g32 = _ln_local(*args, zmap, 16)[0], _ln_local(*args, zmap, 32)[0]
            assert abs(g32 - exact) <= 1e-6
            assert abs(g16 - exact) <= abs(g16 - g32) + 1e-6
            assert abs(g16 - exact) <= 5e-5


def _far_integrand_over(r, p, c, a, t2, s_r2, ln_scale):
    """The far branch's integrand in r = |zeta_G| (local map, F' = 1 + p zeta_G) divided by
    e^{ln_scale} (so that it does not underflow where the scale is a tight bound)."""
    zeta, v = -math.copysign(r, p), abs(p) * r - 1
    ln_f = (-0.5 * zeta**2 / s_r2 - 0.5 * (-c / v - a * zeta)**2 / t2 - math.log(v)
            - math.log(2 * math.pi * math.sqrt(s_r2 * t2)))
    return math.exp(ln_f - ln_scale)


@pytest.mark.parametrize("f_nl", [1.0, 5.0, -2.0])
def test_far_branch_bound_holds(f_nl):
    """The far branch's bound along the curve (our derivation, ng_density) is above the
    far branch's integral by scipy quad (rtol 1e-10, atol 1e-12 per panel against a ratio
    of 1) at every test point: the integral divided by the bound is <= 1 (a bound may be
    loose, never below; measured: the bound exceeds the 32-point rule's far branch by
    >= 7 in ln over the benchmark's elements at f_NL = 1, -1, 5, -2)."""
    p = 1.2 * f_nl
    edges = (1 + np.concatenate([[0], np.geomspace(1e-6, 1e3, 60)])) / abs(p)
    for s_c, cor, s_r in [*VARIANCES, (0.02, 0.5, 0.1), (0.01, 0.9, 0.3)]:
        for c in (0.78, 1.05, 1.33):
            s_c2, s_cr, s_r2 = s_c * s_c, cor * s_c * s_r, s_r * s_r
            a, t2 = s_cr / s_r2, s_c2 - s_cr * s_cr / s_r2
            bound = _ln_far_curve_bound(p, *(np.array([x]) for x in (a, t2, s_r2, c)))[0]
            args = (p, c, a, t2, s_r2, bound)
            ratio = sum(integrate.quad(_far_integrand_over, u, v, args=args, epsabs=1e-12,
                                       epsrel=1e-10, limit=200)[0]
                        for u, v in itertools.pairwise(edges))
            assert ratio <= 1.0


@pytest.fixture(scope="module")
def plans():
    """The benchmark's plan (top-hat, C_th = 0.55) and four of its 64 spectra."""
    k = np.geomspace(1e5, 1e8, 300)
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_pbh(k, np.geomspace(1e-2, 1e3, 32), conv, n_formation=128)
    ng = plan_nongaussian(plan, 128)
    return plan, ng, plan_stacked(ng), spectra(k)[::16]


def _close(got, ref, rtol):
    """f(M) within rtol where it is within 1e-30 of each spectrum's largest value (the
    rest is 30 orders of magnitude below any verdict, common practice), and totals."""
    big = ref.f_pbh >= 1e-30 * ref.f_pbh.max(axis=-1, keepdims=True)
    np.testing.assert_allclose(got.f_pbh[big], ref.f_pbh[big], rtol=rtol)
    np.testing.assert_allclose(got.f_pbh_total, ref.f_pbh_total, rtol=rtol)


def test_identity_map_reproduces_gaussian_stack(plans):
    """F(zeta_G) = zeta_G: ln g is a quadratic in C_l, interpolated exactly (issue 15
    acceptance: 1e-10 relative)."""
    plan, _, stacked, P = plans
    _close(stacked.evaluate(P, zeta_map_of("gaussian")), plan.evaluate(P), 1e-10)


@pytest.mark.parametrize("zmap, rtol", [
    (zeta_map_of("local", f_nl=1.0), 1e-4),  # GH-16 error in ln g <= 5e-5 (above)
    (zeta_map_of("local", f_nl=-1.0), 1e-4),  # the stack's table: <= 2e-5 (test_pbh_ng_table)
    (zeta_map_of("logarithmic", log_lambda=3.0), 2e-5),
])
def test_stack_matches_per_spectrum_path(plans, zmap, rtol):
    """Stacked vs per-spectrum on four benchmark spectra.  rtol: the larger of the two
    paths' quadrature errors and the interpolation error of ln g (bounded by doubling
    n_y, next test).  The logarithmic map's density is the same closed form on both paths
    (the per-spectrum quadrature it replaced was 1.4 % off at single mass points at the
    lambda zeta_G = 1 edge with sigma_r = 0.018), so only the interpolation differs."""
    _, ng, stacked, P = plans
    refs = [ng.evaluate(p, zmap) for p in P]
    ref_f = np.array([r.f_pbh for r in refs])
    ref_total = np.array([r.f_pbh_total for r in refs])
    got = stacked.evaluate(P, zmap)
    big = ref_f >= 1e-30 * ref_f.max(axis=-1, keepdims=True)
    np.testing.assert_allclose(got.f_pbh[big], ref_f[big], rtol=rtol)
    np.testing.assert_allclose(got.f_pbh_total, ref_total, rtol=rtol)


@pytest.mark.parametrize("zmap", [zeta_map_of("local", f_nl=1.0),
                                  zeta_map_of("logarithmic", log_lambda=3.0)])
def test_interpolation_converged_by_doubling(plans, zmap):
    """9 vs 17 Chebyshev-Lobatto nodes of ln g: the change bounds the interpolation error
    (geometric convergence for an analytic ln g); measured on the 64 benchmark spectra
    against 33 nodes: <= 1.1e-6 (local f_NL = -1), 7e-8 (logarithmic) per mass."""
    _, ng, stacked, P = plans
    _close(stacked.evaluate(P, zmap), plan_stacked(ng, 17).evaluate(P, zmap), 1e-5)


@pytest.mark.parametrize("zmap", [zeta_map_of("local", f_nl=1.0),
                                  zeta_map_of("logarithmic", log_lambda=3.0)])
def test_stack_without_live_pairs_gives_zero(plans, zmap):
    """Spectra that vanish everywhere have no live pair: f_PBH and the totals are 0
    (floats; no pair once made the totals integers and the NaN check fail)."""
    _, _, stacked, P = plans
    got = stacked.evaluate(np.zeros_like(P[:2]), zmap)
    assert got.f_pbh_total.dtype == float and np.all(got.f_pbh_total == 0)
    assert np.all(got.f_pbh == 0)


def test_non_finite_spectrum_gives_nan_not_zero(plans):
    """A NaN in one spectrum makes its f_PBH NaN (as the Gaussian path), the others are
    untouched."""
    _, _, stacked, P = plans
    bad = P.copy()
    bad[1, 150] = np.nan
    zmap = zeta_map_of("logarithmic", log_lambda=3.0)
    got, ref = stacked.evaluate(bad, zmap), stacked.evaluate(P, zmap)
    assert np.isnan(got.f_pbh_total[1]) and np.all(np.isnan(got.f_pbh[1]))
    keep = [0, 2, 3]
    np.testing.assert_array_equal(got.f_pbh_total[keep], ref.f_pbh_total[keep])


@pytest.mark.parametrize("f_nl", [1.0, -1.0, 5.0, -2.0])
def test_density_bound_is_above_the_density(plans, f_nl):
    """The local map's bound on ln g over c >= y_th (our derivation, ng_density) is above
    ln g at 33 points of [y_th, 4/3] for every live pair of the four spectra, up to
    ln g's own quadrature error (<= 5e-5, test_local_gauss_hermite_matches_quad; measured
    slack >= 2.7 with the per-pair split, 2.75 with e = 0.1)."""
    _, _, stacked, P = plans
    zmap = zeta_map_of("local", f_nl=f_nl)
    s_c2, s_cr, s_r2 = stacked._variances(P)
    i, h = np.nonzero(_live(stacked.y_nodes[0], s_c2, s_r2, zmap))
    var = (s_c2[i, h], s_cr[i, h], s_r2[i, h])
    c = np.linspace(stacked.y_nodes[0], 4 / 3, 33)
    ln_g = ln_density_pairs(c, *var, zmap)
    assert np.all(ln_density_bound(c[0], *var, zmap) >= ln_g.max(axis=1) - 5e-5)


@pytest.mark.parametrize("f_nl", [0.3, -1.0, 5.0, -10.0])
def test_density_bound_holds_for_random_variances(f_nl):
    """The same over 400 random (sigma_c, correlation, sigma_r) with sigma_c, sigma_r in
    [0.003, 0.5] and correlation in [-0.2, 0.99] (measured slack >= 0.36 with the
    per-pair split, 1.2 with e = 0.1)."""
    rng = np.random.default_rng(5)
    s_c, cor, s_r = 10 ** rng.uniform(-2.5, -0.3, 400), rng.uniform(-0.2, 0.99, 400), \
        10 ** rng.uniform(-2.5, -0.3, 400)
    var = (s_c**2, cor * s_c * s_r, s_r**2)
    c = np.linspace(0.7756, 4 / 3, 17)
    zmap = zeta_map_of("local", f_nl=f_nl)
    assert np.all(ln_density_bound(c[0], *var, zmap) >= ln_density_pairs(c, *var, zmap).max(1)
                  - 5e-5)


@pytest.mark.parametrize("f_nl", [1.0, -1.0, 5.0])
def test_best_split_bound_is_below_the_fixed_split(plans, f_nl):
    """The per-pair split e = 2/nu^2 of the local bound minimises -(1 - e) nu^2/2 - ln e
    (our derivation, ng_density.ln_density_bound), so it is never above the fixed split's
    bound, and on the four spectra's live pairs it is lower for most (nu^2 > 20)."""
    _, _, stacked, P = plans
    zmap = zeta_map_of("local", f_nl=f_nl)
    s_c2, s_cr, s_r2 = stacked._variances(P)
    i, h = np.nonzero(_live(stacked.y_nodes[0], s_c2, s_r2, zmap))
    var = (s_c2[i, h], s_cr[i, h], s_r2[i, h])
    best = ln_density_bound(stacked.y_nodes[0], *var, zmap)
    fixed = ln_density_bound(stacked.y_nodes[0], *var, zmap, split=BOUND_SPLIT)
    assert np.all(best <= fixed + 1e-9 * np.abs(fixed))
    assert np.mean(best < fixed - 1.0) > 0.5


@pytest.mark.parametrize("zmap", [zeta_map_of("local", f_nl=1.0),
                                  zeta_map_of("local", f_nl=-1.0),
                                  zeta_map_of("logarithmic", log_lambda=3.0),
                                  ZetaMap("logarithmic", log_lambda=0.6, slope_max=3.0)],
                         ids=["local+1", "local-1", "logarithmic", "capped"])
def test_left_out_pairs_move_f_by_less_than_their_bound(plans, zmap):
    """Leaving out the pairs below e^{-LN_NEGLIGIBLE} of their spectrum's largest f(M)
    (or total) changes f(M) by at most n_H e^{-LN_NEGLIGIBLE} max f(M) and the total by
    n_H e^{-LN_NEGLIGIBLE} total (the bound summed over the 128 epochs), against every
    pair evaluated."""
    plan, _, stacked, P = plans
    got = stacked.evaluate(P, zmap)
    s_c2, s_cr, s_r2 = stacked._variances(P)
    i, h = np.nonzero(_live(stacked.y_nodes[0], s_c2, s_r2, zmap))
    f_all, total_all = stacked._pairs(np.ones(i.size, dtype=bool), i, h,
                                      (s_c2[i, h], s_cr[i, h], s_r2[i, h]), zmap, len(P))
    slack = plan.M_H.size * math.exp(-LN_NEGLIGIBLE)
    assert np.all(np.abs(got.f_pbh - f_all) <= slack * f_all.max(axis=1, keepdims=True))
    assert np.all(np.abs(got.f_pbh_total - total_all) <= slack * total_all)


@pytest.mark.parametrize("f_nl", [-2.0, 2.5])
def test_wide_type_one_interval_gets_more_nodes(f_nl):
    """A low threshold (C_th = 0.18, Gaussian window: y_th = 0.19) widens [y_th, 4/3];
    the batch plan then takes 17 nodes of ln g (nodes_for), and the stack matches the
    per-spectrum path to the GH-16 bound of test_stack_matches_per_spectrum_path (rtol
    1e-4; measured <= 8.5e-6 with 17 nodes, 2.9e-2 with 9)."""
    k = np.geomspace(1e5, 1e8, 300)
    masses = np.geomspace(1e-2, 1e3, 32)
    conv = PBHConventions(window="gaussian", threshold=0.18)
    zmap = zeta_map_of("local", f_nl=f_nl)
    P = spectra(k)[:4]
    ng = plan_nongaussian(plan_pbh(k, masses, conv, n_formation=128), 128)
    stack = plan_pbh_mapped(k, masses, conv, zmap, n_formation=128)
    assert stack.stacked.y_nodes.shape[-1] == 17
    refs = [ng.evaluate(p, zmap) for p in P]
    ref_f = np.array([r.f_pbh for r in refs])
    got = stack.evaluate(P)
    big = ref_f >= 1e-30 * ref_f.max(axis=-1, keepdims=True)
    np.testing.assert_allclose(got.f_pbh[big], ref_f[big], rtol=1e-4)
    np.testing.assert_allclose(got.f_pbh_total, [r.f_pbh_total for r in refs], rtol=1e-4)


@pytest.mark.parametrize("f_nl, g_nl", [(0.0, 10.0), (1.0, -40.0), (2.5, 50.0)])
def test_stack_with_g_nl_matches_per_spectrum_path(plans, f_nl, g_nl):
    """Cubic local map (g_NL != 0): stacked vs per-spectrum.  Both take the adaptive
    Gauss-Hermite density (checked against quad in tests/test_pbh_ng_ridges.py; the
    per-spectrum composite rule it replaced missed ridges by ~550 in ln g here), so this
    checks the interpolation of ln g and the assembly; rtol 1e-4 as in
    test_stack_matches_per_spectrum_path."""
    _, ng, stacked, P = plans
    zmap = zeta_map_of("local", f_nl=f_nl, g_nl=g_nl)
    refs = [ng.evaluate(p, zmap) for p in P]
    ref_f = np.array([r.f_pbh for r in refs])
    got = stacked.evaluate(P, zmap)
    big = ref_f >= 1e-30 * ref_f.max(axis=-1, keepdims=True)
    np.testing.assert_allclose(got.f_pbh[big], ref_f[big], rtol=1e-4)
    np.testing.assert_allclose(got.f_pbh_total, [r.f_pbh_total for r in refs], rtol=1e-4)
