"""Omega_GW of many spectra with the tabulated QCD-era kernel, as quadratic forms per
kernel row (the batch path's ``sigw_kernel = "qcd-fluid"``).

The batch path (:mod:`scan.observables.batch`) integrates Omega_GW with one quadratic
form on a table relative to each walker's peak (:mod:`scan.observables.quadratic`), which
the radiation kernel's scale-free form allows.  The QCD-era kernel
(:mod:`scan.observables.sigw_kernel_table`) depends on the re-entry temperature T_c of the
output k, an absolute scale -- but only through four rows of its table: at T_c the
kernel is sum_a w_a(ln T_c) K_{r + a}(t, s), the cubic Lagrange weights of the four
nearest rows times each row's kernel, which is scale-free
(:func:`~scan.observables.sigw_kernel_table.row_kernel`: the table's interpolation is
linear in the row data and the weights sum to 1, so this equals
:func:`~scan.observables.sigw_kernel_table.kernel_at` to rounding).  Hence

    Omega_GW(k_j) = sum_a w_a(ln T_c(k_j)) Omega_{r + a}(x_j),

with Omega_r the quadratic form of P built with row r's kernel on the same nodes, and
x_j = ln(k_j / k_peak).  :func:`plan_quadratic_qcd` builds one matrix per row of every
shipped table (a few hundred MB for the 79 rows at most); :meth:`RowQuadraticPlan.omega_gw`
evaluates, per block of outputs, the products P_a P_b once and the forms of the rows the
block's walkers need; outputs whose T_c lies outside every table's applied range take
the radiation form, as the single path (:func:`scan.observables.sigw.plan_sigw`) does.
The re-entry temperature is the single path's, :func:`scan.observables.cosmo.
temperature_of_k` with the plan's g_*(T).

Cost: a block of outputs spanning Delta ln T_c needs Delta ln T_c / step + 4 rows for a
tight cluster of walkers (step 0.15 below 1.5 GeV, 0.077 above); walkers are taken in
groups of neighbours in k_peak, so a wide spread does not make every group take every
row.  Measured 9-16x the radiation form's cost for 64 walkers around 10 nHz (a tight
cluster to an early burn-in's spread; tests/bench/bench_gw_batch_kernel.py).

Units: k [Mpc^-1], T [GeV], P_zeta and Omega [1].
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.observables import cosmo
from scan.observables.quadratic import _linear_lift, pair_assembly, refined_table
from scan.observables.sigw import output_nodes
from scan.observables.sigw_kernel_table import (
    KernelTable,
    load_kernel_tables,
    row_kernel,
    row_stencils,
)

#: Outputs per block of the row forms (fewer outputs: fewer rows per block, more
#: products); with :data:`WALKER_GROUP` measured fastest of 4, 8, 16 x 8, 16, 32, 64
#: (tests/bench/bench_gw_batch_kernel.py).
OUT_BLOCK_QCD: int = 4

#: Walkers per group of the row forms: sorted by k_peak, each group's forms take only the
#: rows its own walkers need (a wide spread of walkers would otherwise take every row).
WALKER_GROUP: int = 32


@dataclass(frozen=True, eq=False)
class RowQuadraticPlan:
    """Omega_GW(eta_c, k_out) of spectra on a table relative to their peaks, with the
    QCD-era kernel per output (see module doc).

    Attributes
    ----------
    k_in : ndarray [Mpc^-1]
        The relative table spectra are given on (k / k_peak; k_peak = 1 Mpc^-1).
    k_out : ndarray [Mpc^-1]
        Relative output wavenumbers.
    tables : tuple of KernelTable
    dof : DofTable, (g_rho, g_s) or None
        g_*(T) of the re-entry temperature (:mod:`scan.observables.cosmo`).
    """

    k_in: np.ndarray
    k_out: np.ndarray
    tables: tuple[KernelTable, ...]
    dof: object
    _lift: np.ndarray                 # (n_fine, n): ln P on k_in -> on the refined table
    _row_offset: np.ndarray           # global index of each table's first row
    _blocks: tuple[tuple[int, int, np.ndarray, np.ndarray, np.ndarray, np.ndarray], ...]
    # (start, stop, a, b, radiation W (nb, n_used), rows W (n_rows, nb, n_used))

    def omega_gw(self, P_zeta, ln_k_peak) -> np.ndarray:
        """Omega_GW(eta_c, k_peak k_out) [1], shape (m, n_out), for a stack (m, n) of
        spectra on ``k_in`` (relative to their peaks at ``ln_k_peak`` [ln Mpc^-1], (m,))."""
        P = np.atleast_2d(np.asarray(P_zeta, dtype=float))
        ln_k_peak = np.atleast_1d(np.asarray(ln_k_peak, dtype=float))
        if P.shape[-1] != self.k_in.size or ln_k_peak.shape != (P.shape[0],):
            raise ValueError(f"P_zeta must have shape (m, {self.k_in.size}) and ln_k_peak "
                             f"(m,), got {P.shape} and {ln_k_peak.shape}")
        rows, weights = self._stencils(ln_k_peak)                 # (m, n_out), (.., 4)
        fine = np.exp(self._lift @ np.log(np.maximum(P, 1e-300)).T)     # (n_fine, m)
        omega = np.empty((self.k_out.size, P.shape[0]))
        order = np.argsort(ln_k_peak)                   # neighbours in k share their rows
        groups = [order[i:i + WALKER_GROUP] for i in range(0, order.size, WALKER_GROUP)]
        for start, stop, a, b, w_rad, w_rows in self._blocks:
            products = np.take(fine, a, axis=0) * np.take(fine, b, axis=0)
            omega[start:stop] = w_rad @ products
            for group in groups:
                walker, out, value = _tabulated(w_rows, products[:, group],
                                                rows[group, start:stop],
                                                weights[group, start:stop])
                omega[start + out, group[walker]] = value
        return omega.T

    def _stencils(self, ln_k_peak: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Global first rows (-1: radiation) and Lagrange weights of every (walker,
        output): the last table whose applied range holds T_c wins, as in
        :func:`~scan.observables.sigw_kernel_table.tabulated_kernel`."""
        k = np.exp(ln_k_peak[:, None]) * self.k_out
        T = np.asarray(cosmo.temperature_of_k(k, self.dof), dtype=float)
        rows = np.full(k.shape, -1, dtype=np.int64)
        weights = np.zeros(k.shape + (4,))
        for offset, table in zip(self._row_offset, self.tables):
            lo, hi = table.T_range
            inside = (lo <= T) & (T <= hi)
            first, w = row_stencils(table, np.log(T[inside]))
            rows[inside], weights[inside] = first + offset, w
        return rows, weights


def _tabulated(w_rows: np.ndarray, products: np.ndarray, rows: np.ndarray,
               weights: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Omega [1] of a group of walkers at one block's outputs from the row forms
    ``w_rows`` (n_rows, nb, n_used): (walker, output, value) where ``rows`` (group, nb;
    first stencil row, -1 for the radiation form) is set, the rows each needs combined
    with its Lagrange ``weights`` (group, nb, 4); one product over the group's rows."""
    walker, out = np.nonzero(rows >= 0)
    if not walker.size:
        return walker, out, np.empty(0)
    first = rows[walker, out]
    lo, hi = int(first.min()), int(first.max()) + 4
    forms = (w_rows[lo:hi].reshape(-1, products.shape[0]) @ products).reshape(
        hi - lo, rows.shape[1], products.shape[1])
    value = sum(weights[walker, out, n] * forms[first - lo + n, out, walker]
                for n in range(4))
    return walker, out, value


def plan_quadratic_qcd(k_in, k_out, *, refine: int = 2, n_gl: int = 4, grade: int = 10,
                       dof=None, tables: tuple[KernelTable, ...] | None = None,
                       block: int = OUT_BLOCK_QCD) -> RowQuadraticPlan:
    """Build the per-row quadratic forms of Omega_GW for spectra on ``k_in`` (log-spaced,
    relative to the peak) at relative outputs ``k_out``: the nodes, refinement and
    interpolation of :func:`scan.observables.quadratic.plan_quadratic`, each node's
    weight times the RD kernel (the radiation form) and times each table row's kernel."""
    k_in = np.asarray(k_in, dtype=float)
    k_out = np.atleast_1d(np.asarray(k_out, dtype=float))
    tables = load_kernel_tables() if tables is None else tuple(tables)
    lnk = np.log(k_in)
    fine = refined_table(lnk, refine)
    nodes = _nodes(fine, k_out, n_gl, grade)
    assemble = pair_assembly(*(nodes[name] for name in ("j", "iu", "fu", "iv", "fv")),
                             fine.size, k_out.size)               # (n_out n_pairs, nodes)
    q, t, s, k_rd = nodes["q"], nodes["t"], nodes["s"], nodes["k_rd"]
    kernels = [k_rd] + [row_kernel(table, r, t, s, k_rd)
                        for table in tables for r in range(table.ln_T_c.size)]
    n_pairs = fine.size * (fine.size + 1) // 2
    forms = (assemble @ (q[:, None] * np.column_stack(kernels))).reshape(
        k_out.size, n_pairs, len(kernels))
    offset = np.cumsum([0] + [table.ln_T_c.size for table in tables[:-1]])
    return RowQuadraticPlan(k_in=k_in, k_out=k_out, tables=tables, dof=dof,
                            _lift=_linear_lift(lnk, fine), _row_offset=offset,
                            _blocks=_row_blocks(forms, fine.size, block))


def _nodes(fine: np.ndarray, k_out: np.ndarray, n_gl: int, grade: int) -> dict:
    """Every output's nodes on the refined table ``fine`` (ln k), concatenated: output
    index ``j``, table positions ``iu, fu, iv, fv``, coordinates ``t, s``, quadrature
    weight ``q`` and the RD kernel ``k_rd`` (:func:`~scan.observables.sigw.
    output_nodes`)."""
    parts = {name: [] for name in ("j", "iu", "fu", "iv", "fv", "t", "s", "q", "k_rd")}
    for j, (iu, fu, iv, fv, w, t, s, q) in enumerate(output_nodes(np.exp(fine), k_out,
                                                                  n_gl, grade)):
        for name, value in zip(("iu", "fu", "iv", "fv", "t", "s", "q"),
                               (iu, fu, iv, fv, t, s, q)):
            parts[name].append(value)
        parts["k_rd"].append(w / q)
        parts["j"].append(np.full(w.size, j))
    return {name: np.concatenate(value) for name, value in parts.items()}


def _row_blocks(forms: np.ndarray, n_fine: int, size: int):
    """Blocks of ``size`` outputs of the forms (n_out, n_pairs, 1 + n_rows): the pairs each
    block uses (a, b), the radiation form (nb, n_used) and the rows' (n_rows, nb, n_used),
    C-contiguous for the products of :meth:`RowQuadraticPlan.omega_gw`."""
    a, b = np.triu_indices(n_fine)
    blocks = []
    for start in range(0, forms.shape[0], size):
        stop = min(start + size, forms.shape[0])
        part = forms[start:stop]
        used = np.flatnonzero(np.any(part != 0.0, axis=(0, 2)))
        blocks.append((start, stop, a[used], b[used],
                       np.ascontiguousarray(part[:, used, 0]),
                       np.ascontiguousarray(part[:, used, 1:].transpose(2, 0, 1))))
    return tuple(blocks)
