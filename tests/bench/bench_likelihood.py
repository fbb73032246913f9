"""Benchmark: all demo likelihood terms on one model (target <= 1 ms). Not a test.

Run: python tests/bench/bench_likelihood.py
"""
from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from scan.likelihood import terms_from_directory, total_loglike
from scan.observables import Observables

DEMO = Path(__file__).resolve().parents[2] / "constraints" / "demo"


def main(repeats: int = 2000) -> None:
    terms = terms_from_directory(DEMO)
    f = np.geomspace(1e-10, 1e3, 400)
    lnm = np.linspace(-50.0, 10.0, 300)
    obs = Observables(f_hz=f, omega_gw_h2=4e-9 * np.exp(-0.5 * (np.log(f / 3e-8) / 1.2) ** 2),
                      m_msun=np.exp(lnm), f_pbh_per_lnm=1e-3 * np.exp(-0.5 * (lnm + 30.0) ** 2),
                      n_s=0.965, ln_1e10_as=3.044, r=0.01)
    nuisance = {"A_smbhb": 1e-16}
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        total_loglike(terms, obs, nuisance)
        times.append(time.perf_counter() - t0)
    print(f"{len(terms)} terms ({', '.join(t.name for t in terms)})")
    print(f"median {1e3 * np.median(times):.3f} ms per model over {repeats} calls "
          f"(target <= 1 ms)")


if __name__ == "__main__":
    main()
