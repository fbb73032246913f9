"""Measure the interpolation error of the shipped QCD-era kernel table.

At seeded random off-grid points (ln T_c uniform over the table's rows, t in [0, t_top]
with half the points within 0.3 of the RD resonance, s uniform on [0, 1]) the table
(:func:`scan.observables.sigw_kernel_table.kernel_at`) is compared with the same
construction applied to direct :func:`scan.observables.sigw_fluid.fluid_kernel` values
(K_RD + K_fluid(T_c) - K_fluid(rad) away from the resonance, K_RD K_fluid(T_c)/K_fluid(rad)
near it), so the difference is the interpolation error alone.  Printed: the L1-weighted
error sum|dK|/sum|K|, and quantiles of |dK|/(|K| + 0.01) (K ~ 0.1-10 where Omega_GW
gets its weight), by region (|t - t_res| below or above DELTA_SWITCH) and T_c band.

    nice -n 15 python tests/tools/fluid_kernel_table_error.py [n_T] [n_per_T] [TABLE.npz]

(default: the shipped tables over their applied ranges; a path: that table over its rows)
"""
from __future__ import annotations

import math
import sys
import time

import numpy as np

from scan.observables import sigw_fluid as sf
from scan.observables.sigw import induced_kernel
from scan.observables.sigw_kernel_table import (
    DELTA_SWITCH,
    kernel_at,
    load_kernel_table,
    load_kernel_tables,
)
from scan.observables.sigw_nodes import T_RESONANCE


def reference(T_c: float, t: np.ndarray, s: np.ndarray, rd_bg) -> np.ndarray:
    """The table's construction from direct kernels at (t, s) (module docstring)."""
    u, v = 0.5 * (t + s + 1), 0.5 * (t - s + 1)
    closed = induced_kernel(u, v)
    fluid = sf.fluid_kernel(u, v, sf.table_background(T_c))
    radiation = sf.fluid_kernel(u, v, rd_bg)
    near = np.abs(t - T_RESONANCE) < DELTA_SWITCH
    return np.where(near, closed * fluid / radiation, closed + fluid - radiation), closed


def main(argv: list[str]) -> int:
    n_T = int(argv[0]) if argv else 8
    n_per = int(argv[1]) if len(argv) > 1 else 24
    tables = (load_kernel_table(argv[2]),) if len(argv) > 2 else load_kernel_tables()
    rng = np.random.default_rng(20261203)
    rd_bg = sf.constant_background(1 / 3)
    start = time.process_time()
    rows = []
    lo, hi = min(t.T_range[0] for t in tables), max(t.T_range[1] for t in tables)
    for ln_T in rng.uniform(math.log(lo), math.log(hi), n_T):
        T_c = math.exp(ln_T)
        table = next(t for t in reversed(tables) if t.T_range[0] <= T_c <= t.T_range[1])
        half = n_per // 2
        t = np.concatenate([rng.uniform(0.0, 5.0, n_per - half),
                            T_RESONANCE + rng.uniform(-0.3, 0.3, half)])
        s = rng.uniform(0.0, 1.0, n_per)
        ref, closed = reference(T_c, t, s, rd_bg)
        got = kernel_at(table, T_c, t, s, closed)
        rows.append(np.column_stack([np.full(n_per, T_c), t, s, ref, got]))
    data = np.concatenate(rows)
    T_c, t, s, ref, got = data.T
    err = np.abs(got - ref)
    near = np.abs(t - T_RESONANCE) < DELTA_SWITCH
    print(f"{data.shape[0]} points, T_c {T_c.min():.3g}-{T_c.max():.3g} GeV, "
          f"{time.process_time() - start:.0f} s CPU")
    low = T_c < 1.0
    for name, mask in (("all", np.ones_like(near)), ("near, T_c < 1 GeV", near & low),
                       ("near, T_c >= 1 GeV", near & ~low), ("away, T_c < 1 GeV", ~near & low),
                       ("away, T_c >= 1 GeV", ~near & ~low), ("T_c < 1 GeV", low),
                       ("T_c >= 1 GeV", ~low)):
        if not mask.any():
            continue
        e, r = err[mask], ref[mask]
        line = f"{name:>15}: L1 {e.sum() / np.abs(r).sum():.2e}"
        q = e / (np.abs(r) + 1e-2)
        line += (f"; |dK|/(|K|+0.01) median {np.median(q):.1e} 90% {np.quantile(q, 0.9):.1e}"
                 f" 99% {np.quantile(q, 0.99):.1e} max {q.max():.1e} ({mask.sum()} points)")
        print(line)
    worst = np.argsort(err / (np.abs(ref) + 1e-2))[-5:]
    for i in worst:
        print(f"  worst: T_c {T_c[i]:.4g} t {t[i]:.4f} s {s[i]:.3f} K {ref[i]:.4g} "
              f"table {got[i]:.4g}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
