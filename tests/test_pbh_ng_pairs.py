"""Per-pair sums of the stacked non-Gaussian path (scan/observables/pbh/ng_pairs.py).

References: the Lebesgue-constant bound on a polynomial interpolant (for weights B with
sum_j B_j = 1, sum_j B_j l_j >= min l - (sum_j |B_j| - 1)/2 (max l - min l): our one-line
derivation, checked here against the interpolant itself); Chebyshev-Lobatto nodes have a
Lebesgue constant of about (2/pi) ln n + 1 (Trefethen 2013, Approximation Theory and
Approximation Practice, ch. 15, from memory): 2.4 for n = 9.
"""
from __future__ import annotations

import numpy as np
import pytest

from scan.observables.pbh.ng_pairs import (
    LN_ZERO,
    exp_or_zero,
    group_max,
    mass_function,
    pair_betas,
    pair_ln_mass,
    row_extremes,
    weight_ranges,
)
from scan.observables.pbh.ng_stack import barycentric_matrix, beta_nodes, lobatto
from scan.observables.pbh.thresholds import C_L_MAX, compaction_linear


def _beta_layout(n_y: int = 9):
    """The benchmark's beta nodes (C_th = 0.55, gamma_c = 0.36, K = 3.3) and their
    barycentric matrix from n_y Chebyshev-Lobatto nodes of ln g."""
    y_th = float(compaction_linear(0.55))
    y, w = beta_nodes(y_th, 0.36, 3.3)
    return barycentric_matrix(lobatto(n_y), 2 * (y - y_th) / (C_L_MAX - y_th) - 1), w


def _random_ln_g(n: int, seed: int) -> np.ndarray:
    """ln g rows at the nodes: a tail falling from near 0 by up to 1500 across the
    interval (with the nodes' order), plus noise, some rows far below ``LN_ZERO``."""
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 1.0, 9)
    top = rng.uniform(-800.0, 0.0, (n, 1))
    fall = rng.uniform(0.0, 1500.0, (n, 1))
    return top - fall * x**rng.uniform(0.5, 2.0, (n, 1)) + rng.normal(0, 5.0, (n, 9))


def test_lebesgue_bound_holds_for_the_beta_nodes():
    """Every pair pair_betas takes without the clip has its interpolant >= LN_ZERO at all
    beta nodes, and the Lebesgue constant of the layout is the textbook one (about 2.4 for
    9 Chebyshev-Lobatto nodes, docstring; measured 2.27 on the beta nodes)."""
    B, _ = _beta_layout()
    lam = np.abs(B).sum(axis=1).max()
    assert 1.0 < lam <= 2.4
    lng = _random_ln_g(4000, 1)
    low, high = lng.min(axis=1), lng.max(axis=1)
    safe = low - 0.5 * (lam - 1) * (high - low) >= LN_ZERO
    assert 0.1 < safe.mean() < 0.9              # both groups are exercised
    assert np.all((lng[safe] @ B.T).min(axis=1) >= LN_ZERO)


@pytest.mark.parametrize("per_pair_weights, per_epoch_matrices",   # per epoch: QCD-era
                         [(False, False), (True, False), (True, True)])
def test_pair_betas_match_the_clipped_sum(per_pair_weights, per_epoch_matrices):
    """pair_betas against sum_b w_b exp_or_zero(ln g(y_b)) for all pairs: the plain
    exponentials differ by at most e^-700 sum_b w_b (module doc) plus rounding of the sums
    (1e-14 relative, common practice: 72 positive terms); NaN rows stay NaN.  ln g and
    the layout are rounded to multiples of 2^-10 and 2^-20, so that every ln g(y_b) is
    exact in binary64 (products of 42 bits, sums below 2^17 on the 2^-30 grid) whatever
    order the BLAS sums in: pair_betas multiplies reordered blocks of pairs, and with
    unrounded inputs their ln g(y_b) differ from one product over all pairs by up to
    4.5e-13 (measured; 1e-13 relative in exp, not a sum's rounding).  Per-epoch matrices
    (the gentle rules with per-epoch exponents, ng_pairs.epoch_betas): each epoch's
    layout on nodes moved by up to 0.02 in the unit variable."""
    B, w = _beta_layout()
    if per_epoch_matrices:
        y_th = float(compaction_linear(0.55))
        y, _ = beta_nodes(y_th, 0.36, 3.3)
        t = 2 * (y - y_th) / (C_L_MAX - y_th) - 1
        B = np.array([barycentric_matrix(lobatto(9), np.clip(t + 0.005 * e, -1, 1))
                      for e in range(5)])
    B = np.round(B * 2.0**20) / 2.0**20
    lng = np.round(_random_ln_g(700, 2) * 2.0**10) / 2.0**10
    lng[5] = np.nan
    rng = np.random.default_rng(3)
    h = rng.integers(0, 5, 700)
    weight = rng.uniform(0.5, 2.0, (5, w.size)) * w if per_pair_weights else w
    rows = weight[h] if per_pair_weights else np.broadcast_to(weight, (700, w.size))
    got = pair_betas(lng, B, weight, h)
    products = np.einsum("pj,pbj->pb", lng, B[h]) if per_epoch_matrices else lng @ B.T
    ref = np.einsum("pb,pb->p", exp_or_zero(products), rows)
    assert np.isnan(got[5]) and np.isnan(ref[5])
    ok = ~np.isnan(ref)
    slack = np.exp(LN_ZERO) * rows.sum(axis=1)
    assert np.all(np.abs(got - ref)[ok] <= slack[ok] + 1e-14 * ref[ok])


def test_mass_function_sums_equal_the_clipped_exponentials():
    """mass_function (ln g at each epoch's masses of non-zero weight only, packed; the
    floor, the vectorised exp and pair_scatter taking e^LN_ZERO off) equals exp_or_zero
    of the unfloored product at every mass (the same loop over all masses), times the
    weights and scattered in the same order: the same operations on the same values but
    for the exponential (within 1 ulp of numpy's, tests/test_pbh_vector_math.py), so equal
    to a few ulps (4 eps relative; common practice).  The weights are 0 outside a run of
    masses per epoch (critical collapse: M < 1.5 M_H), one epoch without any."""
    rng = np.random.default_rng(4)
    lng = _random_ln_g(300, 5)
    h, i = rng.integers(0, 6, 300), rng.integers(0, 4, 300)
    mass_matrix = rng.uniform(-0.3, 1.0, (6, 9, 12))
    mass_matrix /= mass_matrix.sum(axis=1, keepdims=True)      # rows sum to 1
    weight = rng.uniform(0.0, 1.0, (6, 12))
    for e, (a, b) in enumerate([(0, 12), (0, 5), (3, 9), (7, 12), (0, 0), (11, 12)]):
        weight[e, :a], weight[e, b:] = 0.0, 0.0
    lo, hi = weight_ranges(weight)
    assert lo.tolist() == [0, 0, 3, 7, 0, 11] and hi.tolist() == [12, 5, 9, 12, 0, 12]
    got = mass_function(lng, i, h, mass_matrix, weight, 4)
    every = np.arange(300) * 12
    plain = pair_ln_mass(lng, h, np.zeros(6, dtype=np.int64), every, 3600, mass_matrix,
                         -np.inf, np.inf).reshape(300, 12)
    ref = np.zeros((4, 12))
    np.add.at(ref, i, weight[h] * exp_or_zero(plain))
    np.testing.assert_allclose(got, ref, rtol=4 * np.finfo(float).eps, atol=0)


def test_row_extremes_equal_numpys_reductions():
    """row_extremes equals np.min / np.max along the rows, NaN rows included."""
    lng = _random_ln_g(50, 6)
    lng[3, 4] = lng[7, 0] = np.nan
    lng[9] = np.nan
    low, high = row_extremes(lng)
    np.testing.assert_array_equal(low, lng.min(axis=1))
    np.testing.assert_array_equal(high, lng.max(axis=1))


def test_group_max_equals_numpys_maximum_at():
    """group_max equals np.maximum.at into -inf with NaN taken as +inf; empty groups stay
    -inf."""
    rng = np.random.default_rng(5)
    values = rng.normal(size=500) * 100
    values[[3, 40]] = np.nan
    groups = rng.integers(0, 12, 500)
    groups[groups == 7] = 8                                   # group 7 empty
    want = np.full(12, -np.inf)
    np.maximum.at(want, groups, np.where(np.isnan(values), np.inf, values))
    np.testing.assert_array_equal(group_max(values, groups, 12), want)
