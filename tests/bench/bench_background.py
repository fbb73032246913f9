"""Benchmark: median wall time of one exact background solve (a script, not a test).

Run:  python tests/bench/bench_background.py [repeats]
Prints the median over ``repeats`` solves for a T-model with one pole (p = 1,
c = 0.03, the reference pole model of shared/physics/inflation.md §5 moved to a
T-model), for p = 0.5 and 1.5 poles, and for Starobinsky without poles.  The first solve
of each model (imports, automatic start, caches) is timed separately.
"""
from __future__ import annotations

import statistics
import sys
import time

from scan.background import solve_background
from scan.models import Model, Pole

MODELS = {
    "t_model + pole p=1 w=0.03": Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.03, 1.0),)),
    "t_model + pole p=0.5 w=0.1": Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.1, 0.5),)),
    "t_model + pole p=1.5 w=0.004": Model("t_model", kinetic="poles",
                                          poles=(Pole(5.0, 0.004, 1.5),)),
    "starobinsky (no pole)": Model("starobinsky"),
}


def main(repeats: int = 30) -> None:
    for name, model in MODELS.items():
        t0 = time.perf_counter()
        bg = solve_background(model)
        first = time.perf_counter() - t0
        times = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            solve_background(model)
            times.append(time.perf_counter() - t0)
        print(f"{name:32s} median {1e3 * statistics.median(times):7.2f} ms   first "
              f"{1e3 * first:7.2f} ms   nodes {bg.N.size:4d}   N_end {bg.N_end:.4f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 30)
