"""Share of valid, enhanced models in a box over the pole power: wall coordinate vs width.

Issue 14 item 2 asks for the measured share of valid, enhanced points when a box is
sampled in the wall coordinate rho = lambda/lambda_w instead of the physical width w.
This script solves the T-model (alpha = 1) with one pole at phi = 5.2 exactly (default
settings of ``configs/tmodel_pole.toml``) at scrambled-Sobol points of

* the wall box: p uniform in [0.5, 1.7], rho uniform in [RHO_LOW, RHO_HIGH];
* the width boxes: p uniform in [0.5, 1.7], w uniform (and log-uniform) over the widths
  that the wall box reaches, [min_p w_w(p) / RHO_HIGH, max_p w_w(p) / RHO_LOW], with
  w_w(p) the walls found at the wall box's powers;

and prints, per box, how many points are valid and how many have log10 P_peak > -5 and
> -3.  Run (one process, low priority; ~1-2 min per 16 solves on this machine):

    nice -n 15 python tests/tools/wall_box_share.py --points 16
"""
from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import time
from pathlib import Path

import numpy as np
from scipy.stats import qmc

from scan.config import load_config
from scan.pipeline import solve_config
from scan.pipeline.solve import wall_width

ROOT = Path(__file__).resolve().parents[2]
POWER = (0.5, 1.7)
RHO_LOW, RHO_HIGH = 1.0, 1.1
POSITION = 5.2


def pole_config(base, power: float, **width_keys):
    """The base config with its one pole at ``POSITION``, ``power`` and a width key."""
    keys = dict(width=None, sharpness=None, wall_ratio=None) | width_keys
    pole = dataclasses.replace(base.model.poles[0], position=POSITION, power=float(power),
                               **keys)
    return dataclasses.replace(base, model=dataclasses.replace(base.model, poles=(pole,)))


def outcome(config) -> tuple[bool, float, str]:
    """(valid, log10 P_peak, reason) of one exact solve."""
    result = solve_config(config, with_observables=False)
    if not result.valid or result.spectrum is None:
        return False, math.nan, result.reason
    p_peak = result.spectrum.P_peak
    return True, math.log10(p_peak) if p_peak > 0 else math.nan, ""


def sobol(n: int, seed: int) -> np.ndarray:
    """``n`` scrambled-Sobol points in the unit square."""
    return qmc.Sobol(2, scramble=True, seed=seed).random(n)


def share_line(name: str, rows: list[tuple[bool, float, str]]) -> str:
    """One line of counts for a box."""
    valid = [r for r in rows if r[0]]
    above5 = sum(1 for r in valid if r[1] > -5.0)
    above3 = sum(1 for r in valid if r[1] > -3.0)
    return (f"{name}: {len(rows)} points, {len(valid)} valid, {above5} with log10 P_peak > -5, "
            f"{above3} with log10 P_peak > -3")


def main(argv: list[str] | None = None) -> int:
    """Solve the three boxes and print the counts."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=16)
    parser.add_argument("--seed", type=int, default=14)
    args = parser.parse_args(argv)
    base = load_config(ROOT / "configs" / "tmodel_pole.toml")
    t0 = time.perf_counter()
    u = sobol(args.points, args.seed)
    powers = POWER[0] + (POWER[1] - POWER[0]) * u[:, 0]
    rhos = RHO_LOW + (RHO_HIGH - RHO_LOW) * u[:, 1]
    walls, wall_rows = [], []
    for p, rho in zip(powers, rhos):
        config = pole_config(base, p, wall_ratio=float(rho))
        walls.append(wall_width(config))
        wall_rows.append(outcome(config))
        print(f"wall  p = {p:.3f} rho = {rho:.4f} w_w = {walls[-1]:.4g}: {wall_rows[-1]}",
              flush=True)
    w_lo, w_hi = min(walls) / RHO_HIGH, max(walls) / RHO_LOW
    print(f"width range reached by the wall box: [{w_lo:.4g}, {w_hi:.4g}] M_p", flush=True)
    boxes = {"uniform width": w_lo + (w_hi - w_lo) * u[:, 1],
             "log-uniform width": w_lo * (w_hi / w_lo) ** u[:, 1]}
    lines = [share_line(f"wall box rho in [{RHO_LOW}, {RHO_HIGH}]", wall_rows)]
    for name, widths in boxes.items():
        rows = []
        for p, w in zip(powers, widths):
            rows.append(outcome(pole_config(base, p, width=float(w))))
            print(f"{name}  p = {p:.3f} w = {w:.4g}: {rows[-1]}", flush=True)
        lines.append(share_line(f"{name} in [{w_lo:.3g}, {w_hi:.3g}] M_p", rows))
    print(f"\nT-model alpha = 1, pole at phi = {POSITION}, p in {list(POWER)}; "
          f"{3 * args.points} exact solves in {time.perf_counter() - t0:.0f} s")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())
