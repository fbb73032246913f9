"""Benchmark: the batch path's Omega_GW with the QCD-era kernel vs the radiation kernel.

64 walkers' log-normal peaks (widths 0.3-1) on the emulator's 41-point relative table,
64 outputs, peaks around 10 nHz (re-entry ~0.4 GeV, inside the kernel tables): the
radiation kernel's one quadratic form (:mod:`scan.observables.quadratic`) against the
per-row forms of ``sigw_kernel = "qcd-fluid"`` (:mod:`scan.observables.quadratic_qcd`)
for a tight cluster of walkers (ln k_peak spread 0.5, a converged posterior) and a wide
one (spread 6, an early burn-in), timed side by side in alternating blocks
(tests/bench/_timing.py; thread CPU time, min-based ratios), with one BLAS thread as the
posterior's call runs; then the first two in wall time with one BLAS thread and with the
default pool (on a loaded machine the pool's threads wait on each other: the reason the
posterior limits it).

Measured (lead28 branch, 2-core machine shared with another job):

* This file, 4 runs (outputs per block 4, walkers per group 32): tight 9.1-10.7x, wide
  13.8-15.8x the radiation form (0.96-1.19 ms median for the 64 walkers; the per-row
  forms 8.8-11.3 ms and 13.3-16.5 ms).  In wall time, one BLAS thread against the
  default pool: the radiation form 0.95-1.53 ms against 1.6-174 ms (the pool's threads
  waiting on a busy core), the per-row forms 9.4-18.8 ms against 9.8-519 ms.
* Blocks and groups (one process, 12 rounds, min-based, against a radiation form of 1.44
  ms): 4 outputs x 32 walkers 6.0x tight / 8.8x wide, 8 x 32 6.2x / 9.2x, 16 x 64
  (no grouping) 6.7x / 11.2x, 8 x 16 9.9x / 9.3x, groups of 8 12-18x.
* The plain posterior call (tests/bench/bench_posterior.py) is ~11-14 ms for 64
  walkers, so the kernel adds ~0.6-1.2x of it when the walkers re-enter in the tables'
  range (3 MeV - 6 GeV); above it only the radiation form is taken.
* Plan build: 3.6-3.8 s for the 79 table rows (22.6 MB of forms); the radiation form's
  build 8.2 s -> 0.54 s with the sparse assembly both share (quadratic.pair_assembly,
  replacing np.add.at).

Run:  python tests/bench/bench_gw_batch_kernel.py [--blocks N]
"""
from __future__ import annotations

import contextlib
import math
import time

import numpy as np
from _timing import alternating_times, blocks_from_argv

from scan.observables import cosmo
from scan.observables.quadratic import plan_quadratic
from scan.observables.quadratic_qcd import plan_quadratic_qcd
from scan.surrogate.threads import single_blas_thread

M_WALKERS, BLOCKS = 64, 15


def main() -> None:
    x = np.linspace(-3.0, 3.0, 41)
    x_out = np.linspace(x[0], x[-1] + math.log(2.0), 64)
    rng = np.random.default_rng(0)
    widths = rng.uniform(0.3, 1.0, M_WALKERS)[:, None]
    P = 1e-2 * np.exp(-x[None, :]**2 / (2 * widths**2))
    centre = math.log(float(cosmo.f_to_k(1e-8)))
    tight = centre + rng.uniform(-0.25, 0.25, M_WALKERS)
    wide = centre + rng.uniform(-3.0, 3.0, M_WALKERS)
    radiation = plan_quadratic(np.exp(x), np.exp(x_out))
    rows = plan_quadratic_qcd(np.exp(x), np.exp(x_out))
    funcs = {"radiation form": lambda: radiation.omega_gw(P),
             "qcd-fluid, tight walkers": lambda: rows.omega_gw(P, tight),
             "qcd-fluid, wide walkers": lambda: rows.omega_gw(P, wide)}
    with single_blas_thread():       # as the posterior's call (scan/surrogate/threads.py)
        times = alternating_times(funcs, blocks_from_argv(BLOCKS))
    reference = min(times["radiation form"])
    for name, t in times.items():
        print(f"{name:>26}: median {1e3 * np.median(t):.2f} ms, ratio to the radiation "
              f"form (min-based) {min(t) / reference:.2f}x")
    for name, f in list(funcs.items())[:2]:
        one, pool = wall_medians(f, blocks_from_argv(BLOCKS))
        print(f"{name:>26}: wall-time median {1e3 * one:.2f} ms with one BLAS thread, "
              f"{1e3 * pool:.2f} ms with the default pool")


def wall_medians(func, blocks: int, calls: int = 10) -> tuple[float, float]:
    """Median wall times [s] of ``func`` with one BLAS thread and with the default pool
    (thread CPU time would not see the pool's threads wait): ``blocks`` rounds of
    ``calls`` calls each way, the limit entered once per round."""
    one, pool = [], []
    for _ in range(blocks):
        for times, limited in ((one, True), (pool, False)):
            with single_blas_thread() if limited else contextlib.nullcontext():
                for _ in range(calls):
                    start = time.perf_counter()
                    func()
                    times.append(time.perf_counter() - start)
    return float(np.median(one)), float(np.median(pool))


if __name__ == "__main__":
    main()
