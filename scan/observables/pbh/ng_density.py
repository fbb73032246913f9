"""ln g(C_l): the log-density of the linear compaction C_l = C_G F'(zeta_G), vectorised.

(C_G, zeta_G) are jointly Gaussian (variances sigma_c^2, sigma_r^2, covariance sigma_cr^2,
:mod:`scan.observables.pbh.nongaussian`); written as zeta_G ~ N(0, sigma_r^2) and
C_G | zeta_G ~ N(a zeta_G, t^2), a = sigma_cr^2 / sigma_r^2, t^2 = sigma_c^2 - a sigma_cr^2,

    g(c) = int dzeta_G p(c / F'(zeta_G), zeta_G) / |F'(zeta_G)|

(Ferrante, Franciolini, Iovino & Urbano 2023, arXiv:2211.01728, their eq. for P(C_l)).
Everything is returned as a logarithm, so that densities far below the smallest double
(exponents of -1000 and beyond) stay finite and interpolable.

* ``gaussian``: g is the Gaussian density of C_G itself.
* ``logarithmic`` (F = -ln(1 - lambda zeta_G)/lambda): in u = 1 - lambda zeta_G > 0 the
  map gives F' = 1/u and C_G = c u, so the exponent is a quadratic in u and the integral
  int_0^inf u exp(-A (u - mu)^2 / 2) du is closed form (an erfc) -- exact, no quadrature
  (our derivation; it covers the whole domain lambda zeta_G < 1, and the per-spectrum
  path of :mod:`~scan.observables.pbh.nongaussian` uses it too; it equals Hinkley's 1969
  density of a ratio of correlated normals on that branch,
  tests/test_pbh_nongaussian_published.py).
* ``local`` (F' = 1 + (6/5) f_NL zeta_G + (27/25) g_NL zeta_G^2): Laplace-centred
  Gauss-Hermite quadrature on each monotone branch of F (between the real roots of F',
  where C_G = c/F' diverges and the integrand vanishes): damped Newton steps on the
  log-integrand psi from the Gaussian conditional mean, its mirror image and the curve
  C_G = c/F' = a zeta_G (a root of a quadratic, or for g_NL != 0 of a cubic: the seed
  without which ridges were missed), then ``n_gh`` Gauss-Hermite
  nodes scaled by 1/sqrt(-psi'') (adaptive Gauss-Hermite: Liu & Pierce 1994, "A note on
  Gauss-Hermite quadrature", Biometrika 81(3), 624-629).  For a Gaussian integrand (F' = 1) the rule is exact for any n_gh; the
  error for a smooth ridge falls like the Gauss-Hermite remainder n! / (2^n (2n)!) times
  the 2n-th derivative of the integrand over its Gaussian part.  Both branches of a
  non-monotone map are integrated (C_G < 0 with F' < 0 also gives C_l > 0).

Units: all quantities [1].
"""
from __future__ import annotations

import itertools
import math

import numpy as np
from scipy import special

from scan.observables.pbh.ng_capped import capped_pairs, ln_capped_density, min_exponent
from scan.observables.pbh.ng_closed import (
    bound_from_exponent,
    half_moment_table,
    log_map_density,
    near_exponent_bound,
)
from scan.observables.pbh.ng_ridge import branch_integrals, far_curve_bound
from scan.observables.pbh.thresholds import C_L_MAX
from scan.observables.pbh.zeta_map import ZetaMap

#: Gauss-Hermite nodes of the local map's per-branch rule: 16 -> 32 changes ln g by
#: <= 1.1e-5, and the 32-point rule is within 1.4e-7 of scipy quad (tests/test_pbh_ng_stack.py).
N_GH: int = 16
#: ... and of the cubic map (g_NL != 0), whose ridges are less Gaussian: 16 nodes were
#: measured up to 1.7e-4 from quad in ln g (sigma_r^2 <= 0.03), 5.5e-6 relative in g at
#: the benign variances of tests/test_pbh_nongaussian.py, where 32 meet its 1e-7.
N_GH_CUBIC: int = 32
#: The far branch of a quadratic map is skipped where its bound is below e^{-40} times the
#: near branch (relative contribution < 4e-18, below rounding).
FAR_MARGIN: float = 40.0
#: Share of the exponent given up for the prefactor in :func:`ln_density_bound` when
#: fixed (its default is the best share per pair, 2/nu^2).
BOUND_SPLIT: float = 0.1
#: Above this z, 1 - sqrt(pi) z erfcx(z) is taken from its asymptotic series (the direct
#: difference loses ~2 z^2 eps, 4e-12 at z = 100; the series' first omitted term is
#: 945 / (32 z^10) / (1 / (2 z^2)) < 1e-14 relative there).
_Z_SERIES: float = 100.0
#: Above this x = mu sqrt(A/2) >= 0, erfc(-x) is 2 and e^{-x^2} negligible to rounding.
_X_FLAT: float = 6.0


def joint(s_c2, s_cr, s_r2):
    """(a, t^2, ln of 1/(2 pi sqrt(det))) [1] of the joint (C_G, zeta_G) Gaussian."""
    a = s_cr / s_r2
    t2 = np.maximum(s_c2 - a * s_cr, 1e-300)
    return a, t2, -math.log(2 * math.pi) - 0.5 * np.log(s_r2 * t2)


def ln_density(c, s_c2, s_cr, s_r2, zmap: ZetaMap, ps_factor: float = 1.0) -> np.ndarray:
    """ln g(c) [1] for C_l = ``c`` (broadcast with the variances sigma_c^2, sigma_cr^2,
    sigma_r^2), ``ps_factor`` multiplying g; maps ``gaussian``, ``local``, ``logarithmic``.

    Raises
    ------
    ValueError
        For ``model`` maps (tabulated delta-N: use the per-spectrum path).
    """
    c, s_c2, s_cr, s_r2 = (np.asarray(v, dtype=float) for v in (c, s_c2, s_cr, s_r2))
    if zmap.kind == "gaussian":
        out = -0.5 * np.log(2 * math.pi * s_c2) - 0.5 * c * c / s_c2
    elif zmap.kind == "logarithmic" and _is_capped(zmap):
        out = ln_capped_density(c, s_c2, s_cr, s_r2, zmap.log_lambda, 1 / zmap.slope_max)
    elif zmap.kind == "logarithmic":
        out = _ln_log_map(c, s_c2, s_cr, s_r2, zmap.log_lambda)
    elif zmap.kind == "local":
        c, s_c2, s_cr, s_r2 = np.broadcast_arrays(c, s_c2, s_cr, s_r2)
        out = _ln_local(*(v.ravel() for v in (c, s_c2, s_cr, s_r2)), zmap).reshape(c.shape)
    else:
        raise ValueError("the stacked density covers gaussian, local and logarithmic maps; "
                         "'model' goes through NonGaussianPlan.evaluate")
    return out + math.log(ps_factor)


def ln_density_pairs(c, s_c2, s_cr, s_r2, zmap: ZetaMap, ps_factor: float = 1.0):
    """ln g [1] at the nodes ``c`` ((n_y,) shared, or (n, n_y) per pair) for every pair of
    variances (n,): shape (n, n_y).

    As :func:`ln_density` on (c, s[:, None]); the logarithmic map goes through its
    compiled closed form (:func:`scan.observables.pbh.ng_closed.log_map_density`, the
    array code only for elements with mu < 0)."""
    c = np.atleast_2d(np.asarray(c, dtype=float))
    if np.size(s_c2) == 0:
        return np.empty((0, c.shape[1]))
    if zmap.kind == "logarithmic" and _is_capped(zmap):
        return _capped_pairs(c, s_c2, s_cr, s_r2, zmap, ps_factor)
    if zmap.kind != "logarithmic":
        return ln_density(c, s_c2[:, None], s_cr[:, None], s_r2[:, None], zmap, ps_factor)
    arrays = (np.ascontiguousarray(v, dtype=float) for v in (c, s_c2, s_cr, s_r2))
    out, todo = log_map_density(*arrays, float(zmap.log_lambda), math.log(ps_factor),
                                _LN_H_TABLE)
    if todo.any():
        i, j = np.nonzero(todo)
        out[i, j] = _ln_log_map(c[i if c.shape[0] > 1 else 0, j], s_c2[i], s_cr[i], s_r2[i],
                                zmap.log_lambda) + math.log(ps_factor)
    return out


def _capped_pairs(c, s_c2, s_cr, s_r2, zmap: ZetaMap, ps_factor: float):
    """:func:`ln_density_pairs` of a capped (or per-pair) logarithmic map: the compiled
    form (:func:`scan.observables.pbh.ng_capped.capped_pairs`)."""
    n = np.size(s_c2)
    lam, u_min = (np.ascontiguousarray(np.broadcast_to(v, (n,)), dtype=float)
                  for v in (zmap.log_lambda, 1 / np.asarray(zmap.slope_max, dtype=float)))
    arrays = [np.ascontiguousarray(v, dtype=float) for v in (c, s_c2, s_cr, s_r2)]
    return capped_pairs(*arrays, lam, u_min, math.log(ps_factor))


def _is_capped(zmap: ZetaMap) -> bool:
    """A logarithmic map with a slope cap or with parameters per pair (arrays): the
    closed form of :mod:`scan.observables.pbh.ng_capped` (the compiled plain form takes
    one number)."""
    return np.ndim(zmap.log_lambda) > 0 or np.ndim(zmap.slope_max) > 0 \
        or math.isfinite(zmap.slope_max)


def ln_density_bound(y_th, s_c2, s_cr, s_r2, zmap: ZetaMap,
                     ps_factor: float = 1.0, split: float | None = None) -> np.ndarray:
    """An upper bound [1] on ln g(c) over c >= ``y_th`` (a number, or one per pair) per pair
    of variances (arrays of equal shape); the local map with g_NL = 0 and the (capped)
    logarithmic map (parameters one per pair or shared), else +inf (no bound).

    Local map, F' = 1 + p zeta_G (our derivation): on the curve C_G F' = c the joint
    exponent Q = zeta_G^2/sigma_r^2 + (C_G - a zeta_G)^2/t^2 is at least each marginal's,
    max(C_G^2/sigma_c^2, zeta_G^2/sigma_r^2); with u = |F'|, C_G = c/u and |zeta_G| >=
    |u - 1|/|p| its minimum over u is nu^2, nu = c / (sigma_c u*), u* = (1 + sqrt(1 + 4 c
    |p| sigma_r/sigma_c))/2 (where the two cross).  Writing e^{-Q/2} <= e^{-(1-e) nu^2/2}
    e^{-e Q/2} (e = ``BOUND_SPLIT``), 1/|F'| = |C_G|/c, |C_G| e^{-e (C_G - a zeta_G)^2/2t^2}
    <= |a zeta_G| + t/sqrt(e e_1) (e_1 = Euler's e) and integrating over zeta_G,

        g(c) <= e^{-(1-e) nu^2/2} (2 |a| sigma_r^2/e + t sigma_r sqrt(2 pi/(e^2 e_1)))
                / (2 pi sigma_r t c).

    nu^2 may be replaced by any lower bound on Q along the curve; a sharper one keeps the
    correlation: on the near branch (u = F' > 0, zeta_G = (u - 1)/p, b = a/p)
    Q = (u - 1)^2/(p^2 sigma_r^2) + (c/u - b (u - 1))^2/t^2 >= h(u), the second term's
    base clipped at 0; h is convex in u (c/u - b(u - 1) is convex, its positive part too),
    so its minimum is bounded from below by the crossing of two tangents
    (:func:`scan.observables.pbh.ng_closed.near_exponent_bound`); on the far branch (F' =
    -u < 0, |zeta_G| = (u + 1)/|p|) the marginals cross at u = (sqrt(1 + 4 c |p|
    sigma_r/sigma_c) - 1)/2.  nu^2 is the larger of the two bounds.

    Every bound rises and 1/c falls with c, so the value at c = y_th bounds every
    c >= y_th.  The split e is free in (0, 1], and the prefactor is (e-independent)/e:
    the bound's e-dependent part -(1 - e) nu^2/2 - ln e is least at e = 2/nu^2, used per
    pair by default (clipped to (0, 1]; ``split`` fixes it): at nu^2 = 200 it is 6.7
    e-folds below e = 0.1.  tests/test_pbh_ng_stack.py checks it against the computed
    ln g, and that it is below the fixed split's.

    Logarithmic map (capped or not): the same prefactor (its Jacobian u = C_G/c too), and
    nu^2 the least Q over the points the density integrates for c in [y_th, 4/3] (where
    the stacked path evaluates it), :func:`scan.observables.pbh.ng_capped.min_exponent`:
    a bound over the type-I interval only."""
    s_c2, s_cr, s_r2 = (np.asarray(v, dtype=float) for v in (s_c2, s_cr, s_r2))
    if zmap.kind == "logarithmic":
        nu2 = min_exponent(y_th, C_L_MAX, s_c2, s_cr, s_r2,
                           np.asarray(zmap.log_lambda, dtype=float),
                           1.0 / np.asarray(zmap.slope_max, dtype=float))
        return _bound_of(nu2, y_th, s_c2, s_cr, s_r2, split, ps_factor)
    if zmap.kind != "local" or zmap.g_nl != 0:
        return np.full(s_c2.shape, np.inf)
    return _bound_of(_local_min_exponent(y_th, s_c2, s_cr, s_r2, 1.2 * zmap.f_nl), y_th,
                     s_c2, s_cr, s_r2, split, ps_factor)


def _local_min_exponent(y_th, s_c2, s_cr, s_r2, p: float) -> np.ndarray:
    """nu^2 [1] of the local map's bound (see :func:`ln_density_bound`); F' = 1 + p
    zeta_G."""
    a, t2, _ = joint(s_c2, s_cr, s_r2)
    s_c, s_r = np.sqrt(s_c2), np.sqrt(s_r2)
    root = np.sqrt(1 + 4 * y_th * abs(p) * s_r / s_c)
    nu2 = (y_th / (s_c * 0.5 * (1 + root)))**2
    if p != 0 and s_c2.size:
        c = np.broadcast_to(y_th, s_c2.shape)
        near = near_exponent_bound(p, *(np.ascontiguousarray(v, dtype=float).ravel()
                                        for v in (c, a, t2, s_r2))).reshape(s_c2.shape)
        with np.errstate(divide="ignore"):
            far = (y_th / (s_c * 0.5 * (root - 1)))**2
        nu2 = np.maximum(nu2, np.minimum(near, far))
    return nu2


def _bound_of(nu2, y_th, s_c2, s_cr, s_r2, split: float | None, ps_factor: float):
    """The bound [1] of :func:`ln_density_bound` from a lower bound ``nu2`` on the joint
    exponent along the map's curve: -(1 - e) nu^2/2 - ln e + ln(prefactor) (the
    prefactor holds for any curve C_G(zeta_G) with Jacobian |C_G|/c), compiled
    (:func:`scan.observables.pbh.ng_closed.bound_from_exponent`)."""
    arrays = np.broadcast_arrays(*(np.asarray(v, dtype=float)
                                   for v in (nu2, y_th, s_c2, s_cr, s_r2)))
    flat = [np.ascontiguousarray(v).ravel() for v in arrays]
    return bound_from_exponent(*flat, -1.0 if split is None else float(split),
                               math.log(ps_factor)).reshape(arrays[0].shape)


def _ln_log_map(c, s_c2, s_cr, s_r2, lam: float) -> np.ndarray:
    """Closed form of ln g for F = -ln(1 - lambda zeta_G)/lambda (see the module doc).

    With kappa = 1/(lambda^2 sigma_r^2), b = a/lambda, alpha = c + b the exponent is
    Q(u) = kappa (u - 1)^2 + (alpha u - b)^2 / t^2 = A (u - mu)^2 + kappa c^2 / (t^2 A),
    A = kappa + alpha^2/t^2, mu = (kappa + alpha b / t^2) / A, and
    g = e^{-Q_min/2} / (2 pi sqrt(det) |lambda|) int_0^inf u e^{-A (u - mu)^2 / 2} du.
    """
    a, t2, ln_norm = joint(s_c2, s_cr, s_r2)          # per pair: broadcast below
    kappa = 1.0 / (lam * lam * s_r2)
    b = a / lam
    inv_t2 = 1.0 / t2
    alpha = c + b
    A = kappa + alpha * alpha * inv_t2
    mu = (kappa + alpha * (b * inv_t2)) / A
    q_min = (kappa * inv_t2) * (c * c) / A
    return (ln_norm - math.log(abs(lam))) - 0.5 * q_min + _ln_half_moment(A, mu)


def _ln_half_moment(A, mu) -> np.ndarray:
    """ln int_0^inf u exp(-A (u - mu)^2 / 2) du [1], stable for every sign of mu.

    With x = mu sqrt(A/2): for mu >= 0 it is ln(e^{-x^2} + sqrt(pi) x erfc(-x)) - ln A;
    above x = ``_X_FLAT`` = 6, erfc(-x) = 2 and e^{-x^2} / (2 sqrt(pi) x) < 1.1e-17 both
    round away, so x is clipped there inside exp and erfc (whose underflowing arguments
    take libm's slow path, ~20-300 ns each).  For mu < 0 it is
    -x^2 - ln A + ln(1 - sqrt(pi) z erfcx(z)), z = -x."""
    out = np.empty(np.shape(A))
    x = mu * np.sqrt(0.5 * A)
    pos = mu >= 0
    neg = ~pos
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        xp = x[pos]
        xc = np.minimum(xp, _X_FLAT)           # exp and erfc on their fast paths
        out[pos] = np.log(np.exp(-xc * xc) + math.sqrt(math.pi) * xp * special.erfc(-xc)) \
            - np.log(A[pos])
        z = -x[neg]
        h = 1 - math.sqrt(math.pi) * z * special.erfcx(z)
        far = z > _Z_SERIES
        h[far] = _series(z[far])
        out[neg] = -z * z - np.log(A[neg]) + np.log(h)
    return out


def _series(z):
    """1 - sqrt(pi) z erfcx(z) for large z: 1/(2z^2) - 3/(4z^4) + 15/(8z^6) - 105/(16z^8),
    from the asymptotic series of erfc (Abramowitz & Stegun 1964, eq. 7.1.23; equation
    number from memory; checked against scipy's erfcx in tests/test_pbh_ng_stack.py)."""
    r = 1.0 / (z * z)
    return r * (0.5 + r * (-0.75 + r * (1.875 - r * 6.5625)))


def branches(zmap: ZetaMap) -> list[tuple[float, float]]:
    """Intervals of zeta_G between the real roots of F' (the map's monotone branches)."""
    p, q = 1.2 * zmap.f_nl, 1.08 * zmap.g_nl
    if q == 0:
        roots = [] if p == 0 else [-1 / p]
    else:
        disc = p * p - 4 * q
        roots = [] if disc <= 0 else sorted(((-p - math.sqrt(disc)) / (2 * q),
                                             (-p + math.sqrt(disc)) / (2 * q)))
    edges = [-math.inf, *roots, math.inf]
    return list(itertools.pairwise(edges))


_GH_X, _GH_W = np.polynomial.hermite.hermgauss(N_GH)
_LN_H_TABLE = half_moment_table()
_GH_LNW = np.log(_GH_W) + _GH_X**2


def _ln_local(c, s_c2, s_cr, s_r2, zmap: ZetaMap, n_gh: int | None = None) -> np.ndarray:
    """ln g for the local map: adaptive Gauss-Hermite on every branch, summed (``n_gh``
    nodes; default N_GH, or N_GH_CUBIC for g_NL != 0)."""
    if n_gh is None:
        n_gh = N_GH if zmap.g_nl == 0 else N_GH_CUBIC
    a, t2, ln_norm = joint(s_c2, s_cr, s_r2)
    s = np.sqrt(s_r2 * t2 / s_c2)                     # sd of zeta_G given C_G
    start = (s_cr / s_c2) * c                         # mean of zeta_G given C_G = c
    gx, gw = np.polynomial.hermite.hermgauss(n_gh) if n_gh != N_GH else (_GH_X, _GH_W)
    glw = np.log(gw) + gx * gx
    spans = branches(zmap)
    if len(spans) != 2 or zmap.g_nl != 0:
        parts = [_branch(zmap, lo, hi, start, s, c, a, t2, s_r2, gx, glw) for lo, hi in spans]
        return ln_norm + log_sum_exp(np.stack(parts, axis=-1))
    near, far = spans if spans[0][1] > 0 else spans[::-1]     # near: the one holding 0
    total = ln_norm + _branch(zmap, *near, start, s, c, a, t2, s_r2, gx, glw)
    root = near[0] if math.isfinite(near[0]) else near[1]
    need = ~(_ln_far_bound(abs(root), a, t2, s_r2, c) < total - FAR_MARGIN)
    if need.any():                   # the sharper bound along the curve, where it is needed
        idx = np.flatnonzero(need)
        need[idx] = ~(_ln_far_curve_bound(1.2 * zmap.f_nl, a[idx], t2[idx], s_r2[idx], c[idx])
                      < total[idx] - FAR_MARGIN)
    if need.any():
        sub = tuple(v[need] for v in (start, s, c, a, t2, s_r2))
        total[need] = np.logaddexp(total[need],
                                   ln_norm[need] + _branch(zmap, *far, *sub, gx, glw))
    return total


def _ln_far_bound(z0: float, a, t2, s_r2, c):
    """ln of an upper bound [1] on the far branch (|zeta_G| > z0 beyond the root z0 of
    F', g_NL = 0) of g(c).

    With u = 1/|F'| and m = a zeta_G, the conditional density of C_G = -c u times u is
    u e^{-(c u + m)^2 / 2t^2} / (sqrt(2 pi) t) <= (|m| + t) / (sqrt(2 pi) c t); integrated
    over zeta_G ~ N(0, sigma_r^2) beyond z0 this is
    (|a| sigma_r e^{-z0^2 / 2 sigma_r^2} / sqrt(2 pi) + t erfc(z0 / sqrt(2) sigma_r) / 2)
    / (sqrt(2 pi) c t)  (our derivation).
    """
    t = np.sqrt(t2)
    x = z0 / np.sqrt(2 * s_r2)
    with np.errstate(divide="ignore"):
        first = np.log(np.abs(a) * np.sqrt(s_r2) / math.sqrt(2 * math.pi) + 1e-300) - x * x
        second = np.log(0.5 * t * special.erfcx(x)) - x * x
    return np.logaddexp(first, second) - np.log(math.sqrt(2 * math.pi) * c * t)


#: Grid of r / r_0 - 1 (r = |zeta_G|, r_0 = 1/|p| the root of F') for the far-branch bound.
_FAR_GRID = np.concatenate([[0.0], np.geomspace(1e-3, 1e2, 15)])


def _ln_far_curve_bound(p: float, a, t2, s_r2, c):
    """ln of an upper bound [1] on the far branch of g(c) (local map, g_NL = 0, F' = 1 +
    p zeta_G, the branch |F'| = p |zeta_G| - 1 = v > 0 with C_G = -c/v), along the curve.

    With r = |zeta_G| and D = C_G - a zeta_G = a' r - c/(|p| r - 1), a' = a sign(p), the
    integrand (1/v) phi_2(C_G, zeta_G) = (|C_G|/c) phi_2 is split as
    |C_G| e^{-D^2/4t^2} <= a r + sqrt(2/e) t (the sup of x e^{-x^2/4t^2} is sqrt(2/e) t)
    times e^{-D^2/4t^2} e^{-r^2/2 sigma_r^2} / (2 pi sqrt(sigma_r^2 t^2) c).  On each
    interval [r_j, r_{j+1}] of a grid, D lies between min(a' r_j, a' r_{j+1}) -
    c/(|p| r_j - 1) and max(a' r_j, a' r_{j+1}) - c/(|p| r_{j+1} - 1) (each part is
    monotone), which bounds D^2 from below; the rest integrates in closed form
    (int_{r_j} r e^{-r^2/2s} <= s e^{-r_j^2/2s}, int_{r_j} e^{-r^2/2s} = sqrt(pi s/2)
    erfc(r_j/sqrt(2s)), with erfcx(x) <= 2 / (sqrt(pi) (x + sqrt(x^2 + 4/pi))), Abramowitz &
    Stegun 1964, eq. 7.1.13, from memory; cheaper than erfcx itself).  Our derivation;
    tests/test_pbh_ng_stack.py checks it against the far branch's quadrature.  The sum
    over the intervals is bounded by their count times the largest term.  Compiled
    (:func:`scan.observables.pbh.ng_ridge.far_curve_bound`).
    """
    arrays = (np.ascontiguousarray(v, dtype=float) for v in (a, t2, s_r2, c))
    return far_curve_bound(float(p), _FAR_GRID, *arrays)


def _branch(zmap, lo, hi, start, s, c, a, t2, s_r2, gx, glw):
    """ln int over one branch (lo, hi) of exp(psi), compiled
    (:func:`scan.observables.pbh.ng_ridge.branch_integrals`).

    Three damped Newton searches (from the conditional mean and from its mirror image,
    each a sigma_r inside a finite end, and from where C_G = c / F' meets its conditional
    mean a zeta_G -- where the ridge lies when sigma_c^2 << sigma_r^2) find up to two
    ridges; the two highest are kept.  Where they differ, the
    integrand is split by a partition of unity, omega_i = e^{q_i} / (e^{q_1} + e^{q_2})
    with q_i the Laplace (quadratic) approximation at ridge i, and each part gets the
    rule centred on its ridge: the parts sum to the integrand exactly and stay smooth.
    A ridge lower than the other by RIDGE_GAP in psi is left to the higher one's rule (its
    mass is below e^{-50} times the width ratio, <= 4 s over the Newton width).
    """
    arrays = (np.ascontiguousarray(v, dtype=float) for v in (start, s, c, a, t2, s_r2))
    return branch_integrals(float(lo), float(hi), 1.2 * zmap.f_nl, 1.08 * zmap.g_nl,
                            *arrays, gx, glw)


def log_sum_exp(terms: np.ndarray) -> np.ndarray:
    """ln sum exp(terms) over the last axis [1] (-inf where every term is -inf)."""
    top = np.max(terms, axis=-1)
    safe = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return safe + np.log(np.sum(np.exp(terms - safe[..., None]), axis=-1))
