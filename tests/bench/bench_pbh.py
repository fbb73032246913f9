"""Benchmark: f_PBH(M) on 200 masses from a 256-point spectrum (after planning).

Run: python tests/bench/bench_pbh.py
"""
from __future__ import annotations

import time

import numpy as np

from scan.observables import cosmo
from scan.observables.pbh import PBHConventions, plan_pbh

K_IN = np.geomspace(1e10, 1e14, 256)
P_IN = 3e-2 * np.exp(-np.log(K_IN / 1e12)**2 / (2 * 0.5**2))


def main() -> None:
    m = float(cosmo.horizon_mass_msun(1e12))
    masses = np.geomspace(m * 1e-5, m * 1e3, 200)
    for conv in (PBHConventions(), PBHConventions(criterion="peaks", threshold=0.45),
                 PBHConventions(criterion="press-schechter", threshold=0.45,
                                mass_function="monochromatic")):
        start = time.perf_counter()
        plan = plan_pbh(K_IN, masses, conv)
        t_plan = time.perf_counter() - start
        times = []
        for _ in range(100):
            start = time.perf_counter()
            res = plan.evaluate(P_IN)
            times.append(time.perf_counter() - start)
        print(f"{conv.criterion:15s} {conv.mass_function:13s} plan {t_plan * 1e3:6.1f} ms, "
              f"evaluate median {1e3 * np.median(times):.2f} ms, f_tot = {res.f_pbh_total:.3e}")


if __name__ == "__main__":
    main()
