"""Benchmark (issue 16): training solves per second with a pool of worker processes.

Run:  python tests/bench/bench_train_solves.py [points] [processes] [config]
      (defaults: 32 points, 2 processes, configs/pole_scan.toml)

The training's own solve (:class:`scan.surrogate.adapter.SolvePoint`: background, pivot,
modes, no observables) on the first ``points`` Sobol points of the config's parameter box
(the design the training starts with), mapped over :class:`scan.pool.ProcessPool`.  Each
worker first solves one point untimed (spawn, imports, numba's on-disk cache); then the
wall time of all points is measured and the time of a 1,000-point training's solves is
extrapolated linearly (the fit and refinement rounds are not included).  Invalid points
(the box's stall region) are solved too, as in training, and counted.

Measured once (commit d873270, pole_scan.toml, 8 points, 2 processes, on 2 cores shared
with ~7 other jobs at load average ~14, while bench_exact ran): 0.92 solves/s, i.e.
~18 min for 1,000 training solves under that load; an unloaded machine was not available.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

from scan.config import load_config
from scan.pool import ProcessPool
from scan.surrogate.adapter import SolvePoint
from scan.surrogate.design import sobol_points
from scan.surrogate.space import from_config

ROOT = Path(__file__).resolve().parents[2]


def main(points: int = 32, processes: int = 2,
         config_path: str = str(ROOT / "configs" / "pole_scan.toml")) -> None:
    config = load_config(config_path)
    space = from_config(config)
    theta = space.from_unit(sobol_points(space.dim, 0, points + processes, config.run.seed))
    solve = SolvePoint(config, space.keys)
    with ProcessPool(processes) as pool:
        pool.map(solve, list(theta[:processes]))            # warm-up, one per worker
        t0 = time.perf_counter()
        records = pool.map(solve, list(theta[processes:]))
        wall = time.perf_counter() - t0
    valid = sum(bool(r.valid) for r in records)
    rate = points / wall
    print(f"{config_path}: {points} solves ({valid} valid) with {processes} processes in "
          f"{wall:.1f} s: {rate:.2f} solves/s; 1,000 training solves ~ {1000 / rate / 60:.1f} min")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 32,
         int(sys.argv[2]) if len(sys.argv) > 2 else 2, *sys.argv[3:4])
