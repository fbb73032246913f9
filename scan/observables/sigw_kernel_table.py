"""The tabulated QCD-era induced-GW kernel (``[observables] sigw_kernel = "qcd-fluid"``).

:mod:`scan.observables.sigw_fluid` integrates the kernel K_k(u, v) on the perfect-fluid
background of the Saikawa & Shirai 2018 g_*(T) table (w and c_s^2 soften across the QCD
crossover; Abe, Tada & Ueda 2021, arXiv:2010.06193) at ~20-50 ms a pair -- far too slow
for a quadrature plan's 10^4-10^6 nodes.  ``data/sigw_kernel_qcd.npz`` (written by
``tests/tools/make_fluid_kernel_table.py``, which its ``provenance`` entry names with the
g_* table, eta_end and grid) holds, on rows of re-entry temperature T_c and on (z, s)
grids, z = ln|t - (sqrt(3) - 1)| on either side of the RD log resonance
(u, v = (t +- s + 1)/2), the difference D = K_fluid(T_c) - K_fluid(radiation) of two
integrations with the same method, and K_fluid(radiation) itself.  At a node

* |t - t_res| >= :data:`DELTA_SWITCH` and t <= t_max: K = K_RD + D (K_RD the closed form
  of :func:`scan.observables.sigw_nodes.kernel_value`; the integrator's own RD error,
  ~1e-5, cancels in D);
* near the resonance and beyond t_max: K = K_RD (1 + D/K_fluid(radiation)), the ratio of
  the two integrations times the closed form (both integrations saturate the log
  resonance at |t - t_res| ~ 1/eta_end in the same way; closer than the table's
  ``delta_min`` and beyond t_max the ratio is held at the table's edge);
* T_c outside the table's rows: K = K_RD (the plan's note says so).

Interpolation: cubic Lagrange over the 4 nearest T_c rows (uniform in ln T_c), then a
bicubic interpolating spline in (z, s) (evaluated by a compiled de Boor sum, equal to
scipy's to rounding).

The shipped tables (:data:`TABLES`; eta_end = 800, 17 s-points, 32 t-points below the
resonance, 1e-3 <= |t - t_res|, t <= 20):

* ``sigw_kernel_qcd.npz``: 60 rows T_c = 3 MeV - 20 GeV (step 0.15 in ln T_c), 48 t-points
  above the resonance; 1219 s CPU on one core; applied for T_c = 3 MeV - 1.5 GeV;
* ``sigw_kernel_qcd_high.npz``: 19 rows T_c = 1.5 - 6 GeV (step 0.077), 96 t-points above;
  673 s CPU; applied for T_c = 1.5 - 6 GeV.

Together: re-entry at 3 MeV - 6 GeV, f ~ 0.054 - 150 nHz.  Above ~2 GeV the late
resonance band (where c_s (u + v) = 1 is crossed late in the crossover) narrows as T_c
grows, which the first grid does not resolve (sum|dK|/sum|K| 6.8e-3 at 2-4 GeV, 0.11 at
8-20 GeV) and the finer one does to 6 GeV.
Edges (tests/tools/fluid_kernel_table_effect.py): below 3 MeV the background is w = c_s^2
= 1/3 by construction (as :mod:`scan.observables.pbh.qcd`), and the first rows differ from
radiation by sum|D|/sum|K| = 4.4e-3 -- the integrator's superhorizon start inside the
crossover (a_start 1e-3 -> 1e-5 moves it by a few 1e-3), comparable to the table error.
Above 6 GeV the kernel still differs from radiation at O(1) (sum|D|/sum|K| = 0.88 on the
6 GeV row, 0.80 on the 20 GeV one: a late dip of c_s breaks the coherence of the
resonance), so the switch to the RD kernel there is an O(1) step, which the printed note
says.
Interpolation error, measured against direct :func:`scan.observables.sigw_fluid.fluid_kernel`
at 1280 seeded off-grid points over the applied range (tests/tools/fluid_kernel_table_error.py):
sum|dK|/sum|K| = 2.8e-4 below 1 GeV, 2.3e-3 above; |dK| <= 5.2e-2 (|K| + 0.01) for
|t - t_res| >= 0.2 (99 % of points below 1e-2), 7.8e-2 closer.  Within |t - t_res| ~ 0.1
the direct kernels carry the finite eta_end's ripples (a few per cent, period ~0.01 in
t), which the grid does not follow; integrated over the resonance they average out.
On Omega_GW of log-normal peaks (widths 0.5, 0.2; small node set, same construction):
<= 2e-3 at 10 and 100 nHz.  The plan's nodes (placed for the RD kernel) integrate the
softened kernel of a log-normal peak (width 0.5, table step 0.05 in ln k) to 2e-4 at
10 nHz and 1e-2 at 100 nHz, where its features are sharper (against a converged node
set; tests/test_sigw_kernel_table.py).
Units: T [GeV], k [Mpc^-1], u, v, t, s, kernels [1].
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
from numba import njit
from scipy.interpolate import RectBivariateSpline

from scan.observables import cosmo
from scan.observables.sigw_nodes import T_RESONANCE

#: Names of ``[observables] sigw_kernel``: today's closed-form RD kernel, the table's.
SIGW_KERNELS: tuple[str, ...] = ("radiation", "qcd-fluid")
#: The shipped tables and the re-entry temperatures each is applied at [GeV] (a later
#: entry wins where ranges meet; module docstring).
DATA: Path = Path(__file__).parent / "data"
TABLES: dict[str, tuple[float, float]] = {"sigw_kernel_qcd.npz": (0.003, 1.5),
                                          "sigw_kernel_qcd_high.npz": (1.5, 6.0)}
TABLE_PATH: Path = DATA / "sigw_kernel_qcd.npz"
#: Half-width in t around the RD resonance where the table's ratio (not difference) is used.
DELTA_SWITCH: float = 0.2
#: The g_*(T) table (``[observables] gstar``) the kernel table was computed on.
TABLE_GSTAR: str = "saikawa-shirai-2018"
#: Measured interpolation error (see the module docstring), printed with the result.
INTERPOLATION_NOTE: str = ("table error ~0.2 % on Omega_GW of smooth peaks; above the "
                           "table the crossover still changes the kernel by O(1) near its "
                           "resonance (not tabulated)")


@dataclass(frozen=True, eq=False)
class KernelTable:
    """The shipped table (field names as in the ``.npz``; see the module docstring)."""

    ln_T_c: np.ndarray
    z_left: np.ndarray
    z_right: np.ndarray
    s: np.ndarray
    d_left: np.ndarray
    d_right: np.ndarray
    rd_left: np.ndarray
    rd_right: np.ndarray
    provenance: dict
    applied: tuple[float, float] = (0.0, math.inf)

    @property
    def T_range(self) -> tuple[float, float]:
        """Re-entry temperatures the table is applied at [GeV]: its rows within ``applied``."""
        return (max(math.exp(self.ln_T_c[0]), self.applied[0]),
                min(math.exp(self.ln_T_c[-1]), self.applied[1]))

    @property
    def t_max(self) -> float:
        """Largest t of the rows [1]."""
        return T_RESONANCE + math.exp(self.z_right[-1])


@lru_cache(maxsize=4)
def load_kernel_table(path: str | Path = TABLE_PATH,
                      applied: tuple[float, float] = (0.0, math.inf)) -> KernelTable:
    """Read a kernel table written by ``tests/tools/make_fluid_kernel_table.py``."""
    with np.load(path, allow_pickle=False) as data:
        arrays = {name: np.array(data[name]) for name in data.files if name != "provenance"}
        provenance = json.loads(str(data["provenance"]))
    return KernelTable(provenance=provenance, applied=applied, **arrays)


def load_kernel_tables() -> tuple[KernelTable, ...]:
    """The shipped tables with their applied ranges (:data:`TABLES`)."""
    return tuple(load_kernel_table(DATA / name, applied) for name, applied in TABLES.items())


def tabulated_kernel(T_c_GeV: float, t, s, k_rd,
                     tables: tuple[KernelTable, ...] | None = None) -> np.ndarray:
    """The kernel [1] at nodes (t, s) of an output k re-entering at ``T_c_GeV`` [GeV]:
    from the last of ``tables`` (default: the shipped ones) applied at T_c, else ``k_rd``
    (the closed-form RD kernel at the nodes).  Arguments as :func:`kernel_at`."""
    for table in reversed(tables or load_kernel_tables()):
        lo, hi = table.T_range
        if lo <= T_c_GeV <= hi:
            return kernel_at(table, T_c_GeV, t, s, k_rd)
    return np.array(k_rd, dtype=float)


def _spline(z: np.ndarray, s: np.ndarray, values: np.ndarray) -> RectBivariateSpline:
    """Interpolating bicubic spline in (z, s)."""
    return RectBivariateSpline(z, s, values, kx=3, ky=3, s=0)


@njit(cache=True)
def _cubic_basis(knots, x: float, out, left, right) -> int:
    """Span i (knots[i] <= x < knots[i+1], held inside) and the 4 cubic B-spline values
    there (Cox-de Boor recursion, de Boor 1978), written to ``out`` (``left``, ``right``:
    scratch of length 4)."""
    last = knots.size - 5
    if x >= knots[last + 1]:
        i = last
    else:
        lo, hi = 3, last + 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if x < knots[mid]:
                hi = mid
            else:
                lo = mid
        i = lo
    out[0] = 1.0
    for j in range(1, 4):
        left[j] = x - knots[i + 1 - j]
        right[j] = knots[i + j] - x
        saved = 0.0
        for r in range(j):
            temp = out[r] / (right[r + 1] + left[j - r])
            out[r] = saved + right[r + 1] * temp
            saved = left[j - r] * temp
        out[j] = saved
    return i


@njit(cache=True)
def _bicubic(tx, ty, coef, x, y):
    """A bicubic spline (FITPACK knots ``tx``, ``ty`` and coefficients) at points (x, y),
    the same sum as :meth:`RectBivariateSpline.ev`, compiled."""
    ny = ty.size - 4
    bx, by, left, right = np.empty(4), np.empty(4), np.empty(4), np.empty(4)
    out = np.empty(x.size)
    for n in range(x.size):
        i = _cubic_basis(tx, x[n], bx, left, right)
        j = _cubic_basis(ty, y[n], by, left, right)
        total = 0.0
        for a in range(4):
            row = (i - 3 + a) * ny + j - 3
            for b in range(4):
                total += bx[a] * by[b] * coef[row + b]
        out[n] = total
    return out


def _ev(spline: RectBivariateSpline, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """``spline.ev(x, y)`` by :func:`_bicubic`."""
    tx, ty = spline.get_knots()
    return _bicubic(tx, ty, spline.get_coeffs(), np.ascontiguousarray(x, dtype=float),
                    np.ascontiguousarray(y, dtype=float))


@lru_cache(maxsize=8)
def _radiation_spline(table: KernelTable, left: bool) -> RectBivariateSpline:
    """The spline of K_fluid(radiation) on one side (the same for every T_c)."""
    return _spline(table.z_left if left else table.z_right, table.s,
                   table.rd_left if left else table.rd_right)


def _side(t: np.ndarray, table: KernelTable, left: bool) -> np.ndarray:
    """z of the nodes on one side, held inside that side's grid."""
    z = np.log(np.abs(t - T_RESONANCE))
    grid = table.z_left if left else table.z_right
    return np.clip(z, grid[0], grid[-1])


def kernel_at(table: KernelTable, T_c_GeV: float, t, s, k_rd) -> np.ndarray:
    """The tabulated kernel K [1] at nodes (t, s) of one output k re-entering at T_c.

    Parameters
    ----------
    table : KernelTable
    T_c_GeV : float [GeV]
        Re-entry temperature of the output k; outside the table's rows ``k_rd`` is returned.
    t, s : array_like [1]
        Node coordinates (s in [0, 1]).
    k_rd : array_like [1]
        The closed-form RD kernel at the nodes.

    Returns
    -------
    ndarray [1]
    """
    t, s = np.asarray(t, dtype=float), np.asarray(s, dtype=float)
    k_rd = np.asarray(k_rd, dtype=float)
    lo, hi = table.T_range
    if not lo <= T_c_GeV <= hi:
        return k_rd.copy()
    first, weights = row_stencils(table, np.asarray(math.log(T_c_GeV)))
    return _weighted_kernel(table, int(first), weights, t, s, k_rd)


def row_kernel(table: KernelTable, row: int, t, s, k_rd) -> np.ndarray:
    """The kernel K_r [1] of one row of ``table`` alone at nodes (t, s) (``k_rd`` the
    closed-form RD kernel there): :func:`kernel_at` with T_c on that row.  The table's
    interpolation is linear in the row data and the Lagrange weights sum to 1, so
    kernel_at(T_c) = sum_a w_a(ln T_c) K_{first + a} exactly (the batch path's quadratic
    forms per row, :mod:`scan.observables.quadratic_qcd`, rest on this)."""
    t, s = np.asarray(t, dtype=float), np.asarray(s, dtype=float)
    return _weighted_kernel(table, row, np.ones(1), t, s, np.asarray(k_rd, dtype=float))


def row_stencils(table: KernelTable, ln_T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First rows (int, shape of ``ln_T``) and the 4 cubic Lagrange weights (shape + (4,))
    [1] in ln T_c at re-entry temperatures ``ln_T`` [ln GeV] (the stencil kept inside
    the table): :func:`kernel_at`'s and the batch path's."""
    step = table.ln_T_c[1] - table.ln_T_c[0]
    x = (np.asarray(ln_T, dtype=float) - table.ln_T_c[0]) / step
    first = np.clip(np.floor(x) - 1, 0, table.ln_T_c.size - 4).astype(np.int64)
    local = x - first                                # position in the stencil's nodes 0..3
    weights = np.ones(first.shape + (4,))
    for n in range(4):
        for m in range(4):
            if m != n:
                weights[..., n] *= (local - m) / (n - m)
    return first, weights


def _weighted_kernel(table: KernelTable, first: int, weights: np.ndarray, t: np.ndarray,
                     s: np.ndarray, k_rd: np.ndarray) -> np.ndarray:
    """The kernel [1] at nodes (t, s) with the rows first, first + 1, ... weighted by
    ``weights`` (see :func:`kernel_at`)."""
    out = np.empty(k_rd.shape)
    for left in (True, False):
        mask = (t < T_RESONANCE) if left else (t >= T_RESONANCE)
        if not mask.any():
            continue
        z_grid = table.z_left if left else table.z_right
        d_rows = (table.d_left if left else table.d_right)[first:first + weights.size]
        z, s_side, k_side = _side(t[mask], table, left), s[mask], k_rd[mask]
        d = _ev(_spline(z_grid, table.s, np.tensordot(weights, d_rows, axes=1)), z, s_side)
        near = (np.abs(t[mask] - T_RESONANCE) < DELTA_SWITCH) | (t[mask] > table.t_max)
        value = k_side + d
        ratio = 1.0 + d[near] / _ev(_radiation_spline(table, left), z[near], s_side[near])
        value[near] = k_side[near] * ratio
        out[mask] = value
    return out


def kernel_lines(attrs: dict) -> list[str]:
    """The note of the tabulated kernel when ``attrs`` (a run's recorded conventions)
    name it (``sigw_kernel = "qcd-fluid"``), else nothing: for the sampler, grid and
    summary output."""
    return [kernel_range_note()] if attrs.get("sigw_kernel") == "qcd-fluid" else []


def kernel_range_note(tables: tuple[KernelTable, ...] | None = None) -> str:
    """One line: what the tabulated kernel assumes and where it applies."""
    ranges = [table.T_range for table in tables or load_kernel_tables()]
    lo, hi = min(r[0] for r in ranges), max(r[1] for r in ranges)
    f_lo, f_hi = (float(cosmo.k_to_f(cosmo.k_of_temperature(T))) for T in (lo, hi))
    return (f"sigw_kernel = 'qcd-fluid': induced GWs on the {TABLE_GSTAR} background "
            f"(softened w, c_s^2; perfect adiabatic fluid, no free-streaming or anisotropic "
            f"stress), tabulated for re-entry at T_c = {lo:.3g} - {hi:.3g} GeV "
            f"(f ~ {f_lo:.2g} - {f_hi:.2g} Hz), radiation kernel outside; "
            f"{INTERPOLATION_NOTE}")
