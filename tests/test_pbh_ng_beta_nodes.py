"""The y = C_l rule of the stacked non-Gaussian beta (scan/observables/pbh/ng_beta_nodes.py)
against scipy's adaptive quadrature.

Reference: scipy.integrate.quad (QUADPACK, Piessens et al. 1983) on the same dyadic panels
towards y_th, QAWS (the algebraic weight (y - y_th)^gamma_c) on the innermost, epsrel
1e-13 each.  Tolerance 5e-12 (common practice): quad's 1e-13 on each of the ~22 panels
(2.2e-12 if every one erred the same way) plus the rounding of exp() of arguments up to
760 (760 eps = 1.7e-13) in either sum; the rule's own error is below it (module doc:
1.7e-12 measured, the reference included).  The former rule (14 geometric panels, graded
inner panel) was up to 1e-9 off at C_th = 0.55 and 1.4e-8 at 0.2.
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy import integrate

from scan.observables.pbh import PBHConventions
from scan.observables.pbh.ng_beta_nodes import (
    GENTLE_TIERS,
    GENTLE_TOL,
    MIXED_RATIO,
    beta_nodes,
    edge_panels,
    gentle_rule,
    gentle_test,
)
from scan.observables.pbh.ng_pairs import GentleRule, pair_betas
from scan.observables.pbh.ng_stack import _gentle, _to_unit, barycentric_matrix, lobatto
from scan.observables.pbh.thresholds import C_L_MAX, compaction_linear

K, GAMMA = 3.3, 0.36
RTOL = 5e-12


def _quad_beta(y_th: float, gamma: float, g) -> float:
    """int_{y_th}^{4/3} K (C - C_th)^gamma g(y) dy by quad on dyadic panels."""
    def smooth(y):
        return K * max(1 - 0.375 * (y + y_th), 0.0)**gamma * g(y)

    span = C_L_MAX - y_th
    edges = [y_th] + [y_th + span * 2.0**-k for k in range(21, -1, -1)]
    total = integrate.quad(smooth, edges[0], edges[1], weight="alg", wvar=(gamma, 0),
                           epsabs=0, epsrel=1e-13, limit=200)[0]
    for a, b in itertools.pairwise(edges[1:]):
        total += integrate.quad(lambda y: smooth(y) * (y - y_th)**gamma, a, b, epsabs=0,
                                epsrel=1e-13, limit=200)[0]
    return total


@pytest.mark.parametrize("threshold", [0.2, 0.55, 0.66])
def test_gaussian_densities_against_quad(threshold):
    """e^{-(y^2 - y_th^2) / 2 sigma^2} for nu_th = y_th / sigma from 2 to 37 (37: the
    factor e^{-nu^2/2} is still a normal double)."""
    y_th = float(compaction_linear(threshold))
    y, w = beta_nodes(y_th, GAMMA, K)
    for nu in (2.0, 5.0, 10.0, 23.0, 37.0):
        s2 = (y_th / nu)**2

        def g(x, s2=s2):
            return np.exp(-0.5 * (x * x - y_th * y_th) / s2)

        assert g(y) @ w == pytest.approx(_quad_beta(y_th, GAMMA, g), rel=RTOL)


@pytest.mark.parametrize("scale", [1e-3, 1e-2, 0.1, 1.0])
def test_exponential_fall_offs_against_quad(scale):
    """e^{-(y - y_th)/l}, l = scale L (L = 4/3 - y_th), at C_th = 0.66 (the shortest
    interval: the fewest panels, 1e-3 L is 1/6 of the steepest Gaussian-shaped edge the
    layout is made for)."""
    y_th = float(compaction_linear(0.66))
    length = scale * (C_L_MAX - y_th)
    y, w = beta_nodes(y_th, GAMMA, K)

    def g(x):
        return np.exp(-(x - y_th) / length)

    assert g(y) @ w == pytest.approx(_quad_beta(y_th, GAMMA, g), rel=RTOL)


def test_other_epochs_exponent_against_quad():
    """An epoch's gamma_c = 0.28 (the smallest QCD-era one) on the nodes of 0.36, with the
    panels for per-epoch exponents (scan/observables/pbh/ng_stack.py:plan_stacked)."""
    y_th = float(compaction_linear(0.55))
    y, w = beta_nodes(y_th, 0.28, K, GAMMA, edge_panels(y_th, MIXED_RATIO))
    for nu in (2.0, 10.0, 37.0):
        s2 = (y_th / nu)**2

        def g(x, s2=s2):
            return np.exp(-0.5 * (x * x - y_th * y_th) / s2)

        assert g(y) @ w == pytest.approx(_quad_beta(y_th, 0.28, g), rel=RTOL)


@pytest.mark.parametrize("threshold", [0.2, 0.55, 0.66])
def test_gentle_rule_against_quad(threshold):
    """The gentle rule (24-point Gauss-Jacobi on the whole interval) on densities it is
    meant for: flat, e^{-(y - y_th)/l} for l = L/4 and L, a wide Gaussian (nu_th = 2)."""
    y_th = float(compaction_linear(threshold))
    y, w = gentle_rule(y_th, GAMMA, K)
    span = C_L_MAX - y_th
    for g in (lambda x: np.ones_like(x), lambda x: np.exp(-(x - y_th) / span),
              lambda x: np.exp(-4 * (x - y_th) / span),
              lambda x: np.exp(-0.5 * (x * x - y_th * y_th) / (y_th / 2)**2)):
        assert g(y) @ w == pytest.approx(_quad_beta(y_th, GAMMA, g), rel=RTOL)


@pytest.mark.parametrize("n", GENTLE_TIERS)
def test_gentle_test_bounds_the_error(n):
    """Where the a-priori test passes (ng_beta_nodes.gentle_test, our derivation from
    Trefethen's bounds), the n-point gentle rule (each of the stacked path's tiers) is
    within GENTLE_TOL of the tanh-sinh rule (_tanh_sinh below: 241 nodes, no
    Gauss-Jacobi weights, whose scipy values scatter by ~1e-13 on edge-concentrated
    integrands), plus rounding and the reference's own error: the n + 241 positive terms,
    exp() of arguments below 40 (40 eps) and step 0.05 against 0.1 within 1.1e-14,
    3e-14 in all (as test_gentle_tiers_with_per_epoch_exponents).  ln g: 9-node
    interpolants with Chebyshev coefficients a_k = s z_k / k^2, z_k standard normal, s
    from 0.01 to 30 (400 draws); the test must pass for some and fail for others (e.g. a
    steep e^{-y/l}), and no pair it admits has a node range above the largest budget
    (pair_betas' pre-filter)."""
    y_th = float(compaction_linear(0.55))
    x = lobatto(9)
    y, w = gentle_rule(y_th, GAMMA, K, n)
    y_ref, w_ref = _tanh_sinh(y_th, GAMMA)
    coefficients, ellipse, budget = gentle_test(x, GAMMA, n)
    rule = GentleRule((barycentric_matrix(x, _to_unit(y, y_th)),), (w,), coefficients,
                      ellipse, budget[None, :])
    ref = barycentric_matrix(x, _to_unit(y_ref, y_th))
    rng = np.random.default_rng(11)
    k = np.arange(9)
    coef = rng.standard_normal((400, 9)) * np.geomspace(0.01, 30, 400)[:, None] \
        / np.maximum(k, 1)**2
    lng = np.polynomial.chebyshev.chebval(x, coef.T)          # (400, 9) at the nodes
    ok = rule.tiers(lng) == 0
    assert 0 < ok.sum() < ok.size
    span = lng.max(axis=1) - lng.min(axis=1)      # pair_betas' pre-filter: implied by the
    assert np.all(span[ok] <= budget.max())       # test (GentleRule.tiers)
    got = np.exp(lng[ok] @ rule.matrices[0].T) @ w
    want = np.exp(lng[ok] @ ref.T) @ w_ref
    assert np.all(np.abs(got / want - 1) <= GENTLE_TOL + 3e-14)
    steep = -(x + 1) * 20.0                                   # e^{-(y - y_th)/(L/40)}
    assert rule.tiers(steep[None, :])[0] == -1


def test_gentle_tiers_take_the_fewest_nodes():
    """GentleRule.tiers picks, per pair, the first tier whose test passes: the budgets
    grow with the nodes ((2n - 1) ln rho), so a pair admitted by a tier is admitted by
    every larger one; checked against each tier alone on random interpolants whose
    Chebyshev coefficients fall as 6^-k (a_k = s z_k 6^-k, s from 0.1 to 100: smooth
    densities like those the stack meets, so every tier and "none" occur)."""
    y_th = float(compaction_linear(0.55))
    x = lobatto(9)
    tests = [gentle_test(x, GAMMA, n) for n in GENTLE_TIERS]
    budgets = np.array([b for _, _, b in tests])
    assert np.all(np.diff(budgets, axis=0) > 0)
    rules = [gentle_rule(y_th, GAMMA, K, n) for n in GENTLE_TIERS]
    matrices = tuple(barycentric_matrix(x, _to_unit(y, y_th)) for y, _ in rules)
    rule = GentleRule(matrices, tuple(w for _, w in rules), tests[0][0], tests[0][1],
                      budgets)
    rng = np.random.default_rng(12)
    coef = rng.standard_normal((400, 9)) * np.geomspace(0.1, 100, 400)[:, None] \
        / 6.0**np.arange(9)
    lng = np.polynomial.chebyshev.chebval(x, coef.T)
    tier = rule.tiers(lng)
    alone = np.array([np.any(np.abs(lng @ tests[0][0].T) @ tests[0][1].T <= b, axis=1)
                      for b in budgets])                      # (n_tiers, 400)
    first = np.where(alone.any(axis=0), np.argmax(alone, axis=0), -1)
    np.testing.assert_array_equal(tier, first)
    assert len(set(tier.tolist())) == len(GENTLE_TIERS) + 1     # every tier and "none"


#: Per-epoch exponents: gamma-of-w with gamma_c = 0.36 gives 0.2813 ... 0.35995 on the
#: benchmark's 128 epochs (scan/observables/pbh/qcd.py epoch_exponents, measured), so
#: the range's ends and three between; thresholds as harada-scaled gives for C_th = 0.55
#: there (0.522 ... 0.55, measured).
EPOCH_EXPONENTS = (0.2813, 0.30, 0.32, 0.34, 0.36)
EPOCH_THRESHOLDS = (0.522, 0.53, 0.55, 0.54, 0.525)


def _tanh_sinh(y_th: float, gamma: float, step: float = 0.05):
    """Nodes y and weights of int_{y_th}^{4/3} dy K (C - C_th)^gamma (.) by the tanh-sinh
    rule (Takahashi & Mori 1974, Publ. RIMS 9, 721), t in [-6, 6] with ``step``: e = y -
    y_th = L / (1 + e^{-pi sinh t}), exact near e = 0, so the algebraic edge costs no
    accuracy and no Gauss-Jacobi weights enter (scipy's roots_jacobi weights scatter by
    ~1e-13 for n = 32 ... 128 on integrands concentrated at the edge: measured against
    QAWS and this rule, which agree within 2e-14 there)."""
    t = np.arange(-6.0, 6.0 + step / 2, step)
    s = 0.5 * np.pi * np.sinh(t)
    span = C_L_MAX - y_th
    e = span / (1 + np.exp(-2 * s))
    w = span * 0.25 * np.pi * np.cosh(t) / np.cosh(s)**2 * step
    y = y_th + e
    return y, K * w * (e * (1 - 0.375 * (y + y_th)))**gamma


@pytest.mark.parametrize("tier", range(len(GENTLE_TIERS)))
def test_gentle_tiers_with_per_epoch_exponents(tier):
    """With per-epoch exponents (the QCD-era gamma-of-w) each epoch's gentle rule is
    Gauss-Jacobi of its own exponent (its own nodes: ng_stack._gentle) and the a-priori
    test takes the largest exponent (its bound F grows with it), so one budget serves
    all epochs: wherever the tier's test admits a pair, the tier's rule through
    pair_betas (the compiled per-epoch sums, ng_pairs.epoch_betas) is within GENTLE_TOL of
    the tanh-sinh rule (241 nodes; step 0.1 agrees within 1.1e-14 on these pairs) of
    the pair's epoch's exponent at its threshold, plus rounding: exp() of arguments
    below 23 (an admitted pair has sum_k |a_k| <= half the largest budget) and the sums
    of up to 24 + 241 positive terms, 3e-14 in all (common practice).  ln g: 500 draws
    as test_gentle_test_bounds_the_error's (a_k = s z_k / k^2, s from 0.01 to 30) and
    500 as in test_gentle_tiers_take_the_fewest_nodes (a_k = s z_k 6^-k, s from 0.1 to
    100: enough pass the 12-node test), a_0 = 0 (a constant factor of g: the relative
    error is the same but for rounding), over the 5 epochs.  The suggested alternative,
    the configured exponent's nodes with interpolatory weights for each epoch's, fails
    this (1e-11 .. 9e-11 measured): its error bound falls only as rho^{-(n-1)}."""
    conv = PBHConventions(threshold=0.55)
    assert conv.K == K
    x = lobatto(9)
    y_th = compaction_linear(np.array(EPOCH_THRESHOLDS))[:, None]
    rules = _gentle(x, y_th, conv, np.array(EPOCH_EXPONENTS))
    assert rules.matrices[tier].shape == (len(EPOCH_EXPONENTS), GENTLE_TIERS[tier], 9)
    rule = GentleRule((rules.matrices[tier],), (rules.weights[tier],), rules.coefficients,
                      rules.ellipse, rules.budgets[tier:tier + 1])
    rng = np.random.default_rng(13)
    k = np.arange(9)
    coef = np.vstack([np.geomspace(0.01, 30, 500)[:, None] / np.maximum(k, 1)**2,
                      np.geomspace(0.1, 100, 500)[:, None] / 6.0**k]) \
        * rng.standard_normal((1000, 9))
    coef[:, 0] = 0.0
    lng = np.polynomial.chebyshev.chebval(x, coef.T)
    h = rng.integers(len(EPOCH_EXPONENTS), size=lng.shape[0])
    ok = rule.tiers(lng) == 0
    assert 0 < ok.sum() < ok.size
    assert np.all(np.abs(lng[ok]).max(axis=1) <= 23.0)
    got = pair_betas(lng[ok], np.zeros((1, 9)), np.zeros((len(EPOCH_EXPONENTS), 1)), h[ok],
                     rule)
    want = np.empty(lng.shape[0])
    for e, (y, gamma) in enumerate(zip(y_th[:, 0], EPOCH_EXPONENTS)):
        y_ref, w_ref = _tanh_sinh(float(y), gamma)
        assert w_ref.sum() == pytest.approx(_quad_beta(float(y), gamma, lambda _: 1.0),
                                            rel=RTOL)           # the reference vs QAWS
        rows = h == e
        assert np.any(rows & ok)
        want[rows] = np.exp(lng[rows] @ barycentric_matrix(x, _to_unit(y_ref, y)).T) @ w_ref
    assert np.all(np.abs(got / want[ok] - 1) <= GENTLE_TOL + 3e-14)
