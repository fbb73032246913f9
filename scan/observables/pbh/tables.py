"""The mass-weighted beta of critical collapse as a table in nu_th = y_th / sigma.

:func:`scan.observables.pbh.abundance.beta_weighted` integrates K (C - C_th)^gamma_c p(y) over
y = y_th + span z^{1/gamma_c} by the 48-point rule in z of
:func:`scan.observables.pbh.abundance.beta_rule` (weights w_j), with span =
min(y_max - y_th, 14 sigma).  With a_j = z_j^{1/gamma_c}, P = span/sigma,
nu_j = y_j/sigma = v + P a_j (v = nu_th = y_th/sigma) and, for the compaction function,
C - C_th = (y - y_th)(1 - (3/8)(y + y_th)) = (y - y_th)(1 - 3 y_th/4)(1 - q a_j) with
q = (3/8) span / (1 - 3 y_th/4), the same 48 terms give exactly

    beta = K span^{1+gamma_c} p_0(sigma) (1 - 3 y_th/4)^{gamma_c} e^{-v^2/2} S(v, P, q),
    S = sum_j w_j (a_j/gamma_c) (1 - q a_j)^{gamma_c} [(nu_j^3 - 3 nu_j)]
              e^{-(P v a_j + P^2 a_j^2/2)},

with p_0 the y-independent factor of the density (:func:`scan.observables.pbh.abundance.density`),
the bracket for ``peaks`` only and q = 0 for the linear criteria.  For one threshold
(P, q) are functions of v on two branches: span = 14 sigma (P = 14; all of the linear
criteria) and span = y_max - y_th (P = span v/y_th, q = 1/2; compaction at large sigma).
ln S is smooth on each branch (no large cancellation: every exponent is at most 0), so it
is tabulated once per plan against u = ln v and evaluated by a degree-7 polynomial per
table interval (Taylor coefficients of an interpolating B-spline of degree 7, at the
interval midpoints).  Only v in [2, 39.5] is tabulated (the live range nu_th^2/2 < 760 ends
at v = 38.99; below v = 2 the Gaussian tail is no tail any more and the peaks bracket
changes sign): other pairs go through the direct quadrature.  For the linear criteria the
scaled branch does not depend on the threshold, so one table serves any delta_c (the
per-row thresholds of :mod:`scan.observables.pbh.threshold_plan`).

A table is accepted only if, at the quarter and middle points of every interval, it equals
ln S computed directly to ``TOLERANCE``; otherwise the step is halved (and after
``MAX_REFINE`` halvings the branch falls back to the direct quadrature).  The table then
reproduces the quadrature to rounding: beta's relative error is ~1e-13, that of the
direct path's own exp() of arguments up to 760.

Units: sigma^2, kR^2, beta and thresholds [1].
"""
from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from scipy.interpolate import make_interp_spline

from scan.observables.pbh.abundance import _BETA_W, _BETA_Z, _relation, beta_weighted
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.kernel import half_exp

#: Tabulated range of nu_th = y_th/sigma [1] and the first step in ln nu_th.
V_RANGE: tuple[float, float] = (2.0, 39.5)
STEP: float = 0.01
DEGREE: int = 7
#: Largest accepted |ln S_table - ln S| at the check points [1] (relative error of beta).
TOLERANCE: float = 1e-13
MAX_REFINE: int = 3
_SPAN_NU: float = 14.0           # span = 14 sigma on the scaled branch (as beta_weighted)


@dataclass(frozen=True)
class Branch:
    """ln S on one branch as a piecewise polynomial on a uniform grid in u = ln v.

    Attributes
    ----------
    u0, step : float [1]
        First node and spacing in ln nu_th; interval i is [u0 + i step, u0 + (i+1) step].
    coef : ndarray [1]
        Shape (n_intervals, DEGREE + 1): coefficients of t^d, t = (u - u_mid)/step in
        [-1/2, 1/2] on the interval with midpoint u_mid.
    error : float [1]
        Largest |table - direct| of ln S at the check points.
    """

    u0: float
    step: float
    coef: np.ndarray
    error: float


@dataclass(frozen=True)
class BetaTable:
    """ln S of one threshold's mass-weighted beta on its two branches (see module doc).

    Attributes
    ----------
    conventions : PBHConventions
    y_th, span_max : float [1]
        Threshold of the Gaussian variable and y_max - y_th (inf for linear criteria).
    scaled, fixed : Branch or None
        span = 14 sigma and span = span_max (None where absent or not accepted).
    """

    conventions: PBHConventions
    y_th: float
    span_max: float
    scaled: Branch | None
    fixed: Branch | None

    @property
    def sigma2_kink(self) -> float:
        """sigma^2 [1] above which span = span_max (the fixed branch): (span_max/14)^2."""
        return (self.span_max / _SPAN_NU)**2


def evaluate_branch(branch: Branch | None, u: np.ndarray) -> np.ndarray:
    """ln S [1] at u = ln nu_th [1] from one branch's table; NaN outside it (or if None)."""
    if branch is None:
        return np.full(u.shape, np.nan)
    n = branch.coef.shape[0]
    r = (u - branch.u0) * (1.0 / branch.step)
    inside = (r >= 0) & (r <= n)
    i = np.floor(np.where(inside, r, 0.0))
    np.minimum(i, n - 1, out=i)
    t = r - i
    t -= 0.5
    c = branch.coef[i.astype(np.intp)]
    out = c[:, DEGREE] * t
    for d in range(DEGREE - 1, 0, -1):
        out += c[:, d]
        out *= t
    out += c[:, 0]
    return np.where(inside, out, np.nan)


def ln_reduced_sum(v: np.ndarray, P: np.ndarray, q: np.ndarray,
                   conv: PBHConventions) -> np.ndarray:
    """ln S(v, P, q) [1] of the module docstring, elementwise over broadcast inputs.

    Parameters
    ----------
    v : array_like [1]
        nu_th = y_th / sigma.
    P : array_like [1]
        span / sigma.
    q : array_like [1]
        (3/8) span / (1 - 3 y_th/4) for ``compaction`` (ignored otherwise).
    conv : PBHConventions

    Returns
    -------
    ndarray [1]
    """
    gam = conv.gamma_c
    a = _BETA_Z**(1 / gam)
    wq = _BETA_W * a / gam
    v, P, q = (np.asarray(w, dtype=float)[..., None] for w in (v, P, q))
    arg = -(P * v * a + 0.5 * (P * a)**2)
    if conv.criterion == "compaction":
        arg = arg + gam * np.log1p(-q * a)
    terms = np.exp(arg)
    if conv.criterion == "peaks":
        nu = v + P * a
        terms = terms * np.clip(nu * (nu * nu - 3), 0.0, None)
    return np.log(terms @ wq)


def _branch_pq(v: np.ndarray, y_th: float, span_max: float, branch: str,
               conv: PBHConventions) -> tuple[np.ndarray, np.ndarray]:
    """(P, q) [1] along a branch at nu_th = ``v`` for threshold ``y_th``."""
    if branch == "scaled":
        P = np.full_like(v, _SPAN_NU)
        q = 0.375 * _SPAN_NU * y_th / (v * (1 - 0.75 * y_th))
    else:
        P = span_max * v / y_th
        q = np.full_like(v, 0.375 * span_max / (1 - 0.75 * y_th))
    return P, (q if conv.criterion == "compaction" else np.zeros_like(v))


def _fit_branch(u_lo: float, u_hi: float,
                func: Callable[[np.ndarray], np.ndarray]) -> Branch | None:
    """Tabulate ``func(u)`` on [u_lo, u_hi]; None if not accurate to ``TOLERANCE``."""
    step = STEP
    for _ in range(MAX_REFINE + 1):
        n = max(int(math.ceil((u_hi - u_lo) / step)), 2 * DEGREE)
        h = (u_hi - u_lo) / n
        nodes = u_lo + h * np.arange(n + 1)
        spline = make_interp_spline(nodes, func(nodes), k=DEGREE)
        mid = nodes[:-1] + 0.5 * h
        coef = np.stack([spline(mid, nu=d) * h**d / math.factorial(d)
                         for d in range(DEGREE + 1)], axis=1)
        branch = Branch(float(u_lo), float(h), coef, 0.0)
        check = (nodes[:-1, None] + h * np.array([0.25, 0.5, 0.75])).ravel()
        err = float(np.max(np.abs(evaluate_branch(branch, check) - func(check))))
        if err <= TOLERANCE:
            return Branch(float(u_lo), float(h), coef, err)
        step *= 0.5
    return None


def beta_table(conv: PBHConventions) -> BetaTable:
    """Tabulate ln S of the mass-weighted beta for ``conv`` (threshold included).

    Parameters
    ----------
    conv : PBHConventions
        Criterion, threshold and gamma_c (K and ps_factor enter only as factors).

    Returns
    -------
    BetaTable
    """
    y_th, y_max = _relation(conv)
    span_max = y_max - y_th
    u_lo, u_hi = math.log(V_RANGE[0]), math.log(V_RANGE[1])
    # the scaled branch is where 14 sigma <= span_max, i.e. v >= 14 y_th / span_max
    u_k = math.log(_SPAN_NU * y_th / span_max) if math.isfinite(span_max) else -math.inf
    branches = {}
    for name, lo, hi in (("scaled", max(u_lo, u_k), u_hi), ("fixed", u_lo, min(u_hi, u_k))):
        def func(u, name=name):
            v = np.exp(u)
            return ln_reduced_sum(v, *_branch_pq(v, y_th, span_max, name, conv), conv)
        branches[name] = _fit_branch(lo, hi, func) if hi - lo > 1e-9 else None
    return BetaTable(conv, float(y_th), float(span_max), branches["scaled"],
                     branches["fixed"])


def beta_tabulated(table: BetaTable, sigma2: np.ndarray, kR2: np.ndarray,
                   y_th: np.ndarray | None = None) -> np.ndarray:
    """Mass-weighted beta [1] of :func:`scan.observables.pbh.abundance.beta_weighted`, from the table.

    Pairs outside the tabulated range (nu_th < 2 or > 39.5, or a branch without a
    table) and non-finite inputs are evaluated by the direct quadrature.

    Parameters
    ----------
    table : BetaTable
    sigma2, kR2 : array_like [1]
        sigma^2 (> 0) and <k^2> R^2 per pair, equal shapes (n,).
    y_th : array_like [1], optional
        Threshold of the Gaussian variable per pair (linear criteria only; default the
        table's).

    Returns
    -------
    ndarray [1]
        Shape (n,).
    """
    conv = table.conventions
    s = np.atleast_1d(np.asarray(sigma2, dtype=float))
    k = np.broadcast_to(np.asarray(kR2, dtype=float), s.shape)
    if y_th is None:
        y = table.y_th
    elif math.isinf(table.span_max):
        y = np.broadcast_to(np.asarray(y_th, dtype=float), s.shape)
    else:
        raise ValueError("per-pair thresholds need a linear criterion's table")
    gam = conv.gamma_c
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_s2 = np.log(s)
        u = np.log(y) - 0.5 * ln_s2                              # ln nu_th
        fixed = s > table.sigma2_kink
        ln_span = math.log(_SPAN_NU) + 0.5 * ln_s2               # span = 14 sigma
        if fixed.any():
            ln_s = np.empty(s.shape)
            ln_s[~fixed] = evaluate_branch(table.scaled, u[~fixed])
            ln_s[fixed] = evaluate_branch(table.fixed, u[fixed])
            ln_span[fixed] = math.log(table.span_max)
        else:
            ln_s = evaluate_branch(table.scaled, u)
        # K span^{1+gamma_c} p_0 (1 - 3 y_th/4)^gamma_c, in logs (abundance.density's p_0)
        if conv.criterion == "peaks":
            ln_rest = 1.5 * np.log(k / 3) - math.log(3 * math.pi)
        else:
            ln_rest = math.log(conv.ps_factor / math.sqrt(2 * math.pi))
        if conv.criterion == "compaction":
            ln_rest = ln_rest + gam * math.log1p(-0.75 * table.y_th)
        ln_rest = ln_rest + math.log(conv.K) + (1 + gam) * ln_span - 0.5 * ln_s2
        # moderate terms first, the large -nu_th^2/2 (up to 760) last: one rounding of it
        half = 0.5 * (ln_s + ln_rest) - (0.25 * y * y) / s
    beta = half_exp(half)
    direct = ~np.isfinite(ln_s)
    if conv.criterion == "peaks":
        direct |= ~np.isfinite(k)
    if direct.any() and y_th is None:
        beta[direct] = beta_weighted(s[direct], k[direct], conv)
    elif direct.any():            # linear criteria: y_th is delta_c itself (rare pairs)
        beta[direct] = [beta_weighted(si, ki, replace(conv, threshold=float(yi)))[0]
                        for si, ki, yi in zip(s[direct], k[direct], y[direct])]
    return beta
