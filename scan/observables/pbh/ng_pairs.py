"""Per-pair sums of the stacked non-Gaussian path (:mod:`scan.observables.pbh.ng_stack`):
the mass function over the live (spectrum, epoch) pairs only (compiled), and beta.

The array form laid every pair's ln g out densely over (epochs x spectra), dead ones at
e^{-800}, and took the exponential of all n_H m n_M products (262k for the benchmark's
128 epochs, 64 spectra and 32 masses, of which the ~2.5k live pairs need 80k).  Here each
live pair's ln g at the masses y(M, M_H) is one n_y x n_M product (:func:`pair_ln_mass`),
the exponentials are taken in one vectorised pass
(:func:`~scan.observables.pbh.vector_math.exp_in_place`; numpy's exp when measured), and
:func:`pair_scatter` adds weight x g to each pair's spectrum: measured 0.68 ms against
1.17 ms for a single compiled loop with scalar exponentials and ~1.5 ms for the dense
form (f_NL = 1, 2473 pairs).  The clip at ``LN_ZERO`` is taken inside
:func:`pair_ln_mass` and the e^``LN_ZERO`` taken off inside :func:`pair_scatter` (the
values of :func:`exp_or_zero` without two passes over the array).

beta (:func:`pair_betas`): exp of ln g interpolated to the beta nodes, in blocks of
``BLOCK`` pairs; a pair whose interpolant provably stays above ``LN_ZERO`` skips the clip
(and the e^``LN_ZERO`` taken off): the interpolant is sum_j B_bj ln g_j with sum_j B_bj =
1, so it is >= min ln g - (Lambda - 1)/2 (max ln g - min ln g), Lambda = max_b sum_j
|B_bj| (the Lebesgue constant of the nodes on the beta nodes, 2.27 for 9
Chebyshev-Lobatto nodes; our bound).  Measured on the benchmark (tests/bench): all but 1
of 2464 pairs at f_NL = 1 and 95 % of 7144 with the logarithmic map skip it: beta 0.72 ->
0.67 ms (f_NL = 1) and 2.21 -> 1.94 ms (logarithmic), and the mass function with the
clip and the offset folded in 0.63 -> 0.55 ms and 1.45 -> 1.18 ms (measured side by side,
min of 30, machine loaded).  Pairs whose density is provably gentle take the fewest-node
rule of :class:`GentleRule` (12, 16 or 24 nodes) the a-priori test admits instead of the
80-node one (:func:`~scan.observables.pbh.ng_beta_nodes.gentle_test`); with per-epoch
exponents each epoch has its own nodes, and the products with the pairs' epochs'
matrices are one compiled loop (:func:`epoch_betas`).

Units: f(M) per ln M [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from scan.observables.pbh.ng_ridge import FASTMATH
from scan.observables.pbh.vector_math import X_MAX, exp_in_place

#: exp(x) is taken as exactly 0 below this: e^{-700} = 1e-304, and libm's exp (and
#: arithmetic on its subnormal results) leaves the fast path just below (measured: ~1 ns
#: per element at -700, 35-375 ns between -708 and -745, 19 ns at -800).
LN_ZERO: float = -700.0
_EXP_ZERO: float = math.exp(LN_ZERO)
#: Pairs per block of the beta integral (256 x 80 exponents: 160 kB, in L2 cache;
#: 128-2048 measured within noise of each other, unblocked ~20 % slower).
BLOCK: int = 256


def exp_or_zero(x: np.ndarray) -> np.ndarray:
    """exp(max(x, ``LN_ZERO``)) - e^``LN_ZERO`` [1] in place of ``x`` (a float array it
    owns): exactly 0 for x <= ``LN_ZERO``, within e^{-700} = 1e-304 of exp(x) above, never
    negative; NaN propagates.  Every exp stays on libm's fast path, and no masked pass."""
    np.maximum(x, LN_ZERO, out=x)
    np.exp(x, out=x)
    x -= _EXP_ZERO
    return x


@njit(cache=True, error_model="numpy")
def row_extremes(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(smallest, largest) element of each row of ``a`` (n, k), NaN propagating (a row
    with a NaN gives NaN for both), compiled: one pass over the rows (numpy's reduction
    along a short axis was measured ~6x slower, and column-wise minima over the strided
    columns 0.17 against 0.02 ms for 6.5k x 9)."""
    n, k = a.shape
    low, high = np.empty(n), np.empty(n)
    for p in range(n):
        lo = hi = a[p, 0]
        for j in range(1, k):
            v = a[p, j]
            nan = math.isnan(v)         # a NaN, once taken, stays (no comparison is true)
            if v < lo or nan:
                lo = v
            if v > hi or nan:
                hi = v
        low[p], high[p] = lo, hi
    return low, high


@njit(cache=True, error_model="numpy")
def group_max(values: np.ndarray, groups: np.ndarray, m: int) -> np.ndarray:
    """The largest of ``values`` [any unit] per group (``groups``, ints in [0, m)),
    shape (m,): -inf for a group without a value, +inf for one with a NaN (compiled:
    ``np.maximum.at`` was measured ~8x slower on 7.4k pairs)."""
    out = np.full(m, -np.inf)
    for p in range(values.size):
        v = values[p]
        if math.isnan(v):
            v = np.inf
        out[groups[p]] = max(out[groups[p]], v)
    return out


@dataclass(frozen=True)
class GentleRule:
    """The coarse beta rules for gentle pairs, fewest nodes first
    (:func:`~scan.observables.pbh.ng_beta_nodes.gentle_rule` with
    :data:`~scan.observables.pbh.ng_beta_nodes.GENTLE_TIERS` nodes): ``matrices[t]``
    (n_t, n_y), or (n_H, n_t, n_y) per epoch (per-epoch exponents: each epoch's own
    Gauss-Jacobi nodes), takes ln g at the nodes to rule t's nodes, ``weights[t]`` (n_t,)
    or (n_H, n_t) their weights; ``coefficients``, ``ellipse`` and ``budgets`` (n_tiers,
    n_rho) the a-priori test (:func:`~scan.observables.pbh.ng_beta_nodes.gentle_test`)."""

    matrices: tuple[np.ndarray, ...]
    weights: tuple[np.ndarray, ...]
    coefficients: np.ndarray
    ellipse: np.ndarray
    budgets: np.ndarray

    def tiers(self, lng: np.ndarray) -> np.ndarray:
        """The fewest-node rule (index into ``matrices``) that integrates each pair (rows
        of ``lng``, (n, n_y)) within its tolerance, -1 for none (and for NaN).  The
        test's spread is >= 2 sum_k |a_k| (every ellipse weight is >= 2), which is >= the
        range of ln g over the nodes (|p - a_0| <= sum_k |a_k| on [-1, 1]): a pair whose
        node range exceeds every budget fails every rule."""
        spread = np.abs(lng @ self.coefficients.T) @ self.ellipse.T       # (n, n_rho)
        return first_passing(spread, self.budgets)


@njit(cache=True, error_model="numpy")
def first_passing(spread: np.ndarray, budgets: np.ndarray) -> np.ndarray:
    """Per row of ``spread`` (n, n_rho) the first tier t with spread <= ``budgets``[t]
    (n_tiers, n_rho) for some rho, -1 for none (and NaN), compiled (numpy's comparisons
    tier by tier and column by column were 15 passes, ~50 us even for no rows)."""
    out = np.full(spread.shape[0], -1)
    for p in range(spread.shape[0]):
        for t in range(budgets.shape[0]):
            passed = False
            for r in range(budgets.shape[1]):
                if spread[p, r] <= budgets[t, r]:
                    passed = True
                    break
            if passed:
                out[p] = t
                break
    return out


def pair_betas(lng: np.ndarray, beta_matrix: np.ndarray, weight: np.ndarray,
               h: np.ndarray, gentle: GentleRule | None = None,
               extremes: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """beta [1] per pair: sum_b weight_b exp(ln g(y_b)) with ln g(y_b) = ``beta_matrix``
    (n_beta, n_y) @ ``lng`` (n_pairs, n_y); ``weight`` (n_beta,), or (n_H, n_beta) with
    the pairs' epochs ``h`` (a gentle rule's matrices may be per epoch too).  Pairs a
    ``gentle`` rule applies to take its fewest-node one instead (12 to 24 instead of 80
    nodes).  ``extremes``: :func:`row_extremes` of ``lng`` if known."""
    low, high = row_extremes(lng) if extremes is None else extremes
    tier = np.full(lng.shape[0], -1)
    if gentle is not None:          # a node range above every budget fails the test
        maybe = np.flatnonzero(high - low <= gentle.budgets.max())    # (GentleRule.tiers)
        tier[maybe] = gentle.tiers(lng[maybe])
    if not np.any(tier >= 0):
        return _rule_betas(lng, low, high, beta_matrix, weight, h)
    rules = [(beta_matrix, weight)] + list(zip(gentle.matrices, gentle.weights))
    beta = np.empty(lng.shape[0])
    for t, (matrix, w) in enumerate(rules, start=-1):
        rows = np.flatnonzero(tier == t)
        if rows.size:
            beta[rows] = _rule_betas(lng[rows], low[rows], high[rows], matrix, w, h[rows])
    return beta


def _rule_betas(lng, low, high, matrix, weight, h) -> np.ndarray:
    """beta [1] per pair of one rule (``matrix`` (n_b, n_y), or per epoch (n_H, n_b, n_y):
    :func:`epoch_betas`; ``weight`` as :func:`pair_betas`'s), gathered per block (256
    rows stay in cache).  Pairs whose interpolant is in [``LN_ZERO``, ``X_MAX``] by the
    Lebesgue bound (module doc) take plain exponentials
    (within e^{-700} sum_b weight_b of :func:`exp_or_zero`'s; the product's rounding,
    ~1e-13, stays far inside the range of
    :func:`~scan.observables.pbh.vector_math.exp_in_place`, [-708, 709]); the others (and
    NaN) the values of :func:`exp_or_zero` (above 709 those of 709): the first group,
    then the second, in blocks.  Exponentials by
    :func:`~scan.observables.pbh.vector_math.exp_in_place` (within 1 ulp of numpy's)."""
    overshoot = 0.5 * (np.abs(matrix).sum(axis=-1).max() - 1.0)     # every epoch's
    safe = (low - overshoot * (high - low) >= LN_ZERO) \
        & (high + overshoot * (high - low) <= X_MAX)
    if matrix.ndim == 3:
        return epoch_betas(lng, h, safe, matrix, np.ascontiguousarray(
            np.broadcast_to(weight, matrix.shape[:2])))
    n_safe = int(np.count_nonzero(safe))
    order = None if n_safe == safe.size else np.concatenate(
        (np.flatnonzero(safe), np.flatnonzero(~safe)))
    if order is not None:
        lng, h = lng[order], h[order]
    beta = np.empty(lng.shape[0])
    for first, last, clip in ((0, n_safe, False), (n_safe, lng.shape[0], True)):
        for start in range(first, last, BLOCK):
            rows = slice(start, min(start + BLOCK, last))
            block = lng[rows] @ matrix.T
            if clip:                        # exp_or_zero's values, vectorised exp
                np.clip(block, LN_ZERO, X_MAX, out=block)
                exp_in_place(block)
                block -= _EXP_ZERO
            else:
                exp_in_place(block)
            beta[rows] = np.einsum("pb,pb->p", block, weight[h[rows]]) \
                if weight.ndim == 2 else block @ weight
    if order is not None:
        beta[order] = beta.copy()
    return beta


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def epoch_betas(lng: np.ndarray, h: np.ndarray, safe: np.ndarray, matrix: np.ndarray,
                weight: np.ndarray) -> np.ndarray:
    """beta [1] per pair of a rule with per-epoch nodes: sum_b ``weight``[h_p, b]
    exp(ln g_pb), ln g_pb = ``matrix``[h_p] (n_H, n_b, n_y) @ ``lng``[p] (n_pairs, n_y),
    in one compiled pass without gathering the matrices; ln g_pb clipped to
    [``LN_ZERO``, ``X_MAX``] and e^``LN_ZERO`` taken off where ``safe``[p] is False
    (:func:`exp_or_zero`'s values; NaN stays), as :func:`_rule_betas` does."""
    n_b, n_y = matrix.shape[1], matrix.shape[2]
    values = np.empty((lng.shape[0], n_b))
    for p in range(lng.shape[0]):
        e = h[p]
        for b in range(n_b):
            s = 0.0
            for j in range(n_y):
                s += matrix[e, b, j] * lng[p, j]
            if not safe[p]:
                if s < LN_ZERO:
                    s = LN_ZERO
                elif s > X_MAX:
                    s = X_MAX
            values[p, b] = s
    exp_in_place(values)
    beta = np.empty(lng.shape[0])
    for p in range(lng.shape[0]):
        e = h[p]
        zero = 0.0 if safe[p] else _EXP_ZERO
        total = 0.0
        for b in range(n_b):
            total += weight[e, b] * (values[p, b] - zero)
        beta[p] = total
    return beta


def mass_function(lng: np.ndarray, i: np.ndarray, h: np.ndarray, mass_matrix: np.ndarray,
                  weight: np.ndarray, m: int) -> np.ndarray:
    """f(M) [1], shape (m, n_M): sum over the live pairs (spectra ``i``, epochs ``h``) of
    ``weight``[h](M) g(y(M, M_H)), ln g at the nodes ``lng`` (n_pairs, n_y) carried to the
    masses by ``mass_matrix`` (n_H, n_y, n_M); the exponentials as :func:`exp_or_zero`'s
    (by :func:`~scan.observables.pbh.vector_math.exp_in_place`, ln g capped at 709), the
    clip and the offset folded into the compiled loops.  Only the masses from each
    epoch's first to its last non-zero weight are computed (:func:`weight_ranges`; on the
    benchmark 49 % of the (epoch, mass) grid, M < 1.5 M_H for critical collapse), packed
    pair after pair in one flat array."""
    lo, hi = weight_ranges(weight)
    size = (hi - lo)[h]
    start = np.zeros(h.size, dtype=np.int64)
    np.cumsum(size[:-1], out=start[1:])
    total = int(start[-1] + size[-1]) if h.size else 0
    ln_f = pair_ln_mass(np.ascontiguousarray(lng), h, lo, start, total, mass_matrix,
                        LN_ZERO, X_MAX)
    return pair_scatter(exp_in_place(ln_f), i, h, lo, hi, start, weight, m, _EXP_ZERO)


def weight_ranges(weight: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(first, one past the last) index [1] of the non-zero ``weight`` (n_H, n_M) per
    epoch, (0, 0) for an epoch without one; int64 arrays of shape (n_H,)."""
    nonzero = weight != 0
    any_ = nonzero.any(axis=1)
    lo = np.where(any_, np.argmax(nonzero, axis=1), 0).astype(np.int64)
    hi = np.where(any_, weight.shape[1] - np.argmax(nonzero[:, ::-1], axis=1), 0)
    return lo, hi.astype(np.int64)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def pair_ln_mass(lng, h, lo, start, total, mass_matrix, floor, ceiling):
    """ln g [1] at the masses, flat (``total``,): pair p's masses lo[h_p] ... at
    ``start``[p] on, one per mass up to the next pair's start; at least ``floor`` and at
    most ``ceiling`` (NaN stays): ``lng`` (n_pairs, n_y) at the nodes times the pair's
    epoch (``h``) slice of ``mass_matrix`` (n_H, n_y, n_M)."""
    n_y, n_m = lng.shape[1], mass_matrix.shape[2]
    out = np.empty(total)
    row = np.empty(n_m)             # every mass: a fixed-length loop the compiler vectorises
    for p in range(lng.shape[0]):
        e, s, a = h[p], start[p], lo[h[p]]
        n = (start[p + 1] if p + 1 < lng.shape[0] else total) - s
        row[:] = 0.0
        for j in range(n_y):
            v = lng[p, j]
            for k in range(n_m):
                row[k] += v * mass_matrix[e, j, k]
        for k in range(n):
            v = max(row[a + k], floor)
            out[s + k] = ceiling if v > ceiling else v  # noqa: FURB136 -- NaN stays NaN
    return out


@njit(cache=True, error_model="numpy")
def pair_scatter(g, i, h, lo, hi, start, weight, m, zero):
    """f(M) [1], shape (m, n_M): sum over the pairs p of weight[h_p] (g - ``zero``) into
    row i_p, g flat as :func:`pair_ln_mass` lays it out (masses lo[h_p] to hi[h_p])."""
    out = np.zeros((m, weight.shape[1]))
    for p in range(h.size):
        e, s, a = h[p], start[p], lo[h[p]]
        for k in range(hi[e] - a):
            out[i[p], a + k] += weight[e, a + k] * (g[s + k] - zero)
    return out
