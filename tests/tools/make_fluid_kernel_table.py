"""Generate the tabulated QCD-era induced-GW kernel shipped with zetascan.

Writes ``scan/observables/data/sigw_kernel_qcd.npz`` (read by
:mod:`scan.observables.sigw_kernel_table`): on a grid of re-entry temperatures T_c and
(t, s) coordinates (u, v = (t +- s + 1)/2), the difference

    D(T_c, t, s) = K_fluid(T_c; u, v) - K_fluid(radiation; u, v)

of two time integrations by :func:`scan.observables.sigw_fluid.fluid_kernel` with the same
method and eta_end (the Saikawa & Shirai 2018 g_*(T) background of re-entry at T_c,
and w = c_s^2 = 1/3), plus the radiation one itself.  t is sampled in
z = ln|t - (sqrt(3) - 1)| on either side of the RD log resonance (|t - t_res| from
DELTA_MIN to t_res on the left, to T_MAX - t_res on the right), s uniformly on [0, 1]
(v floored at V_FLOOR where t = 0, s = 1 would give v = 0).  Deterministic.  The T_c
rows are computed from the middle of the range outwards and checkpointed after each
row (``--out`` + ``.part.npz``), so an interrupted run leaves a contiguous, usable range.

    nice -n 15 python tests/tools/make_fluid_kernel_table.py [--out PATH] [--rows N]
        [--t-range LO HI] [--d-ln-t STEP] [--n-right N]

The shipped tables: the defaults (``sigw_kernel_qcd.npz``) and ``--t-range 1.5 6
--d-ln-t 0.075 --n-right 96 --out scan/observables/data/sigw_kernel_qcd_high.npz``.

Prints the cost of each row and the total CPU time.
"""
from __future__ import annotations

import argparse
import hashlib
import json
import math
import sys
import time
from pathlib import Path

import numpy as np

from scan.observables import sigw_fluid as sf
from scan.observables.gstar import saikawa_shirai_2018

ROOT = Path(__file__).resolve().parents[2]
OUT = ROOT / "scan" / "observables" / "data" / "sigw_kernel_qcd.npz"
GSTAR_CSV = ROOT / "scan" / "observables" / "data" / "gstar_saikawa_shirai_2018.csv"
T_RES = math.sqrt(3.0) - 1.0
#: Re-entry temperature range [GeV] and spacing in ln T_c.
T_LO, T_HI, D_LN_T = 0.003, 20.0, 0.15
#: Closest distance to the resonance, largest t, grid sizes.
DELTA_MIN, T_MAX = 1e-3, 20.0
N_LEFT, N_RIGHT, N_S = 32, 48, 17
V_FLOOR = 1e-5


def grid(t_lo: float = T_LO, t_hi: float = T_HI, d_ln_t: float = D_LN_T,
         n_right: int = N_RIGHT):
    """(ln T_c, z_left, z_right, s) of the table."""
    n_t = round(math.log(t_hi / t_lo) / d_ln_t) + 1
    ln_t = np.linspace(math.log(t_lo), math.log(t_hi), n_t)
    z_left = np.linspace(math.log(DELTA_MIN), math.log(T_RES), N_LEFT)
    z_right = np.linspace(math.log(DELTA_MIN), math.log(T_MAX - T_RES), n_right)
    return ln_t, z_left, z_right, np.linspace(0.0, 1.0, N_S)


def uv(t: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """u, v on the (t, s) product grid (v floored at V_FLOOR)."""
    T, S = np.meshgrid(t, s, indexing="ij")
    return 0.5 * (T + S + 1), np.maximum(0.5 * (T - S + 1), V_FLOOR)


def side_kernels(background, z_left, z_right, s):
    """Kernels on the left and right (z, s) grids for one background."""
    u_l, v_l = uv(np.maximum(T_RES - np.exp(z_left), 0.0), s)
    u_r, v_r = uv(T_RES + np.exp(z_right), s)
    return sf.fluid_kernel(u_l, v_l, background), sf.fluid_kernel(u_r, v_r, background)


def centre_out(n: int) -> list[int]:
    """Row indices from the middle outwards (contiguous after any prefix)."""
    mid = n // 2
    order = [mid]
    for step in range(1, n):
        order += [i for i in (mid + step, mid - step) if 0 <= i < n]
    return order[:n]


def provenance(done: np.ndarray, cpu: float, ln_t: np.ndarray, z_right: np.ndarray) -> str:
    """The JSON header naming how the table was made."""
    return json.dumps({
        "generator": "tests/tools/make_fluid_kernel_table.py",
        "kernel": "scan.observables.sigw_fluid.fluid_kernel (RK4, Hann window)",
        "gstar_table": "saikawa-shirai-2018 (scan/observables/data/"
                       "gstar_saikawa_shirai_2018.csv, sha256 "
                       + hashlib.sha256(GSTAR_CSV.read_bytes()).hexdigest()[:16] + ")",
        "eta_end": sf.ETA_END, "a_start": sf.A_START,
        "grid": {"T_c_GeV": [round(math.exp(ln_t[0]), 6), round(math.exp(ln_t[-1]), 6)],
                 "d_ln_T": round(float(ln_t[1] - ln_t[0]), 6), "delta_min": DELTA_MIN,
                 "t_max": T_MAX, "n_left": N_LEFT, "n_right": int(z_right.size),
                 "n_s": N_S, "v_floor": V_FLOOR},
        "rows_done": int(done.sum()), "cpu_seconds": round(cpu, 1),
        "stored": "d_* = K_fluid(T_c) - K_fluid(radiation), rd_* = K_fluid(radiation)",
    })


def save(path: Path, ln_t, z_left, z_right, s, d_left, d_right, rd_left, rd_right,
         done, cpu) -> None:
    """Write the (possibly partial) table; partial rows are dropped to the contiguous core."""
    idx = np.flatnonzero(done)
    keep = slice(idx.min(), idx.max() + 1)
    np.savez_compressed(path, ln_T_c=ln_t[keep], z_left=z_left, z_right=z_right, s=s,
                        d_left=d_left[keep], d_right=d_right[keep], rd_left=rd_left,
                        rd_right=rd_right,
                        provenance=np.array(provenance(done, cpu, ln_t, z_right)))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT)
    parser.add_argument("--rows", type=int, default=None, help="stop after N rows")
    parser.add_argument("--t-range", type=float, nargs=2, default=(T_LO, T_HI),
                        metavar=("LO", "HI"), help="T_c range [GeV]")
    parser.add_argument("--d-ln-t", type=float, default=D_LN_T, help="step in ln T_c")
    parser.add_argument("--n-right", type=int, default=N_RIGHT,
                        help="t-points above the resonance")
    args = parser.parse_args(argv)
    ln_t, z_left, z_right, s = grid(*args.t_range, args.d_ln_t, args.n_right)
    start = time.process_time()
    rd_left, rd_right = side_kernels(sf.constant_background(1 / 3), z_left, z_right, s)
    print(f"radiation rows: {time.process_time() - start:.1f} s CPU", flush=True)
    d_left = np.zeros((ln_t.size, *rd_left.shape))
    d_right = np.zeros((ln_t.size, *rd_right.shape))
    done = np.zeros(ln_t.size, dtype=bool)
    dof = saikawa_shirai_2018()
    partial = args.out.with_suffix(".part.npz")
    for count, i in enumerate(centre_out(ln_t.size)[:args.rows]):
        t0 = time.process_time()
        bg = sf.table_background(math.exp(ln_t[i]), dof)
        k_l, k_r = side_kernels(bg, z_left, z_right, s)
        d_left[i], d_right[i], done[i] = k_l - rd_left, k_r - rd_right, True
        cpu = time.process_time() - start
        save(partial, ln_t, z_left, z_right, s, d_left, d_right, rd_left, rd_right, done,
             cpu)
        print(f"row {count + 1}/{ln_t.size}: T_c = {math.exp(ln_t[i]):.4g} GeV, "
              f"{time.process_time() - t0:.1f} s CPU (total {cpu:.0f} s)", flush=True)
    save(args.out, ln_t, z_left, z_right, s, d_left, d_right, rd_left, rd_right, done,
         time.process_time() - start)
    print(f"wrote {args.out}: {int(done.sum())} rows, "
          f"{time.process_time() - start:.0f} s CPU in total", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
