"""The y = C_l rule of the stacked non-Gaussian beta (:mod:`scan.observables.pbh.ng_stack`).

beta = int_{y_th}^{4/3} dy K (C - C_th)^gamma_c g(y), with C - C_th = e (1 - (3/8)(e +
2 y_th)), e = y - y_th, for a density g known only through its interpolant (one set of
nodes for every pair).  The rule: geometric panels [L 2^{-k-1}, L 2^{-k}] in e (L = 4/3
- y_th, k < m), 8-point Gauss-Legendre each, and on the innermost [0, h], h = L 2^{-m},
``EDGE_NODES``-point Gauss-Jacobi with the weight e^gamma_c (Golub & Welsch 1969; scipy's
roots_jacobi), which takes the edge's algebraic factor exactly.

The panels resolve a fall-off e^{-e/l} of g on any scale l from L down to h; the edge
panel takes l >= h / ``EDGE_RATIO`` (16 Gauss-Jacobi nodes integrate x^gamma e^{-r x} on
[0, 1] within 3e-15 of the whole integral at r = 16, 2e-11 at r = 32, measured against
the incomplete gamma function).  A Gaussian-shaped density falls on l = sigma^2 / y_th at
y_th, and l >= y_th / (2 ``LN_STEEPEST``) wherever the stack keeps it: :func:`edge_panels`
picks the fewest panels with h <= 16 l there (m = 8 for C_th = 0.55: 80 nodes; the
former rule, 14 panels and an 8-point inner panel graded as z^{1/gamma_c}, 120).

Measured against scipy quad (QAWS on the edge panel, epsrel 1e-13): Gaussian densities
at C_th = 0.2, 0.4, 0.55, 0.66 and nu_th = 2 ... 37 within 1.7e-12 (the former rule up to
1e-9 at C_th = 0.55 and 1.4e-8 at 0.2), e^{-e/l} for l = 1e-3 L ... L within 1.2e-11;
on the benchmark's pairs (tests/bench/bench_pbh_nongaussian.py; identity, local f_NL =
+-1, logarithmic and capped maps) every beta is within 1.3e-12 (capped: 5.5e-12) of a
22-panel, 12-point, 24-point-edge rule -- the rounding of exp(ln g) with |ln g| up to
~700 -- where the former rule was up to 1.3e-10 off.  Per-epoch exponents (the QCD-era
convention) keep the configured exponent's nodes with interpolatory weights for each
epoch's (:func:`edge_rule`) and one more panel (``MIXED_RATIO``).

A gentle density needs none of that: :func:`gentle_rule` is n-point Gauss-Jacobi on the
whole interval, taken per pair where :func:`gentle_test` proves it within ``GENTLE_TOL``
from the interpolant's Chebyshev coefficients (on the benchmark 78 % of the logarithmic
map's pairs, 1 % of the capped map's after pruning; measured within 7.7e-14 of an 80-point
Gauss-Jacobi reference, where the full rule is within 1.0e-12 of it).  The stacked path
offers ``GENTLE_TIERS`` = 12, 16 and 24 nodes, each pair the fewest its test admits (the
logarithmic map's 5830 gentle pairs on the benchmark: 4128, 1158 and 544, its beta nodes
190.6k -> 131.8k; totals within 1.6e-15 of the 24-node rule's).  Per-epoch exponents
(the QCD-era ``gamma-of-w``) take each epoch's own Gauss-Jacobi nodes (so per-epoch
interpolation matrices) and the test of the largest exponent, whose bound is the
largest (F grows with gamma_c), so one budget serves every epoch: on the benchmark with
both QCD-era conventions the logarithmic map's pairs go 3907, 1301 and 602 to the tiers
and 680 of 6490 to the 88-node rule (before: all 6490), the tiers' betas within 5.1e-14
of a tanh-sinh reference (the 88-node rule's within 9.4e-13).  The configured
exponent's nodes with interpolatory weights for each epoch's (as the edge panel's) would
keep one matrix, but that rule is exact only to degree n - 1, so its bound falls as
rho^{-(n-1)}, not rho^{-(2n-1)}: with that budget (its weights are positive, sum |w| =
W) 3907 pairs pass at 24 nodes and none at 12 or 16, and under the Gauss budget it errs
up to 9e-11 (tests/test_pbh_ng_beta_nodes.py).

Units: every quantity [1].
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from scan.observables.pbh.thresholds import C_L_MAX

#: The steepest edge laid out for: a Gaussian-shaped density e^{-y^2 / 2 sigma^2} with
#: y_th^2 / 2 sigma^2 = ``LN_STEEPEST`` (twice the Gaussian's live range, 760,
#: plan._live_epochs; the logarithmic map's live bound, ng_stack._live) falls on the
#: scale l = sigma^2 / y_th = y_th / (2 ``LN_STEEPEST``) at y_th.
LN_STEEPEST: float = 1500.0
#: Gauss-Jacobi nodes of the edge panel.
EDGE_NODES: int = 16
#: Largest h / l the edge panel is laid out for (h its width, l the fall-off scale).
EDGE_RATIO: float = 16.0
#: The same with per-epoch exponents, whose edge weights are interpolatory
#: (:func:`edge_rule`; x^0.28 e^{-r x} on the nodes of 0.36: 1.6e-15 at r = 4, 1.2e-12
#: at 8, 8e-9 at 16 of the whole integral, measured against the incomplete gamma function).
MIXED_RATIO: float = 8.0
_PANEL_Z, _PANEL_W = np.polynomial.legendre.leggauss(8)
_PANEL_Z, _PANEL_W = 0.5 * (_PANEL_Z + 1), 0.5 * _PANEL_W


def edge_panels(y_th, ratio: float = EDGE_RATIO) -> int:
    """Geometric panels m [1] for thresholds ``y_th`` [1] (the smallest counts): the
    fewest with L 2^{-m} <= ``ratio`` y_th / (2 ``LN_STEEPEST``)."""
    y = float(np.min(y_th))
    scale = ratio * y / (2 * LN_STEEPEST)
    return max(1, math.ceil(math.log2((C_L_MAX - y) / scale)))


def edge_rule(node_exponent: float, weight_exponent: float) -> tuple[np.ndarray, np.ndarray]:
    """``EDGE_NODES`` nodes x and weights [1] of int_0^1 x^``weight_exponent`` f(x) dx on
    the Gauss-Jacobi nodes of ``node_exponent``: Gauss-Jacobi itself where the two agree,
    else the interpolatory weights on those nodes (exact for f of degree < ``EDGE_NODES``;
    moments from Gauss-Jacobi of ``weight_exponent``, exact for them)."""
    x, w = special.roots_jacobi(EDGE_NODES, 0.0, node_exponent)
    x, w = 0.5 * (x + 1), 0.5 ** (1 + node_exponent) * w
    if weight_exponent == node_exponent:
        return x, w
    xm, wm = special.roots_jacobi(EDGE_NODES, 0.0, weight_exponent)
    moments = np.polynomial.legendre.legvander(xm, EDGE_NODES - 1).T @ wm \
        * 0.5 ** (1 + weight_exponent)
    vander = np.polynomial.legendre.legvander(2 * x - 1, EDGE_NODES - 1)
    return x, np.linalg.solve(vander.T, moments)


def beta_nodes(y_th: float, gamma_c: float, K: float, edge_exponent: float | None = None,
               panels: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Nodes y [1] and weights K (C - C_th)^gamma_c dy [1] of the beta integral above
    ``y_th``.

    ``edge_exponent``: the Gauss-Jacobi weight's exponent (default ``gamma_c``: exact for
    the edge; another epoch's gamma_c leaves e^{gamma_c - edge_exponent} to the rule).
    ``panels``: geometric panels (default :func:`edge_panels` of ``y_th``).
    """
    alpha = gamma_c if edge_exponent is None else edge_exponent
    m = edge_panels(y_th) if panels is None else panels
    span = C_L_MAX - y_th
    lo = span * 2.0 ** -np.arange(1, m + 1)                 # panel k: [lo_k, 2 lo_k]
    e_panels = (lo[:, None] * (1 + _PANEL_Z)).ravel()
    w_panels = (lo[:, None] * _PANEL_W).ravel()
    x, w = edge_rule(alpha, gamma_c)
    h = span * 2.0 ** -m
    e_edge = h * x
    w_edge = h ** (1 + gamma_c) * w / e_edge**gamma_c     # dy weight of int e^gamma_c (.)
    e = np.concatenate([e_panels, e_edge])
    excess = e * np.clip(1 - 0.375 * (e + 2 * y_th), 0.0, None)
    return y_th + e, K * excess**gamma_c * np.concatenate([w_panels, w_edge])


#: Gauss-Jacobi nodes of the gentle rule (:func:`gentle_rule`) on the whole interval.
GENTLE_NODES: int = 24
#: The gentle rules the stacked path offers, fewest nodes first (each pair takes the first
#: its a-priori test admits).
GENTLE_TIERS: tuple[int, ...] = (12, 16, GENTLE_NODES)
#: Bernstein-ellipse parameters tried for a pair's a-priori error bound
#: (:func:`gentle_test`; all inside rho + 1/rho < 6, where (C - C_th)/e vanishes).
GENTLE_RHOS: tuple[float, ...] = (1.5, 2.0, 3.0, 4.0, 5.0)
#: Relative error of a pair's beta the gentle rule may make (by the bound): below the
#: full rule's measured 1.7e-12.
GENTLE_TOL: float = 1e-13


def gentle_rule(y_th: float, gamma_c: float, K: float,
                n: int = GENTLE_NODES) -> tuple[np.ndarray, np.ndarray]:
    """Nodes y [1] and weights [1] of beta = int_{y_th}^{4/3} dy K (C - C_th)^gamma_c g(y)
    for a gentle g: ``n``-point Gauss-Jacobi on the whole interval with the weight
    e^gamma_c, e = y - y_th (the rest, ((C - C_th)/e)^gamma_c g, left to the rule)."""
    x, w = special.roots_jacobi(n, 0.0, gamma_c)          # weight (1 + x)^gamma_c
    half = 0.5 * (C_L_MAX - y_th)
    e = half * (x + 1)
    return y_th + e, K * half ** (1 + gamma_c) * w * (1 - 0.375 * (e + 2 * y_th))**gamma_c


def gentle_test(x: np.ndarray, gamma_c: float, n: int = GENTLE_NODES
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(coefficients (n_y - 1, n_y), ellipse weights (n_rho, n_y - 1), budgets (n_rho,))
    [1] of the a-priori test of :func:`gentle_rule` for ln g interpolated at the nodes
    ``x`` in [-1, 1] (our derivation from the standard bounds below).

    With p = ln g = sum_k a_k T_k (the interpolant's Chebyshev series; ``coefficients``
    takes ln g at ``x`` to a_1 ... a_{n_y - 1}) and f = ((C - C_th)/e)^gamma_c e^p the rule
    integrates against (1 + x)^gamma_c: Gauss quadrature with positive weights summing to
    W is exact to degree 2n - 1, so its error is at most 2 W times the best
    approximation's, and f analytic and |f| <= M inside the Bernstein ellipse E_rho gives
    that <= 2 M rho^{-(2n-1)}/(rho - 1) (Trefethen 2013, "Approximation Theory and
    Approximation Practice", SIAM: Thm 8.2 and the argument of Thm 19.3; theorem
    numbers from memory).  The integral is >= W min f, so the
    relative error is <= 4 rho^{1-2n}/(rho - 1) M/min f, with
    M/min f <= F exp(sum_k |a_k| ((rho^k + rho^-k)/2 + 1)) (|T_k| <= (rho^k + rho^-k)/2 on
    E_rho, <= 1 on [-1, 1]) and F = ((3 + (rho + 1/rho)/2)/2)^gamma_c (((C - C_th)/e) is
    linear in x, zero at x = 3 for every threshold, least at x = 1).  A pair passes for
    any rho where sum_k |a_k| v_k <= ln(``GENTLE_TOL`` (rho - 1)/(4 F)) + (2n - 1) ln rho.
    F's base is >= 2, so F grows with gamma_c: the budgets of the largest of several
    exponents hold for each (per-epoch Gauss-Jacobi rules of their own exponents).
    """
    coefficients = np.linalg.inv(np.polynomial.chebyshev.chebvander(x, x.size - 1))[1:]
    rho = np.array(GENTLE_RHOS)[:, None]
    k = np.arange(1, x.size)
    ellipse = 0.5 * (rho**k + rho**-k) + 1
    rho = rho[:, 0]
    F = ((3 + 0.5 * (rho + 1 / rho)) / 2) ** gamma_c
    budget = np.log(GENTLE_TOL * (rho - 1) / (4 * F)) + (2 * n - 1) * np.log(rho)
    return coefficients, ellipse, budget
