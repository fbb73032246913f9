"""ln g of the local map with g_NL = 0 from a table in three reduced variables: the
stacked path's density (:mod:`scan.observables.pbh.ng_stack`).

With x = C_G / sigma_c and z = zeta_G / sigma_r (unit normals of correlation rho =
sigma_cr^2 / (sigma_c sigma_r)) and F' = 1 + (6/5) f_NL zeta_G, the linear compaction is
C_l / sigma_c = x (1 + b z), b = (6/5) f_NL sigma_r (the local map's constant -<zeta_G^2>
does not enter F').  So g(y) = h(y / sigma_c; b, rho) / sigma_c with

    h(t; b, rho) = int dz e^{psi(z)} / (2 pi w),  w = sqrt(1 - rho^2),
    psi(z) = -z^2/2 - (t/(1 + b z) - rho z)^2 / (2 w^2) - ln|1 + b z|

(the density of :mod:`scan.observables.pbh.ng_density`, Ferrante, Franciolini, Iovino &
Urbano 2023, arXiv:2211.01728, in these variables; our reduction).  ln h is split as

    ln h = -ln(2 pi w) + psi(z*) + (1/2) ln(2 pi / |psi''(z*)|) + G(s, rho, ln t) / t^2,

the Laplace value at the near branch's ridge z* (damped Newton, :func:`_laplace`; it carries
the hundreds in ln h exactly) plus a remainder that is smooth and small (measured at 2e4
random points of the domain: |G| / t^2 <= 7.9e-3, |G| <= 1.2).  On the near branch psi has
one ridge in the domain (from the conditional mean rho t and from the curve rho z (1 + b
z) = t Newton reached the same ridge at 2e5 random points, measured); z*/t is tabulated
beside G as the seed (interpolated trilinearly: measured within 0.01 Laplace widths of
the ridge on the benchmark's pairs and at 99 % of 5e4 random points of the domain within
0.014), so that two full Newton steps, the second below 1e-4 widths, end the search
(:func:`_two_newton`; the damped search where they do not: 1e-4 of random points with rho
in [0.85, 0.9], seeds up to 0.46 widths off).  G = t^2 (ln h - Laplace), nearly a function of v = b t and rho alone
(measured: G changes by < 1e-3 relative between t = 10 and 160), is tabulated on a uniform
grid in (s = asinh(v / ``V0``), rho, ln t) from the exact adaptive Gauss-Hermite density with
32 nodes per ridge (within 1.4e-7 of scipy quad, tests/test_pbh_ng_stack.py) and
interpolated by cubic Lagrange polynomials in each variable (4^3 nodes).  The interpolation
error is measured against the exact density at random points of the domain
(tests/test_pbh_ng_table.py), and elements outside the domain (``T_MIN`` <= t <=
``T_MAX``, |b| <= ``B_MAX``, ``RHO_MIN`` <= rho <= ``RHO_MAX``) or whose ridge search fails
take the exact path.  Error: ``TABLE_ERROR`` = 2e-5 in ln g against the 32-node density
(itself within 1.4e-7 of quad), below the 5e-5 of the 16-node density it replaces; it is
largest where, for b < 0, the ridge leaves the curve x = z near v = -1/(4 rho), a
structure that sharpens as rho -> 1 and t -> T_MIN (hence ``RHO_MAX`` = 0.9: up to 0.95
the measured error was 2.1e-5).  On the benchmark's live pairs (tests/bench, f_NL = +-1,
t in [9, 71], rho in [0.40, 0.67]) the table is within 3.9e-7 of the 32-node density,
where the 16-node one was 1.1e-5 off; the stack then meets the per-spectrum path within
7.8e-9 (f_NL = 1) and 8.4e-7 (f_NL = -1, the node interpolation, as before) in f(M)
(measured).  The table holds no spectrum or f_NL: it is built once per process
(:func:`density_table`, ~1 s) and serves every plan.  Cost (tests/bench/
bench_pbh_nongaussian.py): ~0.1 us per element in passes the compiler vectorises
(lookup, Newton steps), against ~0.2 us for one branchy loop per element with both
values tricubic (measured side by side on the benchmark's 22k elements: 0.53x).

Units: all quantities [1].
"""
from __future__ import annotations

import functools
import math

import numpy as np
from numba import njit

from scan.observables.pbh.ng_density import _ln_local
from scan.observables.pbh.ng_ridge import FASTMATH
from scan.observables.pbh.vector_math import NORMAL_MAX, NORMAL_MIN, log_in_place
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of

#: Domain of the table in t = C_l / sigma_c, |b| and rho.
T_MIN, T_MAX = 4.0, 400.0
B_MAX = 0.2
RHO_MIN, RHO_MAX = 0.0, 0.9
#: Scale of v = b t in s = asinh(v / V0) (the type-I structure for b < 0 sits near
#: v = -1 / (4 rho), where the ridge leaves the curve x = z).
V0 = 0.25
#: Grid steps in s, rho and ln t.
H_S, H_RHO, H_LNT = 0.05, 0.025, 0.35
#: Stencil nodes with |b| above this are not computed (NaN: such elements go exact).
B_GRID = 2.5 * B_MAX
#: Bound on |ln h(table) - ln h(exact, 32 nodes)| over the domain [1]: measured 8.0e-6 at
#: most over 24000 random points (6 x 4000: the whole domain, rho in [0.8, 0.9], t in
#: [T_MIN, 2 T_MIN]; the largest at the b < 0 structure v = b t ~ -0.3 with rho -> 0.9
#: and t -> T_MIN), 2.1e-5 with rho up to 0.95 (hence RHO_MAX = 0.9); 2.5x the measured
#: maximum as margin for the points between samples (common practice).  The a-priori
#: estimate of the construction, (3/128) |4th difference of G| per axis / t^2 (the cubic
#: Lagrange remainder), is <= 3.7e-6 at every node of the domain (tests/test_pbh_ng_table.py).
TABLE_ERROR = 2e-5
#: Gauss-Hermite nodes per ridge of the exact density the table is built from.
N_GH_TABLE = 32
#: Newton steps of the ridge search (at most), and the squared step in Laplace widths
#: below which it ends: after a step of delta <= 1e-4 widths Newton's error is
#: ~ delta^2 psi'''/psi'' ~ 1e-8 widths (quadratic convergence, psi analytic on the
#: branch), so psi(z*) is off by ~1e-16 / 2.
N_STEPS = 60
STEP_TOL = 1e-8
_HALF_LN_2PI = 0.5 * math.log(2.0 * math.pi)


def _axis(lo: float, hi: float, h: float) -> np.ndarray:
    """Uniform nodes covering [lo, hi] with one node beyond each end (cubic stencils)."""
    n = math.ceil((hi - lo) / h - 1e-9)
    return lo - h + h * np.arange(n + 3)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _psi(z, t, b, rho, w2):
    """psi at z (module doc)."""
    quadratic, f = _psi_quadratic(z, t, b, rho, w2)
    return quadratic - math.log(abs(f))


@njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always")
def _psi_quadratic(z, t, b, rho, w2):
    """(psi + ln|f|, f) at z, f = 1 + b z: psi without its logarithm (for callers that
    take it in a vectorised pass)."""
    f = 1.0 + b * z
    h = t / f - rho * z
    return -0.5 * z * z - 0.5 * h * h / w2, f


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _slopes(z, t, b, rho, w2):
    """psi' and psi'' at z."""
    r = 1.0 / (1.0 + b * z)
    h = t * r - rho * z
    h1 = -t * b * r * r - rho
    h2 = 2.0 * t * b * b * r * r * r
    return -z - h * h1 / w2 - b * r, -1.0 - (h1 * h1 + h * h2) / w2 + b * b * r * r


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _inside(z, b):
    """Whether z is on the near branch (1 + b z > 0)."""
    return 1.0 + b * z > 0.0


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _newton(z, t, b, rho, w2):
    """Damped Newton ascent of psi from z on the near branch: (z*, psi'', converged).

    A step that would leave the branch, or one longer than a Laplace width 1/sqrt(-psi'')
    that would lower psi, is halved (at most 60 times); where psi'' >= 0 the step is one
    unit of z uphill.  Converged after a step below 1e-4 Laplace widths (``STEP_TOL``).
    """
    d1, d2 = _slopes(z, t, b, rho, w2)
    for _ in range(N_STEPS):
        local = d2 < 0.0 and d1 * d1 <= -d2           # step within one Laplace width
        new = z + (-d1 / d2 if d2 < 0.0 else math.copysign(1.0, d1))
        if not local:
            psi = _psi(z, t, b, rho, w2)
            for _ in range(60):
                if _inside(new, b) and _psi(new, t, b, rho, w2) >= psi:
                    break
                new = 0.5 * (z + new)
        if not _inside(new, b):
            return z, d2, False
        done = local and d1 * d1 <= STEP_TOL * -d2   # step below 1e-4 Laplace widths
        z = new
        d1, d2 = _slopes(z, t, b, rho, w2)
        if done:
            return z, d2, d2 < 0.0
    return z, d2, False


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _laplace(t, b, rho, z):
    """(-ln(2 pi w) + psi(z*) + ln(2 pi / |psi''(z*)|) / 2, z*, converged) for the ridge
    z* reached from the seed z (moved onto the near branch if it is off it)."""
    w2 = 1.0 - rho * rho
    if not _inside(z, b):
        z = -0.5 / b
    z, d2, ok = _newton(z, t, b, rho, w2)
    value = _psi(z, t, b, rho, w2) - _HALF_LN_2PI - 0.5 * math.log(-d2 * w2) if ok \
        else math.nan                   # -ln(2 pi w) + psi + ln(2 pi / -psi'') / 2
    return value, z, ok


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _laplace_many(t, b, rho):
    """:func:`_laplace` from the conditional mean rho t: (values, ridges); NaN where the
    search fails (on 2e5 random points of the domain it reached the same ridge as a
    second seed on the curve rho z (1 + b z) = t, measured)."""
    out = np.empty((t.size, 2))
    for i in range(t.size):
        value, z, _ = _laplace(t[i], b[i], rho[i], rho[i] * t[i])
        out[i, 0], out[i, 1] = value, z
    return out


@njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always")
def _stencil(x, x0, h, n):
    """Index of the first of 4 stencil nodes at x and the cubic Lagrange weights; x
    finite (int() of NaN is undefined: the caller passes in-domain values only)."""
    u = (x - x0) / h
    i = min(max(int(u), 1), n - 3)        # = floor(u) clipped: u < 1 gives 1 either way
    f = u - i
    return (i - 1, -f * (f - 1.0) * (f - 2.0) / 6.0, (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0,
            -(f + 1.0) * f * (f - 2.0) / 2.0, (f + 1.0) * f * (f - 1.0) / 6.0)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _lookup(g_table, z_table, origin, s, rho, lnt, g, zt):
    """G by its tricubic interpolant (axes s, rho, ln t) and the ridge seed z*/t by the
    trilinear one (it only seeds Newton: a seed eps Laplace widths off leaves a second
    step of ~K eps^2, K <= 0.11 measured, within the 1e-4 rule for eps up to ~0.03, and
    the damped search takes the rest: module doc) at the points (s, rho, ln t), into
    ``g`` and ``zt``: a loop without calls or data-dependent branches, unsigned offsets
    (no negative-index wrap), which the compiler vectorises across points (gathers)."""
    gf, zf = g_table.ravel(), z_table.ravel()
    n_s, n_rho, n_t = g_table.shape[0], g_table.shape[1], g_table.shape[2]
    for e in range(s.size):
        i, a0, a1, a2, a3 = _stencil(s[e], origin[0], H_S, n_s)
        j, c0, c1, c2, c3 = _stencil(rho[e], origin[1], H_RHO, n_rho)
        k, l0, l1, l2, l3 = _stencil(lnt[e], origin[2], H_LNT, n_t)
        first = np.uint64((i * n_rho + j) * n_t + k)
        ge = 0.0
        for a in range(4):
            wa = a0 if a == 0 else (a1 if a == 1 else (a2 if a == 2 else a3))
            for c in range(4):
                wac = wa * (c0 if c == 0 else (c1 if c == 1 else (c2 if c == 2 else c3)))
                o = first + np.uint64((a * n_rho + c) * n_t)
                ge += wac * (l0 * gf[o] + l1 * gf[o + np.uint64(1)]
                             + l2 * gf[o + np.uint64(2)] + l3 * gf[o + np.uint64(3)])
        g[e] = ge
        u_s, u_r, u_t = ((s[e] - origin[0]) / H_S - (i + 1), (rho[e] - origin[1]) / H_RHO
                         - (j + 1), (lnt[e] - origin[2]) / H_LNT - (k + 1))
        o = first + np.uint64((n_rho + 1) * n_t + 1)       # the cell's corner (i+1, j+1, k+1)
        d_s, d_r, one = np.uint64(n_rho * n_t), np.uint64(n_t), np.uint64(1)
        z00 = zf[o] + u_t * (zf[o + one] - zf[o])
        z01 = zf[o + d_r] + u_t * (zf[o + d_r + one] - zf[o + d_r])
        z10 = zf[o + d_s] + u_t * (zf[o + d_s + one] - zf[o + d_s])
        z11 = zf[o + d_s + d_r] + u_t * (zf[o + d_s + d_r + one] - zf[o + d_s + d_r])
        z0, z1 = z00 + u_r * (z01 - z00), z10 + u_r * (z11 - z10)
        zt[e] = z0 + u_s * (z1 - z0)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always")
def _slopes_iw2(z, t, b, rho, iw2):
    """psi' and psi'' as :func:`_slopes`, with iw2 = 1 / (1 - rho^2) (no division by it)."""
    r = 1.0 / (1.0 + b * z)
    h = t * r - rho * z
    h1 = -t * b * r * r - rho
    return (-z - h * h1 * iw2 - b * r,
            -1.0 - (h1 * h1 + 2.0 * h * t * b * b * r * r * r) * iw2 + b * b * r * r)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _two_newton(z, t, b, rho, ok):
    """Two full Newton steps of psi from each z (in place; a loop without calls, which the
    compiler vectorises).  ``ok`` where both steps stayed within one Laplace width with
    psi'' < 0, the second was below 1e-4 widths (the stopping rule of :func:`_newton`)
    and z* is on the near branch: then z* is the ridge the damped search reaches (one
    ridge on the branch, module doc), to the same stopping rule."""
    for e in range(z.size):
        iw2 = 1.0 / (1.0 - rho[e] * rho[e])
        d1, d2 = _slopes_iw2(z[e], t[e], b[e], rho[e], iw2)
        good = (d2 < 0.0) & (d1 * d1 <= -d2)
        ze = z[e] - d1 / d2
        d1, d2 = _slopes_iw2(ze, t[e], b[e], rho[e], iw2)
        good &= (d2 < 0.0) & (d1 * d1 <= STEP_TOL * -d2)
        z[e] = ze - d1 / d2
        ok[e] = good & (1.0 + b[e] * z[e] > 0.0)


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def tabulated_ln_h(g_table, z_table, origin, t, b, rho):
    """ln h(t; b, rho) [1] per element from the table (:func:`split_table`); NaN outside
    the domain or where the ridge search fails (the caller takes the exact path).

    In passes over the elements (measured ~2x faster than one loop of lookup and damped
    search per element): the coordinates (asinh, log); the table's G and ridge seed
    (:func:`_lookup`); two Newton steps from the seed (:func:`_two_newton`); the Laplace
    value there, or the damped search (:func:`_laplace`) from the same seed where those
    steps did not meet its stopping rule.  The logarithms (of the coordinates' asinh and
    ln t, and the Laplace value's ln|1 + b z*| + ln(-psi'' w^2)/2 as one) are taken in
    vectorised passes (:func:`~scan.observables.pbh.vector_math.log_in_place`) instead of
    libm's per element."""
    n = t.size
    inside = np.empty(n, dtype=np.bool_)
    s, rho_in, lnt = np.empty(n), np.empty(n), np.empty(n)
    sign = np.empty(n)
    for e in range(n):
        inside[e] = T_MIN <= t[e] <= T_MAX and abs(b[e]) <= B_MAX \
            and RHO_MIN <= rho[e] <= RHO_MAX
        te, be, re = (t[e], b[e], rho[e]) if inside[e] else (T_MIN, 0.0, RHO_MIN)
        x = be * te / V0                # asinh x = sign(x) ln(|x| + sqrt(x^2 + 1))
        sign[e] = -1.0 if x < 0.0 else 1.0
        s[e], rho_in[e], lnt[e] = abs(x) + math.sqrt(x * x + 1.0), re, te
    log_in_place(s)                     # arguments in [1, 321] and [4, 400]: normal
    log_in_place(lnt)
    for e in range(n):
        s[e] *= sign[e]
    g, z, ok = np.empty(n), np.empty(n), np.empty(n, dtype=np.bool_)
    _lookup(g_table, z_table, origin, s, rho_in, lnt, g, z)
    seed = z * t
    z[:] = seed
    _two_newton(z, t, b, rho, ok)
    out, arg = np.empty(n), np.ones(n)
    for e in range(n):
        if not inside[e]:
            out[e] = math.nan
            continue
        if ok[e]:                       # psi - ln(2 pi)/2 - ln(-psi'' w^2)/2, the two
            w2 = 1.0 - rho[e] * rho[e]  # logarithms as one: -ln(f^2 (-psi'') w^2)/2
            quadratic, f = _psi_quadratic(z[e], t[e], b[e], rho[e], w2)
            value = quadratic - _HALF_LN_2PI
            product = f * f * (-_slopes(z[e], t[e], b[e], rho[e], w2)[1] * w2)
            if NORMAL_MIN <= product <= NORMAL_MAX:
                arg[e] = product
            else:                       # outside log_in_place's range (NaN stays)
                value -= 0.5 * math.log(product)
        else:
            value, _, ok[e] = _laplace(t[e], b[e], rho[e], seed[e])
        out[e] = value + g[e] / (t[e] * t[e]) if ok[e] else math.nan
    log_in_place(arg)
    for e in range(n):
        out[e] -= 0.5 * arg[e]
    return out


def exact_ln_h(t, b, rho, n_gh: int = N_GH_TABLE) -> np.ndarray:
    """ln h(t; b, rho) [1] by the exact path (:func:`~scan.observables.pbh.ng_density.
    _ln_local` with sigma_c = 1, sigma_r = |b|, (6/5) f_NL = sign b); b = 0: Gaussian."""
    t, b, rho = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (t, b, rho)))
    out = -0.5 * np.log(2 * math.pi) - 0.5 * t * t
    for sign in (1.0, -1.0):
        on = b * sign > 0
        if on.any():
            sb = np.abs(b[on])
            out[on] = _ln_local(t[on], np.ones(sb.size), rho[on] * sb, sb * sb,
                                zeta_map_of("local", f_nl=sign / 1.2), n_gh=n_gh)
    return out


@functools.lru_cache(maxsize=1)
def density_table() -> tuple[np.ndarray, np.ndarray]:
    """The table of G and z*/t (axes s, rho, ln t, value) and its origin (s_0, rho_0, ln t_0), built from
    the exact density (module doc); NaN where |b| > ``B_GRID``."""
    s_max = math.asinh(B_MAX * T_MAX / V0)
    axes = (_axis(-s_max, s_max, H_S), _axis(RHO_MIN, RHO_MAX, H_RHO),
            _axis(math.log(T_MIN), math.log(T_MAX), H_LNT))
    s, rho, lnt = (g.ravel() for g in np.meshgrid(*axes, indexing="ij"))
    t = np.exp(lnt)
    b = V0 * np.sinh(s) / t
    table = np.full((s.size, 2), np.nan)
    on = (np.abs(b) <= B_GRID) & (rho < 1.0)
    laplace = _laplace_many(t[on], b[on], rho[on])
    table[on, 0] = (exact_ln_h(t[on], b[on], rho[on]) - laplace[:, 0]) * t[on] ** 2
    table[on, 1] = laplace[:, 1] / t[on]
    table[b == 0, 0] = 0.0                # Gaussian: the Laplace value is exact
    return table.reshape(tuple(a.size for a in axes) + (2,)), np.array([a[0] for a in axes])


@functools.lru_cache(maxsize=1)
def split_table() -> tuple[np.ndarray, np.ndarray]:
    """G and z*/t of :func:`density_table`, each contiguous (axes s, rho, ln t)."""
    table = density_table()[0]
    return np.ascontiguousarray(table[..., 0]), np.ascontiguousarray(table[..., 1])


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _tabulated_pairs(g_table, z_table, origin, c, s_c, b, rho):
    """ln h(c / s_c; b, rho) - ln s_c [1], shape (n, n_y), for the pairs (s_c, b, rho)
    (n,) at the nodes ``c`` ((1, n_y) shared or (n, n_y)): :func:`tabulated_ln_h` over
    the pairs' elements, laid out here rather than by numpy broadcasts."""
    n, n_y = s_c.size, c.shape[1]
    t, b_e, rho_e = np.empty(n * n_y), np.empty(n * n_y), np.empty(n * n_y)
    for p in range(n):
        row = 0 if c.shape[0] == 1 else p
        for q in range(n_y):
            t[p * n_y + q] = c[row, q] / s_c[p]
            b_e[p * n_y + q], rho_e[p * n_y + q] = b[p], rho[p]
    out = tabulated_ln_h(g_table, z_table, origin, t, b_e, rho_e).reshape((n, n_y))
    for p in range(n):
        ln_s_c = math.log(s_c[p])
        for q in range(n_y):
            out[p, q] -= ln_s_c
    return out


def ln_density_tabulated(c, s_c2, s_cr, s_r2, zmap: ZetaMap,
                         ps_factor: float = 1.0) -> np.ndarray:
    """ln g [1] at the nodes ``c`` ((n_y,) shared or (n, n_y)) for every pair of variances
    (n,) of a local map with g_NL = 0, shape (n, n_y): the table where it holds, the exact
    path (:func:`~scan.observables.pbh.ng_density._ln_local`) elsewhere."""
    c = np.ascontiguousarray(np.atleast_2d(np.asarray(c, dtype=float)))
    shape = (np.size(s_c2), c.shape[1])
    s_c, s_r = np.sqrt(s_c2), np.sqrt(s_r2)
    b = np.ascontiguousarray(np.broadcast_to(1.2 * zmap.f_nl * s_r, shape[:1]), dtype=float)
    out = _tabulated_pairs(*split_table(), density_table()[1], c, s_c, b,
                           s_cr / (s_c * s_r))
    bad = np.isnan(out)
    if bad.any():
        i, j = np.nonzero(bad)
        out[i, j] = _ln_local(np.broadcast_to(c, shape)[i, j], s_c2[i], s_cr[i], s_r2[i],
                              zmap)
    out += math.log(ps_factor)
    return out
