"""The tabulated density of the local map (scan/observables/pbh/ng_table.py).

The table replaces the adaptive Gauss-Hermite density of the stacked path for g_NL = 0
inside its domain.  References: the reduced-variable density is checked against the
code's exact density on physical variances (our reduction: C_l / sigma_c = x (1 + b z)),
and against scipy.integrate.quad (an independent adaptive quadrature, rtol 1e-12, via
tests/test_pbh_ng_stack.py's reference); the table against the exact density (32-point
rule, within 1.4e-7 of quad, tests/test_pbh_ng_stack.py) at random points of its domain.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from test_pbh_ng_stack import _quad_ln_density

from scan.observables.pbh import ng_table
from scan.observables.pbh.ng_density import _ln_local
from scan.observables.pbh.ng_table import (
    B_MAX,
    RHO_MAX,
    RHO_MIN,
    T_MAX,
    T_MIN,
    TABLE_ERROR,
    density_table,
    exact_ln_h,
    ln_density_tabulated,
    tabulated_ln_h,
)
from scan.observables.pbh.zeta_map import zeta_map_of


def _random_domain(n: int, seed: int, rho_lo: float = RHO_MIN, t_lo: float = T_MIN,
                   t_hi: float = T_MAX):
    """n random (t, b, rho) of the table's domain (log-uniform t)."""
    rng = np.random.default_rng(seed)
    return (np.exp(rng.uniform(math.log(t_lo), math.log(t_hi), n)),
            rng.uniform(-B_MAX, B_MAX, n), rng.uniform(rho_lo, RHO_MAX, n))


@pytest.mark.parametrize("f_nl", [1.0, -1.0, 4.0])
def test_reduced_variables_reproduce_the_density(f_nl):
    """ln g(c) with (sigma_c, sigma_cr, sigma_r) equals ln h(c / sigma_c; (6/5) f_NL
    sigma_r, rho) - ln sigma_c: the same Gauss-Hermite rule on a rescaled integrand, so
    equal to rounding (|d ln g| <= 1e-9 (|ln g| + 1), common practice: a few hundred
    operations, each rounded, on values up to 1e3)."""
    rng = np.random.default_rng(3)
    s_c, cor, s_r = rng.uniform(0.02, 0.09, 50), rng.uniform(0.3, 0.9, 50), \
        rng.uniform(0.01, 0.09, 50)
    c = rng.uniform(0.6, 4 / 3, 50)
    zmap = zeta_map_of("local", f_nl=f_nl)
    direct = _ln_local(c, s_c**2, cor * s_c * s_r, s_r**2, zmap, 32)
    reduced = exact_ln_h(c / s_c, 1.2 * f_nl * s_r, cor) - np.log(s_c)
    assert np.all(np.abs(reduced - direct) <= 1e-9 * (np.abs(direct) + 1))


def test_table_within_its_error_at_random_points():
    """|ln h(table) - ln h(exact)| <= TABLE_ERROR at 1500 random points of the domain,
    300 of them with rho in [0.85, 0.9] (the sharpest structure, near v = b t = -1/4) and
    300 each near the ends t = T_MIN and T_MAX; every point is computed by the table."""
    origin = density_table()[1]
    points = [_random_domain(600, 1), _random_domain(300, 2, rho_lo=0.85),
              _random_domain(300, 4, t_hi=2 * T_MIN), _random_domain(300, 5, t_lo=T_MAX / 2)]
    t, b, rho = (np.concatenate(v) for v in zip(*points))
    got = tabulated_ln_h(*ng_table.split_table(), origin, t, b, rho)
    assert not np.any(np.isnan(got))
    assert np.max(np.abs(got - exact_ln_h(t, b, rho))) <= TABLE_ERROR


def _ridges(t, b, rho):
    """The damped search's ridge z* from the conditional mean (an independent seed), its
    Laplace value, psi''(z*) and psi'''(z*) (central difference over 1e-4 widths)."""
    lap = ng_table._laplace_many(t, b, rho)
    w2 = 1 - rho**2
    d2 = np.array([ng_table._slopes(*a)[1] for a in zip(lap[:, 1], t, b, rho, w2)])
    h = 1e-4 / np.sqrt(-d2)
    d3 = np.array([(ng_table._slopes(z + e, *a)[1] - ng_table._slopes(z - e, *a)[1]) / (2 * e)
                   for z, e, *a in zip(lap[:, 1], h, t, b, rho, w2)])
    return lap[:, 1], lap[:, 0], d2, d3


def test_two_newton_steps_reach_the_damped_searchs_ridge():
    """The fast path (two full Newton steps from the tabulated ridge, ng_table._two_newton)
    against the damped search from the conditional mean, at the random points of the test
    above.  Bound (Newton's error from Taylor's remainder, e_{n+1} = f''(xi) / (2 f'(x_n))
    e_n^2 for f = psi', the textbook derivation; common practice): after a last step of
    delta <= 1e-4 Laplace widths each ridge is within K delta^2
    widths of the true one, K = |psi'''| / (2 |psi''|^(3/2)); ln h moves by K per width
    there (psi' = 0), so the two differ by <= 2 K 1e-8 widths in z* and 2 K^2 1e-8 in
    ln h, plus rounding: 64 eps (|ln h| + 1) (common practice: a few dozen rounded
    operations on terms up to |ln h|; measured 21 eps).  Measured K <= 0.11, |d ln h| <=
    7.9e-11 at |ln h| up to 1.5e5."""
    origin = density_table()[1]
    points = [_random_domain(600, 1), _random_domain(300, 2, rho_lo=0.85),
              _random_domain(300, 4, t_hi=2 * T_MIN), _random_domain(300, 5, t_lo=T_MAX / 2)]
    t, b, rho = (np.concatenate(v) for v in zip(*points))
    n = t.size
    g, z, ok = np.empty(n), np.empty(n), np.empty(n, dtype=bool)
    ng_table._lookup(*ng_table.split_table(), origin, np.arcsinh(b * t / ng_table.V0), rho,
                     np.log(t), g, z)
    z *= t
    ng_table._two_newton(z, t, b, rho, ok)
    ridge, laplace, d2, d3 = _ridges(t, b, rho)
    K = np.abs(d3) / (2 * np.abs(d2) ** 1.5)
    assert ok.mean() > 0.9           # the fast path is what is compared (measured: all)
    widths = np.abs(z - ridge) * np.sqrt(-d2)
    assert np.all(widths[ok] <= 2 * K[ok] * 1e-8 + 1e-12)
    ref = laplace + g / t**2
    got = tabulated_ln_h(*ng_table.split_table(), origin, t, b, rho)
    eps = np.finfo(float).eps
    assert np.all(np.abs(got - ref) <= 2 * K**2 * 1e-8 + 64 * eps * (np.abs(ref) + 1))


def test_two_newton_steps_refuse_a_far_seed():
    """A seed 1.5 Laplace widths off the ridge makes a first step longer than one width:
    the fast path flags every element (which then takes the damped search); from half a
    width the few elements it accepts are at the ridge to its stopping rule."""
    t, b, rho = _random_domain(400, 7)
    ridge, _, d2, d3 = _ridges(t, b, rho)
    K = np.abs(d3) / (2 * np.abs(d2) ** 1.5)
    for offset in (1.5, 0.5):
        z, ok = ridge + offset / np.sqrt(-d2), np.empty(t.size, dtype=bool)
        ng_table._two_newton(z, t, b, rho, ok)
        if offset > 1:
            assert not ok.any()
        assert np.all(np.abs(z - ridge)[ok] * np.sqrt(-d2[ok]) <= 2 * K[ok] * 1e-8 + 1e-12)


@pytest.mark.parametrize("f_nl", [1.0, -1.0])
def test_table_matches_quad(f_nl):
    """The stacked density (table) against scipy quad for the benchmark-like variances:
    within TABLE_ERROR plus the 32-point rule's own error (1e-6, test_pbh_ng_stack.py)."""
    zmap = zeta_map_of("local", f_nl=f_nl)
    for s_c, cor, s_r in [(0.07, 0.6, 0.09), (0.05, 0.45, 0.03), (0.08, 0.66, 0.05)]:
        c = np.array([0.78, 1.05, 1.33])
        got = ln_density_tabulated(c, np.array([s_c**2]), np.array([cor * s_c * s_r]),
                                   np.array([s_r**2]), zmap)[0]
        for j, cj in enumerate(c):
            assert abs(got[j] - _quad_ln_density(cj, s_c, cor, s_r, zmap)) \
                <= TABLE_ERROR + 1e-6


def test_outside_the_domain_takes_the_exact_path():
    """rho -> 1, t beyond T_MAX, |b| > B_MAX and rho < 0 are not tabulated: the values are
    the exact path's (GH-16, as the per-spectrum path), bit for bit."""
    zmap = zeta_map_of("local", f_nl=1.0)
    s_c = np.array([0.05, 0.0015, 0.05, 0.05])
    s_r = np.array([0.05, 0.05, 0.25, 0.05])
    cor = np.array([0.99, 0.5, 0.5, -0.1])
    var = (s_c**2, cor * s_c * s_r, s_r**2)
    c = np.array([0.8, 1.0, 1.3])
    got = ln_density_tabulated(c, *var, zmap)
    ref = _ln_local(np.broadcast_to(c, (4, 3)).ravel(), *(np.repeat(v, 3) for v in var),
                    zmap).reshape(4, 3)
    np.testing.assert_array_equal(got, ref)


def test_table_is_built_once():
    """One table per process (it holds no spectrum and no f_NL)."""
    assert ng_table.density_table() is ng_table.density_table()


def test_interpolation_error_estimate_from_the_table():
    """The a-priori error of the construction: cubic Lagrange interpolation on the
    central interval of 4 nodes errs by at most (9/16)/4! h^4 |G''''| = (3/128) h^4 |G''''|
    per axis (the remainder's node polynomial peaks at 9/16 h^4), with h^4 G'''' ~ the
    table's fourth differences; divided by t^2 it is <= TABLE_ERROR / 4 at every node of
    the domain (measured 3.7e-6; the random points of the test above found 8e-6 between
    nodes, where the fourth derivative exceeds the differences' average)."""
    table, origin = density_table()
    G = table[..., 0]
    est = sum(3 / 128 * np.abs(np.diff(G, n=4, axis=ax))[tuple(
        slice(None) if a == ax else slice(2, -2) for a in range(3))] for ax in range(3))
    axes = [origin[a] + h * np.arange(2, G.shape[a] - 2)
            for a, h in enumerate((ng_table.H_S, ng_table.H_RHO, ng_table.H_LNT))]
    s, rho, ln_t = np.meshgrid(*axes, indexing="ij")
    t = np.exp(ln_t)
    inside = (np.abs(ng_table.V0 * np.sinh(s) / t) <= B_MAX) & (rho >= RHO_MIN - 1e-9) \
        & (rho <= RHO_MAX + 1e-9) & (t >= T_MIN * (1 - 1e-9)) & (t <= T_MAX * (1 + 1e-9))
    assert np.max(est[inside] / t[inside] ** 2) <= TABLE_ERROR / 4
