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
beside G as the seed, so that one Newton step (and the check of the next) ends the
search.  G = t^2 (ln h - Laplace), nearly a function of v = b t and rho alone
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
(:func:`density_table`, ~1 s) and serves every plan.

Units: all quantities [1].
"""
from __future__ import annotations

import functools
import math

import numpy as np
from numba import njit

from scan.observables.pbh.ng_density import _ln_local
from scan.observables.pbh.ng_ridge import FASTMATH
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
    f = 1.0 + b * z
    h = t / f - rho * z
    return -0.5 * z * z - 0.5 * h * h / w2 - math.log(abs(f))


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


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _weights(x, x0, h, n, w):
    """Index of the first of 4 stencil nodes at x; the cubic Lagrange weights into w."""
    i = min(max(math.floor((x - x0) / h), 1), n - 3)
    f = (x - x0) / h - i
    w[0] = -f * (f - 1.0) * (f - 2.0) / 6.0
    w[1] = (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0
    w[2] = -(f + 1.0) * f * (f - 2.0) / 2.0
    w[3] = (f + 1.0) * f * (f - 1.0) / 6.0
    return i - 1


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def _lookup(flat, shape, origin, s, rho, lnt, w):
    """The tricubic interpolants of the table (``flat``: axes s, rho, ln t, value; value:
    G and z*/t) at one point; ``w`` (3, 4) holds the weights."""
    i = _weights(s, origin[0], H_S, shape[0], w[0])
    j = _weights(rho, origin[1], H_RHO, shape[1], w[1])
    k = _weights(lnt, origin[2], H_LNT, shape[2], w[2])
    l0, l1, l2, l3 = w[2, 0], w[2, 1], w[2, 2], w[2, 3]
    row = 2 * shape[2]
    g, z = 0.0, 0.0
    for a in range(4):
        for c in range(4):
            o = ((i + a) * shape[1] + j + c) * row + 2 * k
            wac = w[0, a] * w[1, c]
            g += wac * (l0 * flat[o] + l1 * flat[o + 2] + l2 * flat[o + 4] + l3 * flat[o + 6])
            z += wac * (l0 * flat[o + 1] + l1 * flat[o + 3] + l2 * flat[o + 5]
                        + l3 * flat[o + 7])
    return g, z


@njit(cache=True, error_model="numpy", fastmath=FASTMATH)
def tabulated_ln_h(table, origin, t, b, rho):
    """ln h(t; b, rho) [1] per element from ``table`` (:func:`density_table`); NaN outside
    the domain or where the ridge search fails (the caller takes the exact path)."""
    out = np.empty(t.size)
    flat = table.ravel()
    shape = table.shape
    w = np.empty((3, 4))
    for i in range(t.size):
        if not (T_MIN <= t[i] <= T_MAX and abs(b[i]) <= B_MAX
                and RHO_MIN <= rho[i] <= RHO_MAX):
            out[i] = math.nan
            continue
        g, z = _lookup(flat, shape, origin, math.asinh(b[i] * t[i] / V0), rho[i],
                       math.log(t[i]), w)
        value, _, ok = _laplace(t[i], b[i], rho[i], z * t[i])
        out[i] = value + g / (t[i] * t[i]) if ok else math.nan
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


def ln_density_tabulated(c, s_c2, s_cr, s_r2, zmap: ZetaMap,
                         ps_factor: float = 1.0) -> np.ndarray:
    """ln g [1] at the nodes ``c`` ((n_y,) shared or (n, n_y)) for every pair of variances
    (n,) of a local map with g_NL = 0, shape (n, n_y): the table where it holds, the exact
    path (:func:`~scan.observables.pbh.ng_density._ln_local`) elsewhere."""
    c = np.atleast_2d(np.asarray(c, dtype=float))
    shape = (np.size(s_c2), c.shape[1])
    s_c = np.sqrt(s_c2)
    t = (c / s_c[:, None]).ravel()
    b = np.broadcast_to((1.2 * zmap.f_nl * np.sqrt(s_r2))[:, None], shape).ravel()
    rho = np.broadcast_to((s_cr / (s_c * np.sqrt(s_r2)))[:, None], shape).ravel()
    table, origin = density_table()
    out = tabulated_ln_h(table, origin, np.ascontiguousarray(t), np.ascontiguousarray(b),
                         np.ascontiguousarray(rho))
    out = out.reshape(shape) - np.log(s_c)[:, None]
    bad = np.isnan(out)
    if bad.any():
        i, j = np.nonzero(bad)
        out[i, j] = _ln_local(np.broadcast_to(c, shape)[i, j], s_c2[i], s_cr[i], s_r2[i],
                              zmap)
    return out + math.log(ps_factor)
