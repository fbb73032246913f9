"""What the shipped QCD-era kernel table does to Omega_GW, and what it costs a plan.

1. Edges: sum|D| / sum|K_rad| over each T_c row's (z, s) grid (D = K_fluid(T_c) -
   K_fluid(radiation)), printed for the first and last rows and the largest.
2. Effect: Omega_GW(qcd-fluid) / Omega_GW(radiation) from the plans (synthetic log-normal
   P_zeta, widths 0.5 and 0.2, peak at 10 and 100 nHz) at k/k_* = 0.5, 1, 2/sqrt(3), 1.5.
3. Interpolation error on Omega: on a small (t, s) node set, the table kernel against the
   same construction from direct fluid_kernel values (tests/test_sigw_kernel_table.py).
(The plan-build cost is measured by tests/bench/bench_sigw_kernel.py.)

    nice -n 15 python tests/tools/fluid_kernel_table_effect.py
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from test_sigw_kernel_table import _lognormal, _node_set

from scan.observables import cosmo
from scan.observables import sigw_fluid as sf
from scan.observables.sigw import induced_kernel, plan_sigw
from scan.observables.sigw_kernel_table import (
    DELTA_SWITCH,
    load_kernel_tables,
    tabulated_kernel,
)
from scan.observables.sigw_nodes import T_RESONANCE


def edges(table) -> None:
    """Row-wise L1 size of the difference to the radiation kernel."""
    rd = np.abs(table.rd_left).sum() + np.abs(table.rd_right).sum()
    size = (np.abs(table.d_left).sum(axis=(1, 2)) + np.abs(table.d_right).sum(axis=(1, 2))) / rd
    T = np.exp(table.ln_T_c)
    for i in (0, 1, 2, int(np.argmax(size)), -3, -2, -1):
        print(f"row T_c = {T[i]:.4g} GeV: sum|D|/sum|K_rad| = {size[i]:.2e}")


def effect_and_error(f_star: float) -> None:
    """Plan ratios and the node-set interpolation error on Omega (peak at f_star [Hz])."""
    k_star = float(cosmo.f_to_k(f_star))
    k_in = k_star * np.exp(np.linspace(-4, 4, 161))
    x_out = np.array([0.5, 1.0, 2 / math.sqrt(3), 1.5])
    for width in (0.5, 0.2):
        P = _lognormal(k_in, k_star, width)
        rd = plan_sigw(k_in, k_star * x_out).omega_gw(P)
        qcd = plan_sigw(k_in, k_star * x_out, kernel="qcd-fluid").omega_gw(P)
        print(f"f_* = {f_star:.0e} Hz, width {width}: Omega(qcd-fluid)/Omega(radiation) at k/k_* = "
              + ", ".join(f"{x:.3f}: {r:.3f}" for x, r in zip(x_out, qcd / rd)))
        errors = []
        for x in x_out:
            u, v, pp = _node_set(k_star * x, k_star, width)
            closed = induced_kernel(u, v)
            T_c = float(cosmo.temperature_of_k(k_star * x))
            got = tabulated_kernel(T_c, u + v - 1, u - v, closed)
            fluid = sf.fluid_kernel(u, v, sf.table_background(T_c))
            radiation = sf.fluid_kernel(u, v, sf.constant_background(1 / 3))
            near = np.abs(u + v - 1 - T_RESONANCE) < DELTA_SWITCH
            direct = np.where(near, closed * fluid / radiation, closed + fluid - radiation)
            errors.append(np.sum((got - direct) * pp) / np.sum(direct * pp))
        print("  interpolation error on Omega (node set): "
              + ", ".join(f"{e:+.1e}" for e in errors))


def main() -> int:
    for table in load_kernel_tables():
        print(f"table applied at T_c {table.T_range[0]:.4g}-{table.T_range[1]:.4g} GeV, "
              f"{table.ln_T_c.size} rows; {table.provenance}")
        edges(table)
    for f_star in (1e-8, 1e-7):
        effect_and_error(f_star)
    return 0


if __name__ == "__main__":
    sys.exit(main())
