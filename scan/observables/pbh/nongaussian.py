"""PBH abundance with a non-Gaussian curvature perturbation zeta = F(zeta_G).

Compaction function of a locally non-Gaussian zeta (Ferrante, Franciolini, Iovino &
Urbano 2023, arXiv:2211.01728; Gow, Assadullahi, Jackson, Koyama, Vennin & Wands 2023,
arXiv:2211.08348): C_l = C_G F'(zeta_G), with C_G = -(4/3) r zeta_G'(r) and zeta_G at the
smoothing scale jointly Gaussian,

    sigma_c^2  = (16/81) int dln k x^4 W^2 T^2 P      (x = kR; today's sigma^2),
    sigma_cr^2 = (4/9)   int dln k x^2 W W_z T^2 P,
    sigma_r^2  =         int dln k W_z^2 T^2 P,

W the density window, W_z the window of zeta_G (``top-hat``: the shell value
sin x / x, as in Ferrante et al. 2023; ``gaussian``: the Gaussian window itself, our
convention) and T the radiation-era transfer function (:mod:`scan.observables.pbh.variance`).
Type-I collapse: C = C_l - (3/8) C_l^2 > C_th with C_l < 4/3, critical collapse
M = K M_H (C - C_th)^gamma_c.

The density of C_l is g(c) = int dzeta_G p(c/F'(zeta_G), zeta_G) / |F'(zeta_G)|.  The
zeta_G integral has two parts.  (i) t in [-12, 12] conditional standard deviations s
around the conditional mean m(c) = (sigma_cr^2/sigma_c^2) c of zeta_G given C_G = c, by
64-point Gauss-Legendre whose weights are divided by the rule's own integral of the
standard normal density (1 - 1.8e-15): for F' = 1 every node carries p_C(c) phi(t)
exactly, so g = p_C to rounding and the Gaussian abundance is a special case of this
integral.  (ii) Where F' is large the integrand has a second ridge far from m(c) (a
small C_G already gives a large C_l there, e.g. on a local map's far branch): the
rest of [-12, 12] sigma_r on either side of part (i) is covered by 16 panels of 8-point
Gauss-Legendre per side (for F' = 1 it adds < e^{-72} relative); every interval is cut
to the map's domain, and an interval that
ends at a finite domain edge has its nodes graded towards it (x - edge ~ u^6): there a
small C_G already gives a large C_l, and the integrand has a narrow ridge.  The y = C_l
integral of the total uses the nodes of :func:`scan.observables.pbh.abundance.beta_weighted`
(span min(4/3 - y_th, 14 sigma_c)) plus, for the heavier non-Gaussian tails, four 16-point
panels on the rest of [y_th, 4/3] (contributing < e^{-98} relative for F' = 1).

The local map does not use this quadrature either: its ridge hugs the curve
C_G = c / F' = a zeta_G when sigma_c^2 << sigma_r^2, a ridge far narrower than the side
panels, and the composite rule was measured off by up to ~2 in ln g (f_NL = 10,
correlation 0.9) and by ~550 for g_NL = -40 (sigma_c^2 / sigma_r^2 ~ 1e-4); it takes the
adaptive Gauss-Hermite density of :func:`scan.observables.pbh.ng_density.ln_density`
(checked against quad in tests/test_pbh_ng_stack.py and test_pbh_ng_ridges.py).
The logarithmic map does not use this quadrature: its density is the exact closed form
of :func:`scan.observables.pbh.ng_density.ln_density` (the ratio of two correlated
normals, Hinkley 1969, on the branch lambda zeta_G < 1; checked in
tests/test_pbh_nongaussian_published.py).  The quadrature cuts zeta_G at 12 sigma_r, and
with the edge 1/lambda beyond that cut the ridge next to it, which at a large C_l
outweighs the Gaussian core by hundreds of e-folds, was missed: f_PBH came out 1/250 of
the closed form's for an edge at 15 sigma_r (an abundance of 6e-41); on the far ridge
(sigma_c^2/sigma_r^2 ~ 1e-6) the graded rule's beta was up to 1.5e-3 off.

Units: k [Mpc^-1], masses [M_sun], everything else [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from scan.errors import ConfigError
from scan.observables.pbh.abundance import _BETA_W, _BETA_Z, critical_kernel
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.ng_density import ln_density
from scan.observables.pbh.plan import PBHPlan, PBHResult
from scan.observables.pbh.thresholds import C_L_MAX, compaction_linear
from scan.observables.pbh.variance import lnk_weights, transfer_rd, window
from scan.observables.pbh.zeta_map import ZetaMap

_T_SPAN: float = 12.0
_T, _TW = np.polynomial.legendre.leggauss(64)
_TW = _TW / np.sum(_T_SPAN * _TW * np.exp(-0.5 * (_T_SPAN * _T)**2) / math.sqrt(2 * math.pi))
#: The conditional rule on [0, 1] (64-point Gauss-Legendre, normalised as described above).
_UNIT, _UNIT_W = 0.5 * (_T + 1), 0.5 * _TW
#: The side rule on [0, 1]: 16 panels of 8-point Gauss-Legendre.
_g, _gw = np.polynomial.legendre.leggauss(8)
_edges = np.linspace(0.0, 1.0, 17)
_half = 0.5 * np.diff(_edges)
_SIDE = ((_edges[:-1] + _half)[:, None] + _half[:, None] * _g).ravel()
_SIDE_W = (_half[:, None] * _gw).ravel()
_WIDE = 2 * _T_SPAN * _SIDE - _T_SPAN
_TAIL_PANELS: int = 4
#: zeta_G / sigma_r beyond which the Gaussian factor exp(-x^2/2) is 0 in double precision
#: (e^{-760}; exp underflows to 0 below -745.2): a finite domain edge nearer than this
#: keeps an epoch live (:func:`live_epochs`).
_REACH: float = 39.0
#: Power of the grading towards a finite domain edge (:func:`_graded`).
_GRADING: int = 6
#: Gauss-Legendre nodes per tail panel of the y = C_l integral, on [0, 1].
_TAIL_Z, _TAIL_W = np.polynomial.legendre.leggauss(16)
_TAIL_Z, _TAIL_W = 0.5 * (_TAIL_Z + 1), 0.5 * _TAIL_W


def zeta_window(x, kind: str = "gaussian") -> np.ndarray:
    """Window W_z(kR) [1] of zeta_G: sin x / x for ``top-hat``, exp(-x^2/2) for ``gaussian``."""
    x = np.asarray(x, dtype=float)
    if kind == "top-hat":
        return np.sinc(x / math.pi)
    return window(x, kind)


def joint_matrices(k_in, R, kind: str = "gaussian") -> tuple[np.ndarray, np.ndarray]:
    """Matrices (V_cr, V_r) with sigma_cr^2 = V_cr @ P and sigma_r^2 = V_r @ P.

    ``k_in`` [Mpc^-1] is the spectrum table, R [Mpc] the smoothing scales.
    """
    lnk, w = lnk_weights(k_in)
    x = np.outer(np.atleast_1d(R), np.exp(lnk))
    t2 = transfer_rd(x)**2
    wz = zeta_window(x, kind)
    return (4 / 9) * x * x * window(x, kind) * wz * t2 * w, wz * wz * t2 * w


def compaction_density(c, s_c2, s_cr, s_r2, zmap: ZetaMap, ps_factor: float = 1.0):
    """Density g(C_l) [1] of the linear compaction C_l = C_G F'(zeta_G).

    Parameters
    ----------
    c : ndarray [1]
        Values of C_l.
    s_c2, s_cr, s_r2 : ndarray [1]
        sigma_c^2, sigma_cr^2 and sigma_r^2, broadcastable to ``c``.
    zmap : ZetaMap
        zeta = F(zeta_G).
    ps_factor : float
        Multiplies the density (as the Gaussian path's ``ps_factor``).

    Returns
    -------
    ndarray [1]
        Shape of ``c`` broadcast with the variances.
    """
    if zmap.kind in ("logarithmic", "local"):
        return np.exp(ln_density(c, s_c2, s_cr, s_r2, zmap, ps_factor))
    c, s_c2, s_cr, s_r2 = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                                for a in (c, s_c2, s_cr, s_r2)))
    rho = s_cr / s_c2
    s = np.sqrt(np.clip(s_r2 - rho * s_cr, 1e-300, None))
    zg, dz = _zeta_nodes(rho * c, s, np.sqrt(s_r2), zmap.domain())
    slope = zmap.slope(zg)
    good = np.isfinite(slope) & (slope != 0)
    slope = np.where(good, slope, 1.0)
    cg = c[..., None] / slope
    u = (zg - rho[..., None] * cg) / s[..., None]
    half_q = 0.5 * (cg * cg / s_c2[..., None] + u * u)
    with np.errstate(over="ignore"):
        j = np.where(good & (dz != 0), np.exp(-half_q) / np.abs(slope), 0.0)
    norm = ps_factor / (2 * math.pi * np.sqrt(s_c2) * s)
    return norm * np.sum(j * dz, axis=-1)


def _zeta_nodes(mean, s, s_r, domain: tuple[float, float]):
    """zeta_G nodes and weights: the conditional interval mean +- 12 s, then the rest of
    +-12 s_r on either side (each side a composite rule), all cut to the map's ``domain``;
    an interval ending on a finite domain edge is graded towards it."""
    lo = np.maximum(np.minimum(-_T_SPAN * s_r, mean - _T_SPAN * s), domain[0])
    hi = np.minimum(np.maximum(_T_SPAN * s_r, mean + _T_SPAN * s), domain[1])
    a = np.clip(mean - _T_SPAN * s, lo, hi)
    b = np.clip(mean + _T_SPAN * s, lo, hi)
    parts, weights = [], []
    for x0, x1, rule, w in ((a, b, _UNIT, _UNIT_W), (lo, a, _SIDE, _SIDE_W),
                            (b, hi, _SIDE, _SIDE_W)):
        x, dx = _graded(x0, x1, rule, w, x1 == domain[1], x0 == domain[0])
        parts.append(x)
        weights.append(dx)
    return np.concatenate(parts, axis=-1), np.concatenate(weights, axis=-1)


def _graded(x0, x1, u, w, to_end, to_start):
    """Nodes and weights of the rule (u, w) on [x0, x1], graded as (x1 - x) ~ (1 - u)^p
    where ``to_end`` (else as (x - x0) ~ u^p where ``to_start``, else uniform), p = 6.

    At a finite domain edge of the map (the logarithmic map's 1/lambda) a tiny C_G already
    gives a large C_l: the integrand has a ridge of width ~ sigma_c / (C_l lambda) there,
    far narrower than the panels, which the grading resolves."""
    width = np.maximum(x1 - x0, 0.0)[..., None]
    end, start = to_end[..., None], to_start[..., None]
    p = _GRADING
    frac = np.where(end, 1 - (1 - u)**p, np.where(start, u**p, u))
    jac = np.where(end, p * (1 - u)**(p - 1), np.where(start, p * u**(p - 1), 1.0))
    return x0[..., None] + width * frac, width * jac * w


def _y_nodes(y_th: np.ndarray, sigma: np.ndarray, gamma_c):
    """Nodes and weights in y = C_l per epoch (``y_th`` and ``gamma_c`` shape (n, 1) or a
    number): beta_weighted's, then the tail panels."""
    span = np.minimum(C_L_MAX - y_th, 14 * sigma[:, None] + 1e-300)
    z = _BETA_Z[None, :]
    y = y_th + span * z**(1 / gamma_c)
    dy = span * z**(1 / gamma_c - 1) / gamma_c * _BETA_W
    lo = y_th + span
    width = (C_L_MAX - lo) / _TAIL_PANELS
    edges = lo + width * np.arange(_TAIL_PANELS)
    yt = (edges[:, :, None] + width[:, :, None] * _TAIL_Z).reshape(sigma.size, -1)
    dyt = np.broadcast_to(width[:, :, None] * _TAIL_W, (sigma.size, _TAIL_PANELS,
                                                         _TAIL_Z.size)).reshape(sigma.size, -1)
    return np.hstack([y, yt]), np.hstack([dy, dyt])


@dataclass(frozen=True)
class NonGaussianPlan:
    """A Gaussian :class:`PBHPlan` plus the joint (C_G, zeta_G) variance matrices."""

    base: PBHPlan
    v_cr: np.ndarray
    v_r: np.ndarray

    def evaluate(self, P_zeta, zmap: ZetaMap, thresholds=None, exponents=None) -> PBHResult:
        """f_PBH(M) per ln M [1] and the total for one spectrum ``P_zeta`` [1] on ``k_in``.

        ``thresholds`` [1]: C_th per formation epoch (default: the conventions' one);
        ``exponents`` [1]: gamma_c per formation epoch (default: the conventions' one).
        """
        plan, conv = self.base, self.base.conventions
        P = np.asarray(P_zeta, dtype=float)
        s_c2, _ = plan.sigma2(P)
        s_c2 = np.maximum(s_c2, 1e-300)
        s_cr, s_r2 = self.v_cr @ P, self.v_r @ P
        c_th = np.full(plan.M_H.size, conv.threshold) if thresholds is None \
            else np.asarray(thresholds, dtype=float)
        gam = np.full(plan.M_H.size, conv.gamma_c) if exponents is None \
            else np.asarray(exponents, dtype=float)
        y, weight, _ = critical_kernel(plan.M, plan.M_H, conv, c_th, gam)
        y_th = compaction_linear(c_th)
        on = live_epochs(y_th, s_c2, s_r2, zmap)
        epoch = np.where(on, plan._wln * plan._coef, 0.0)
        live = (weight != 0) & on[None, :]
        dens = np.zeros_like(y)
        cols = np.broadcast_to(np.arange(plan.M_H.size), y.shape)[live]
        dens[live] = compaction_density(y[live], s_c2[cols], s_cr[cols], s_r2[cols], zmap,
                                        conv.ps_factor)
        with np.errstate(invalid="ignore"):
            f = np.where(live, weight * dens, 0.0) @ epoch
        beta = np.zeros_like(s_c2)
        if on.any():
            yn, dyn = _y_nodes(y_th[on, None], np.sqrt(s_c2[on]), gam[on, None])
            excess = np.clip(yn - 0.375 * yn * yn - c_th[on, None], 0.0, None)
            g = compaction_density(yn, s_c2[on, None], s_cr[on, None], s_r2[on, None],
                                   zmap, conv.ps_factor)
            beta[on] = np.sum(conv.K * excess**gam[on, None] * g * dyn, axis=1)
        return PBHResult(plan.M, f, float(epoch @ beta), plan.M_H, s_c2, conv)


def live_epochs(y_th, s_c2: np.ndarray, s_r2: np.ndarray, zmap: ZetaMap) -> np.ndarray:
    """Epochs whose density of C_l can be non-zero in double precision above ``y_th``.

    Within |zeta_G| <= 12 sigma_r (the integration range) C_l = C_G F' exceeds y_th only
    if C_G > y_th / max|F'|; beyond 39 sigma_c that costs exp(-760), which is 0 in double
    precision (as :func:`scan.observables.pbh.plan._live_epochs`).  NaN stays live.
    For the local map with g_NL = 0, max|F'| = 1 + (6/5)|f_NL| 12 sigma_r in closed form
    (at least the maximum over the quadrature's nodes, so no epoch is lost).  F' diverges
    at a finite domain edge (the logarithmic map, whose closed-form density covers the
    whole domain): an edge within 39 sigma_r keeps the epoch live.
    """
    if zmap.kind == "local" and zmap.g_nl == 0:
        top = 1 + 1.2 * abs(zmap.f_nl) * _T_SPAN * np.sqrt(s_r2)
    else:
        slope = np.abs(zmap.slope(np.sqrt(s_r2)[:, None] * _WIDE))
        top = np.max(np.where(np.isfinite(slope), slope, np.inf), axis=1)
    for edge in zmap.domain():
        if math.isfinite(edge):
            top = np.where(abs(edge) <= _REACH * np.sqrt(s_r2), np.inf, top)
    with np.errstate(divide="ignore", invalid="ignore"):
        nu = y_th / (np.sqrt(s_c2) * top)
    return ~(nu >= 39.0)


def check_conventions(conv: PBHConventions, zmap: ZetaMap, qcd_threshold: str = "off") -> None:
    """Refuse a non-Gaussian map or an epoch-dependent threshold with a criterion or mass
    function this integral does not support."""
    if zmap.is_gaussian and qcd_threshold == "off":
        return
    if conv.criterion != "compaction" or conv.mass_function != "critical":
        what = f"non_gaussianity = '{zmap.kind}'" if not zmap.is_gaussian \
            else f"qcd_threshold = '{qcd_threshold}'"
        raise ConfigError("[observables]", "non_gaussianity" if not zmap.is_gaussian
                          else "qcd_threshold",
                          f"{what} needs criterion = 'compaction' and mass_function = "
                          f"'critical' (got '{conv.criterion}', '{conv.mass_function}')",
                          "both enter through the compaction function")


def plan_nongaussian(plan: PBHPlan, n_formation: int) -> NonGaussianPlan:
    """Add the joint variance matrices to a Gaussian plan built with ``n_formation`` epochs."""
    k_h = np.geomspace(plan.k_in[0], plan.k_in[-1], n_formation)
    v_cr, v_r = joint_matrices(plan.k_in, 1 / k_h, plan.conventions.window)
    return NonGaussianPlan(replace(plan), v_cr, v_r)
