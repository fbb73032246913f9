"""Non-Gaussian f_PBH for a stack of spectra at once: the sampler's and the grid's path.

For every (spectrum, formation epoch) pair the log-density ln g(C_l) of the linear
compaction (:mod:`scan.observables.pbh.ng_density`; for the local map with g_NL = 0 from
the table of :mod:`scan.observables.pbh.ng_table` inside its domain, within 2e-5 of the
exact density) is evaluated at ``n_y`` Chebyshev-Lobatto
nodes on the type-I interval [y_th, 4/3] (y_th = C_l at C = C_th) and interpolated as a
polynomial (barycentric form, Berrut & Trefethen 2004, "Barycentric Lagrange
interpolation", SIAM Review 46(3), 501-517) to

* the critical-collapse masses y(M, M_H) of the mass function (one fixed matrix per
  epoch), and
* the nodes of beta = int_{y_th}^{4/3} dy K (C - C_th)^gamma_c g(y): a geometric mesh
  towards y_th with a Gauss-Jacobi edge panel for the (C - C_th)^gamma_c edge
  (:mod:`scan.observables.pbh.ng_beta_nodes`), which resolves an exponential fall-off of
  g on any scale from L = 4/3 - y_th down to that of the steepest Gaussian density not 0
  in double precision (sigma^2 / y_th >= y_th / 1520).

For the identity map ln g is a quadratic in y and the interpolation is exact to rounding.
For the others the interpolation error falls geometrically with ``n_y`` (ln g is
analytic on the interval); doubling ``n_y`` measures it (tests/test_pbh_ng_stack.py).
Array operations run over (pairs x nodes); the only Python loops are over blocks of
pairs for beta (cache-sized).  The QCD-era conventions give every epoch its own
threshold and exponent: then the nodes of ln g and the beta weights are per epoch, and
with per-epoch exponents the gentle rules' nodes too (:func:`plan_stacked`).

Cost (tests/bench/bench_pbh_nongaussian.py): every exponential is clipped at
``LN_ZERO`` = -700 (:func:`~scan.observables.pbh.ng_pairs.exp_or_zero`), below which
libm's exp leaves its fast path (20-400 ns instead of ~1 ns per element); the three variances come from one product.
Where the map has a closed-form bound on ln g above y_th (the local map with g_NL = 0,
the capped and plain logarithmic maps:
:func:`~scan.observables.pbh.ng_density.ln_density_bound`), a pair whose bound on its
f(M) and on its total is below e^{-100} of its spectrum's largest f(M) and total is
left out (``LN_NEGLIGIBLE``, two passes: the pairs near their spectrum's best bound
first, then those the first pass's values do not rule out).

Units: masses [M_sun]; everything else [1].
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from scan.observables.pbh.abundance import critical_kernel
from scan.observables.pbh.kernel import mass_kernel
from scan.observables.pbh.ng_beta_nodes import (
    EDGE_RATIO,
    GENTLE_TIERS,
    MIXED_RATIO,
    beta_nodes,
    edge_panels,
    gentle_rule,
    gentle_test,
)
from scan.observables.pbh.ng_density import ln_density_bound, ln_density_pairs
from scan.observables.pbh.ng_pairs import (
    GentleRule,
    group_max,
    mass_function,
    pair_betas,
    row_extremes,
)
from scan.observables.pbh.ng_table import ln_density_tabulated
from scan.observables.pbh.nongaussian import (
    NonGaussianPlan,
    live_epochs,
    plan_nongaussian,
)
from scan.observables.pbh.plan import PBHResult, plan_pbh
from scan.observables.pbh.qcd import epoch_exponents, epoch_thresholds
from scan.observables.pbh.threshold_plan import plan_pbh_thresholds
from scan.observables.pbh.thresholds import C_L_MAX, compaction_linear
from scan.observables.pbh.zeta_map import ZetaMap

#: Chebyshev-Lobatto nodes of ln g per pair.
N_Y: int = 9
#: Type-I intervals [y_th, 4/3] wider than this get 2 N_Y - 1 nodes (:func:`nodes_for`):
#: at C_th = 0.18 with the Gaussian window (y_th = 0.19) 9 nodes were measured 1.4e-3 off
#: in f_PBH totals and 2.9e-2 in f(M) against the per-spectrum path, 17 nodes 1.8e-6 and
#: 8.5e-6 (local f_NL = -2 .. 10); the benchmark's C_th = 0.55 (width 0.6) needs 9.
WIDE_INTERVAL: float = 0.7
#: A pair is left out where its bound (:func:`~scan.observables.pbh.ng_density.
#: ln_density_bound` times its largest mass-function weight, or times its largest
#: beta) is below e^{-100} = 3.7e-44 times its spectrum's largest f(M) (or total): the
#: 128 epochs' dropped pairs move f(M) by < 5e-42 of that maximum, 5e-12 relative at the
#: f(M) = 1e-30 max f(M) the tests still compare (no bound curve spans 30 decades,
#: common practice).
LN_NEGLIGIBLE: float = 100.0
#: First pass: pairs whose bound is within this of their spectrum's best bound; the
#: second pass adds those the first pass's f(M) and totals do not rule out.  On the
#: benchmark's 64 spectra (3597 live pairs): f_NL = 1 computes 2473 + 69 pairs, f_NL =
#: -1 1699 + 141 (3228 with the marginals-only bound; with the exact ln g, ~1.8k and
#: ~1.9k would be needed); 40 gives the same sums, a wider first pass just leaves less to
#: the second.
LN_FIRST: float = 100.0
#: A pair whose ln g stays below this at every node contributes exactly 0 (e^{-800} is
#: below the smallest double, and the epoch weights are < 1e30).
LN_DEAD: float = -800.0


def lobatto(n: int) -> np.ndarray:
    """n Chebyshev-Lobatto points on [-1, 1], increasing."""
    return -np.cos(np.pi * np.arange(n) / (n - 1))


def barycentric_matrix(x: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Matrix B with p(t) = B @ p(x) for the polynomial through Chebyshev-Lobatto
    points ``x`` (shape (n,)), at targets ``t`` (any shape; result t.shape + (n,))."""
    w = (-1.0) ** np.arange(x.size)
    w[[0, -1]] *= 0.5
    d = np.asarray(t, dtype=float)[..., None] - x
    exact = d == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        r = w / d
        b = r / np.sum(r, axis=-1, keepdims=True)
    return np.where(np.any(exact, axis=-1, keepdims=True), exact.astype(float), b)


@dataclass(frozen=True)
class StackedNGPlan:
    """A :class:`NonGaussianPlan` laid out for stacks of spectra (see the module doc).

    ``mass_matrix`` (n_H, n_y, n_M) takes ln g at the nodes to the masses' y(M, M_H) per
    epoch; ``beta_matrix`` (n_beta, n_y) to the beta nodes, ``beta_weight`` their weights.
    ``y_nodes`` (n_y,) and ``beta_weight`` (n_beta,) carry a leading epoch axis (n_H, ...)
    with the QCD-era per-epoch thresholds and exponents.  ``variance_matrix`` (3 n_H, n_k)
    stacks the plan's sigma_c^2, sigma_cr^2 and sigma_r^2 matrices.  ``gentle``: the
    coarse beta rules for the pairs they provably serve (with per-epoch exponents, each
    epoch's own nodes).
    """

    ng: NonGaussianPlan
    y_nodes: np.ndarray
    mass_matrix: np.ndarray
    beta_matrix: np.ndarray
    beta_weight: np.ndarray
    variance_matrix: np.ndarray
    gentle: GentleRule | None = None

    def evaluate(self, P_zeta, zmap: ZetaMap) -> PBHResult:
        """f_PBH(M) per ln M [1] and the totals for a stack of spectra (m, n_k) [1].

        Returns a :class:`PBHResult` as :meth:`PBHPlan.evaluate` does (leading axis m;
        for one spectrum of shape (n_k,), no leading axis).
        """
        base = self.ng.base
        P = np.asarray(P_zeta, dtype=float)
        P2 = np.atleast_2d(P)
        s_c2, s_cr, s_r2 = self._variances(P2)
        y_th = self.y_nodes[..., 0]                          # a number, or one per epoch
        live = np.flatnonzero(_live(y_th, s_c2, s_r2, zmap))   # (flat indices: faster
        i, h = np.divmod(live, s_c2.shape[1])                   # than np.nonzero and [i, h])
        var = tuple(np.take(v, live) for v in (s_c2, s_cr, s_r2))
        ln_g = ln_density_bound(y_th[h] if y_th.ndim else y_th, *var, zmap.of_spectra(i),
                                base.conventions.ps_factor)
        if np.all(np.isposinf(ln_g)):                        # no bound: every pair
            f, total = self._pairs(np.ones(i.size, dtype=bool), i, h, var, zmap,
                                   P2.shape[0])
            return self._result(P, P2, f, total, s_c2)
        with np.errstate(divide="ignore"):                   # epochs of weight 0: -inf
            beta_max = base._wln * base._coef * self.beta_weight.sum(axis=-1)
            bounds = (np.log(base._kernel.weight.max(axis=1))[h] + ln_g,
                      np.log(beta_max)[h] + ln_g)
        first = _near_top(bounds, i, P2.shape[0])
        f, total = self._pairs(first, i, h, var, zmap, P2.shape[0])
        with np.errstate(divide="ignore"):
            refs = (np.log(f.max(axis=1)), np.log(total))
        rest = ~first & (~(bounds[0] < refs[0][i] - LN_NEGLIGIBLE)
                         | ~(bounds[1] < refs[1][i] - LN_NEGLIGIBLE))
        if rest.any():
            f_rest, total_rest = self._pairs(rest, i, h, var, zmap, P2.shape[0])
            f, total = f + f_rest, total + total_rest
        return self._result(P, P2, f, total, s_c2)

    def _result(self, P, P2, f, total, s_c2) -> PBHResult:
        """The :class:`PBHResult` of a stack (NaN where a spectrum is not finite, as the
        Gaussian path; no leading axis for one spectrum ``P`` of shape (n_k,))."""
        base = self.ng.base
        bad = ~np.all(np.isfinite(P2), axis=1)
        f[bad], total[bad] = np.nan, np.nan
        if P.ndim == 1:
            return PBHResult(base.M, f[0], float(total[0]), base.M_H, s_c2[0],
                             base.conventions)
        return PBHResult(base.M, f, total, base.M_H, s_c2, base.conventions)

    def _pairs(self, chosen, i, h, var, zmap: ZetaMap, m: int):
        """f(M) [1], (m, n_M), and the totals [1], (m,), of the ``chosen`` (spectrum i,
        epoch h) pairs with variances ``var``."""
        i, h = i[chosen], h[chosen]
        nodes = self.y_nodes[h] if self.y_nodes.ndim == 2 else self.y_nodes
        density = ln_density_tabulated if zmap.kind == "local" and zmap.g_nl == 0 \
            and zmap.f_nl != 0 else ln_density_pairs
        lng = density(nodes, *(v[chosen] for v in var), zmap.of_spectra(i),
                      self.ng.base.conventions.ps_factor)
        low, high = row_extremes(lng)
        keep = ~(high < LN_DEAD)
        if not keep.all():
            i, h, lng, low, high = i[keep], h[keep], lng[keep], low[keep], high[keep]
        base = self.ng.base
        beta = pair_betas(lng, self.beta_matrix, self.beta_weight, h, self.gentle,
                          (low, high))
        total = np.bincount(i, weights=(base._wln * base._coef)[h] * beta,
                            minlength=m).astype(float)    # int64 when no pair is left
        return self._mass_function(lng, i, h, m), total

    def _variances(self, P2: np.ndarray):
        """sigma_c^2 (> 0), sigma_cr^2 and sigma_r^2 (> 0) [1], each (m, n_H), of a stack
        (m, n_k): one product with ``variance_matrix`` over the columns where some
        spectrum is non-zero (the others add exactly 0, as in :meth:`PBHPlan.sigma2`)."""
        n_k = self.variance_matrix.shape[1]
        if P2.ndim != 2 or P2.shape[1] != n_k:
            raise ValueError(f"P_zeta must have shape ({n_k},) or (m, {n_k}), got "
                             f"{P2.shape}")
        cols = np.flatnonzero(np.any(P2 != 0, axis=0))
        lo, hi = (int(cols[0]), int(cols[-1]) + 1) if cols.size else (0, 0)
        s_c2, s_cr, s_r2 = np.split(P2[:, lo:hi] @ self.variance_matrix[:, lo:hi].T, 3,
                                    axis=1)
        return np.maximum(s_c2, 1e-300), s_cr, np.maximum(s_r2, 1e-300)

    def _mass_function(self, lng, i, h, m: int) -> np.ndarray:
        """f(M) [1], shape (m, n_M): sum over the pairs of weight(M, M_H) g(y(M, M_H))
        (compiled, over the live pairs only: :mod:`scan.observables.pbh.ng_pairs`)."""
        return mass_function(lng, i, h, self.mass_matrix, self.ng.base._kernel.weight, m)


def _near_top(bounds, i, m: int) -> np.ndarray:
    """Pairs whose bound (either of ``bounds``, ln [1]) is within ``LN_FIRST`` of the
    largest of its spectrum (NaN included): the first pass of
    :meth:`StackedNGPlan.evaluate`."""
    out = np.zeros(i.size, dtype=bool)
    for b in bounds:
        out |= ~(b < group_max(b, i, m)[i] - LN_FIRST)
    return out


def _live(y_th, s_c2, s_r2, zmap: ZetaMap) -> np.ndarray:
    """(spectrum, epoch) pairs whose density above ``y_th`` (a number, or one per epoch)
    can be non-zero in double precision.  Variances below 1e-250 (columns the spectrum does not reach) are dead.
    Logarithmic map: on the curve C_G = y u, u = 1 - lambda zeta_G, the exponent q of
    the joint density is at least max(C_G^2/sigma_c^2, zeta_G^2/sigma_r^2) (each marginal
    bounds it), whose minimum over u is y^2 / (sigma_c + |lambda| y sigma_r)^2; dead where
    q/2 > 1500 (e^{-1500} times a prefactor below 1e250 underflows); other maps:
    :func:`live_epochs`."""
    on = (s_c2 > 1e-250) & (s_r2 > 1e-250)
    if zmap.kind == "logarithmic":
        lam = np.abs(np.asarray(zmap.log_lambda, dtype=float))
        lam = lam[:, None] if lam.ndim else lam              # one per spectrum
        q = y_th**2 / (np.sqrt(s_c2) + lam * y_th * np.sqrt(s_r2))**2
        return on & (0.5 * q < 1500.0)
    return on & live_epochs(np.broadcast_to(y_th, s_c2.shape).ravel(), s_c2.ravel(),
                            s_r2.ravel(), zmap).reshape(s_c2.shape)


def _to_unit(y, y_th: float):
    """Map y in [y_th, 4/3] to [-1, 1]."""
    return 2 * (y - y_th) / (C_L_MAX - y_th) - 1


def nodes_for(y_th) -> int:
    """Nodes of ln g for the type-I intervals [y_th, 4/3] (the widest counts)."""
    return N_Y if C_L_MAX - float(np.min(y_th)) <= WIDE_INTERVAL else 2 * N_Y - 1


def plan_stacked(ng: NonGaussianPlan, n_y: int = N_Y, thresholds=None,
                 exponents=None) -> StackedNGPlan:
    """Lay out ``ng`` for stacks; ``n_y`` nodes of ln g.

    ``thresholds``, ``exponents`` [1]: C_th and gamma_c per formation epoch (the QCD-era
    conventions, with ``ng.base`` planned with them: :func:`plan_pbh_mapped`); default one
    for all epochs.  In the unit variable of each epoch's interval [y_th, 4/3] the beta
    nodes do not depend on the threshold (the panels are those of the smallest), so one
    ``beta_matrix`` serves every epoch and only the weights are per epoch; the edge panel
    keeps the Gauss-Jacobi weight of the configured gamma_c (exact for it; for an epoch's
    other gamma_c the panel integrates e^{gamma - gamma_c} with 12 nodes, measured in
    tests/test_sampler_qcd.py).  The gentle rules (:func:`_gentle`) are Gauss-Jacobi of
    each epoch's own exponent.
    """
    conv = ng.base.conventions
    if ng.v_cr.shape != ng.base._v0.shape:
        raise ValueError(f"the joint variance matrices {ng.v_cr.shape} do not match the "
                         f"plan's {ng.base._v0.shape}: build them with the plan's n_formation")
    x = lobatto(n_y)
    y_mass = ng.base._y.T                                    # (n_H, n_M)
    if thresholds is None and exponents is None:
        y_th = float(compaction_linear(conv.threshold))
        yb, wb = beta_nodes(y_th, conv.gamma_c, conv.K)
        y0 = y_th
    else:
        n_h = ng.base.M_H.size
        thr = np.broadcast_to(conv.threshold if thresholds is None else thresholds, (n_h,))
        gam = np.broadcast_to(conv.gamma_c if exponents is None else exponents, (n_h,))
        y_th = compaction_linear(thr)[:, None]               # (n_H, 1)
        m = edge_panels(y_th, EDGE_RATIO if exponents is None else MIXED_RATIO)
        per = [beta_nodes(float(y), float(g), conv.K, conv.gamma_c, m)
               for y, g in zip(y_th[:, 0], gam)]
        yb, wb, y0 = per[0][0], np.array([w for _, w in per]), float(y_th[0, 0])
    return StackedNGPlan(ng, y_th + (x + 1) * 0.5 * (C_L_MAX - y_th),
                         np.ascontiguousarray(barycentric_matrix(
                             x, np.clip(_to_unit(y_mass, y_th), -1, 1)).transpose(0, 2, 1)),
                         barycentric_matrix(x, _to_unit(yb, y0)), wb,
                         np.vstack([ng.base._v0, ng.v_cr, ng.v_r]),
                         _gentle(x, y_th, conv, exponents))


def _gentle(x: np.ndarray, y_th, conv, exponents=None) -> GentleRule:
    """The gentle beta rules (:data:`GENTLE_TIERS` nodes) for interpolation nodes ``x`` and
    thresholds ``y_th`` (a number, or (n_H, 1) per epoch: the nodes in the unit variable
    are the same, the weights per epoch).  ``exponents`` [1]: gamma_c per epoch (default
    ``conv.gamma_c`` for all): each epoch takes Gauss-Jacobi of its own exponent (nodes,
    so matrices, per epoch), and the a-priori test that of the largest (its bound grows
    with the exponent: :func:`~scan.observables.pbh.ng_beta_nodes.gentle_test`), so one
    budget serves every epoch."""
    y0 = float(np.ravel(y_th)[0])
    if exponents is None:
        gammas, largest = np.full(np.size(y_th), conv.gamma_c), conv.gamma_c
    else:
        gammas = np.broadcast_to(exponents, (np.size(y_th),))
        largest = float(np.max(exponents))
    matrices, weights, budgets = [], [], []
    for n in GENTLE_TIERS:
        per = [gentle_rule(float(y), float(g), conv.K, n)
               for y, g in zip(np.ravel(y_th), gammas)]
        matrices.append(barycentric_matrix(x, _to_unit(per[0][0], y0)) if exponents is None
                        else np.array([barycentric_matrix(x, _to_unit(yb, float(y)))
                                       for (yb, _), y in zip(per, np.ravel(y_th))]))
        weights.append(per[0][1] if np.ndim(y_th) == 0 else np.array([w for _, w in per]))
        coefficients, ellipse, budget = gentle_test(x, largest, n)
        budgets.append(budget)
    return GentleRule(tuple(matrices), tuple(weights), coefficients, ellipse,
                      np.array(budgets))


@dataclass(frozen=True)
class MappedStackPlan:
    """A :class:`StackedNGPlan` bound to one map: the ``evaluate(P_stack)`` protocol of
    the batch path (:func:`scan.observables.batch.plan_batch`'s ``pbh_plan``)."""

    stacked: StackedNGPlan
    zmap: ZetaMap
    gaussian: Any = None        # plan of the Gaussian total (default ``stacked.ng.base``)

    @property
    def M(self) -> np.ndarray:
        """Output masses [M_sun]."""
        return self.stacked.ng.base.M

    def evaluate(self, P_zeta, thresholds=None, zeta_map: ZetaMap | None = None
                 ) -> PBHResult:
        """f_PBH of a stack (m, n_k) [1] with the Gaussian total beside it
        (``f_pbh_total_gaussian``); per-spectrum thresholds are not supported.
        ``zeta_map`` replaces the plan's map (e.g. a logarithmic map with parameters per
        spectrum, arrays of shape (m,))."""
        if thresholds is not None:
            raise ValueError("the stacked non-Gaussian plan has the same thresholds for all "
                             "spectra")
        gaussian = (self.gaussian or self.stacked.ng.base).evaluate(P_zeta).f_pbh_total
        return replace(self.stacked.evaluate(P_zeta, zeta_map or self.zmap),
                       f_pbh_total_gaussian=gaussian)


def plan_pbh_mapped(k_table, masses, conventions, zmap: ZetaMap, *, dof=None,
                    n_eff: float | None = None, n_formation: int = 256,
                    qcd_threshold: str = "off", qcd_collapse: str = "off") -> MappedStackPlan:
    """The batch path's f_PBH plan for spectra on ``k_table`` [Mpc^-1] at ``masses``
    [M_sun] with zeta = F(zeta_G) given by ``zmap`` (gaussian, local or logarithmic) and
    the QCD-era conventions (:mod:`scan.observables.pbh.qcd`): per-epoch thresholds and
    exponents, the Gaussian total beside it from the threshold plan with the same ones."""
    kw = {} if n_eff is None else {"n_eff": n_eff}
    base = plan_pbh(k_table, masses, conventions, n_formation=n_formation, dof=dof, **kw)
    if qcd_threshold == "off" and qcd_collapse == "off":
        n_y = nodes_for(compaction_linear(conventions.threshold))
        return MappedStackPlan(plan_stacked(plan_nongaussian(base, n_formation), n_y), zmap)
    thr = epoch_thresholds(base.M_H, conventions.threshold, dof) \
        if qcd_threshold != "off" else None
    gam = epoch_exponents(base.M_H, conventions.gamma_c, dof) if qcd_collapse != "off" \
        else None
    y, weight, _ = critical_kernel(base.M, base.M_H, conventions, thr, gam)
    base = replace(base, _y=y, _weight=weight, _beta_table=None,
                   _kernel=mass_kernel(y, weight, base._wln * base._coef, conventions))
    gaussian = plan_pbh_thresholds(k_table, masses, conventions, n_formation=n_formation,
                                   dof=dof, qcd_threshold=qcd_threshold,
                                   qcd_collapse=qcd_collapse, **kw)
    n_y = nodes_for(compaction_linear(conventions.threshold if thr is None else thr))
    return MappedStackPlan(plan_stacked(plan_nongaussian(base, n_formation), n_y, thr, gam),
                           zmap, gaussian)
