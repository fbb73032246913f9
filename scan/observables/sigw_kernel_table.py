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
bicubic interpolating spline in (z, s).  Its error is measured against direct
:func:`scan.observables.sigw_fluid.fluid_kernel` at off-grid points
(tests/test_sigw_kernel_table.py; numbers in :data:`INTERPOLATION_NOTE`).
Units: T [GeV], k [Mpc^-1], u, v, t, s, kernels [1].
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
from scipy.interpolate import RectBivariateSpline

from scan.observables import cosmo
from scan.observables.sigw_nodes import T_RESONANCE

#: Names of ``[observables] sigw_kernel``: today's closed-form RD kernel, the table's.
SIGW_KERNELS: tuple[str, ...] = ("radiation", "qcd-fluid")
#: The shipped table.
TABLE_PATH: Path = Path(__file__).parent / "data" / "sigw_kernel_qcd.npz"
#: Half-width in t around the RD resonance where the table's ratio (not difference) is used.
DELTA_SWITCH: float = 0.2
#: The g_*(T) table (``[observables] gstar``) the kernel table was computed on.
TABLE_GSTAR: str = "saikawa-shirai-2018"
#: Measured interpolation error (see the module docstring), printed with the result.
INTERPOLATION_NOTE: str = "interpolation error measured below 1e-2 of K (typ. 1e-3)"


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

    @property
    def T_range(self) -> tuple[float, float]:
        """First and last re-entry temperature of the rows [GeV]."""
        return math.exp(self.ln_T_c[0]), math.exp(self.ln_T_c[-1])

    @property
    def t_max(self) -> float:
        """Largest t of the rows [1]."""
        return T_RESONANCE + math.exp(self.z_right[-1])


@lru_cache(maxsize=2)
def load_kernel_table(path: str | Path = TABLE_PATH) -> KernelTable:
    """Read a kernel table written by ``tests/tools/make_fluid_kernel_table.py``."""
    with np.load(path, allow_pickle=False) as data:
        arrays = {name: np.array(data[name]) for name in data.files if name != "provenance"}
        provenance = json.loads(str(data["provenance"]))
    return KernelTable(provenance=provenance, **arrays)


def _row_weights(table: KernelTable, ln_T: float) -> tuple[int, np.ndarray]:
    """First row and the 4 cubic Lagrange weights in ln T_c (stencil kept in the table)."""
    step = table.ln_T_c[1] - table.ln_T_c[0]
    x = (ln_T - table.ln_T_c[0]) / step
    first = int(min(max(math.floor(x) - 1, 0), table.ln_T_c.size - 4))
    nodes = first + np.arange(4)
    weights = np.array([np.prod([(x - m) / (n - m) for m in nodes if m != n]) for n in nodes])
    return first, weights


def _spline(z: np.ndarray, s: np.ndarray, values: np.ndarray) -> RectBivariateSpline:
    """Interpolating bicubic spline in (z, s)."""
    return RectBivariateSpline(z, s, values, kx=3, ky=3, s=0)


@lru_cache(maxsize=4)
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
    first, weights = _row_weights(table, math.log(T_c_GeV))
    out = np.empty(k_rd.shape)
    for left in (True, False):
        mask = (t < T_RESONANCE) if left else (t >= T_RESONANCE)
        if not mask.any():
            continue
        z_grid = table.z_left if left else table.z_right
        d_rows = (table.d_left if left else table.d_right)[first:first + 4]
        z = _side(t[mask], table, left)
        d = _spline(z_grid, table.s, np.tensordot(weights, d_rows, axes=1)).ev(z, s[mask])
        ratio = 1.0 + d / _radiation_spline(table, left).ev(z, s[mask])
        near = (np.abs(t[mask] - T_RESONANCE) < DELTA_SWITCH) | (t[mask] > table.t_max)
        out[mask] = np.where(near, k_rd[mask] * ratio, k_rd[mask] + d)
    return out


def kernel_range_note(table: KernelTable) -> str:
    """One line: what the tabulated kernel assumes and where it applies."""
    lo, hi = table.T_range
    f_lo, f_hi = (float(cosmo.k_to_f(cosmo.k_of_temperature(T))) for T in (lo, hi))
    return (f"sigw_kernel = 'qcd-fluid': induced GWs on the {TABLE_GSTAR} background "
            f"(softened w, c_s^2; perfect adiabatic fluid, no free-streaming or anisotropic "
            f"stress), tabulated for re-entry at T_c = {lo:.3g} - {hi:.3g} GeV "
            f"(f ~ {f_lo:.2g} - {f_hi:.2g} Hz), radiation kernel outside; "
            f"{INTERPOLATION_NOTE}")
