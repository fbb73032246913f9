"""Side-by-side timing for the benchmarks: functions called in turn, in alternating blocks.

Thread CPU time (:func:`time.thread_time`), so that other jobs on a shared machine cost
less than in wall time; the ratios are min-based (the least disturbed call of each).
Used by bench_pbh_nongaussian.py, bench_pbh_model_map.py and bench_pbh_batch.py.
"""
from __future__ import annotations

import sys
import time
from collections.abc import Callable

import numpy as np


def alternating_times(funcs: dict[str, Callable[[], object]], blocks: int,
                      calls: int = 1, warm_up: bool = False) -> dict[str, list[float]]:
    """Thread CPU times [s] of each function: ``blocks`` rounds, in each of which every
    function in turn is called ``calls`` times (after one untimed call if ``warm_up``)."""
    times: dict[str, list[float]] = {name: [] for name in funcs}
    for _ in range(blocks):
        for name, f in funcs.items():
            if warm_up:
                f()
            for _ in range(calls):
                start = time.thread_time()
                f()
                times[name].append(time.thread_time() - start)
    return times


def blocks_from_argv(default: int) -> int:
    """The number of blocks: ``--blocks N`` on the command line, else ``default``."""
    if "--blocks" in sys.argv:
        return int(sys.argv[sys.argv.index("--blocks") + 1])
    return default


def print_ratios(times: dict[str, list[float]], base: str = "gaussian stack") -> None:
    """One line per function: its median time [s] and its min-based ratio to ``base``."""
    reference = min(times[base])
    for name, t in times.items():
        print(f"{name:>35}: median {np.median(t):.4f} s, ratio to Gaussian (min-based) "
              f"{min(t) / reference:.2f}x")
