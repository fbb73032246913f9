"""Benchmark: f_PBH for 64 spectra with one threshold each vs one threshold for all.

64 log-normal peaks (random position and width) on a 600-point ln k table (step 0.05,
as the sampler's), 32 output masses, amplitudes tuned so f_PBH,total runs from 1e-10 to
1 at the middle threshold; per-row thresholds uniform in the range.  Both evaluations
are timed alternately in one run; medians of the repeats and their ratio are printed.

The last case has the QCD-era conventions (harada-scaled threshold, gamma-of-w exponent:
a threshold factor and an exponent per formation epoch).  Measured (qcdsample branch, 3
runs, 2-core machine shared, nice 15): compaction critical per-row / fixed 1.85-2.06,
with the QCD-era conventions 1.98-2.55.

qcdspeed branch (the per-row plan's beta quadrature and critical mass function as
compiled block loops with vectorised exp/log: scan/observables/pbh/pair_beta.py,
pair_mass.py), this file run against main 88a344e alternately, 3 runs each (nice 15):
per-row / fixed for compaction critical 2.02-2.25 -> 1.17-1.24, press-schechter critical
1.28-1.30 -> 0.92-1.00, peaks critical 1.16-1.18 -> 0.95-0.98 (the fixed plan keeps
numpy's exp), monochromatic 1.07-1.09 / 1.08-1.13 (same code), compaction + QCD
2.37-2.43 -> 1.17-1.18.  f(M) against main within 6.7e-16 where >= 1e-30 of its row's
largest value, totals within 5.6e-16 in all five cases.

Run: python tests/bench/bench_pbh_thresholds.py
"""
from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import dataclasses  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

from scan.observables import cosmo  # noqa: E402
from scan.observables.pbh import PBHConventions, plan_pbh, plan_pbh_thresholds  # noqa: E402

LNK = np.log(1e6) + 0.05 * np.arange(600)
K_IN = np.exp(LNK)
N_ROWS, N_MASS, REPEATS = 64, 32, 40
#: The QCD-era conventions of the last case (per-epoch thresholds and exponents).
QCD = {"qcd_threshold": "harada-scaled", "qcd_collapse": "gamma-of-w"}


def _spectra(plan, rng: np.random.Generator) -> np.ndarray:
    """64 peaks whose amplitudes give f_PBH,total log-uniform in [1e-10, 1] (bisection)."""
    centre = rng.uniform(LNK[0] + 5, LNK[-1] - 5, N_ROWS)
    width = rng.uniform(0.1, 1.0, N_ROWS)
    shape = np.exp(-(LNK[None, :] - centre[:, None])**2 / (2 * width[:, None]**2))
    target = np.log(np.logspace(-10, 0, N_ROWS))
    lo, hi = np.full(N_ROWS, np.log(1e-4)), np.full(N_ROWS, np.log(1.0))
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        with np.errstate(divide="ignore"):
            ln_f = np.log(plan.evaluate(np.exp(mid)[:, None] * shape).f_pbh_total)
        lo, hi = np.where(ln_f < target, mid, lo), np.where(ln_f < target, hi, mid)
    return np.exp(0.5 * (lo + hi))[:, None] * shape


def main() -> None:
    rng = np.random.default_rng(2024)
    masses = np.geomspace(float(cosmo.horizon_mass_msun(K_IN[-1])) * 1e-3,
                          float(cosmo.horizon_mass_msun(K_IN[0])), N_MASS)
    print(f"{N_ROWS} spectra x {K_IN.size} k, {N_MASS} masses; medians of {REPEATS}")
    for conv, rng_t, qcd in [(PBHConventions(), (0.4, 0.6), {}),
                             (PBHConventions(criterion="press-schechter", threshold=0.5),
                              (0.41, 0.6), {}),
                             (PBHConventions(criterion="peaks", threshold=0.5), (0.41, 0.6),
                              {}),
                             (PBHConventions(mass_function="monochromatic"), (0.4, 0.6), {}),
                             (PBHConventions(), (0.4, 0.6), QCD)]:
        conv = dataclasses.replace(conv, threshold=0.5 * sum(rng_t))
        fixed = plan_pbh(K_IN, masses, conv)
        per_row = plan_pbh_thresholds(K_IN, masses, conv, rng_t, **qcd)
        P = _spectra(fixed, rng)
        t = rng.uniform(*rng_t, N_ROWS)
        t_fix, t_row, t_var = [], [], []
        for _ in range(REPEATS):
            start = time.perf_counter()
            res_fix = fixed.evaluate(P)
            t_fix.append(time.perf_counter() - start)
            start = time.perf_counter()
            res_row = per_row.evaluate(P, t)
            t_row.append(time.perf_counter() - start)
            start = time.perf_counter()
            fixed.sigma2(P)
            t_var.append(time.perf_counter() - start)
        same = per_row.evaluate(P, conv.threshold).f_pbh_total
        dev = np.max(np.abs(same / res_fix.f_pbh_total - 1))
        fix, row, var = (1e3 * np.median(v) for v in (t_fix, t_row, t_var))
        label = f"{conv.criterion:15s} {conv.mass_function:13s}" if not qcd else \
            "compaction+QCD  critical     "
        print(f"{label} fixed {fix:6.2f} ms  per-row "
              f"{row:6.2f} ms  ratio {row / fix:4.2f}  (sigma^2 {var:4.2f} ms; f_tot "
              f"{res_fix.f_pbh_total.min():.0e}..{res_fix.f_pbh_total.max():.0e} fixed, "
              f"{res_row.f_pbh_total.min():.0e}..{res_row.f_pbh_total.max():.0e} per-row; "
              + (f"max |rel dev| at a common threshold {dev:.1e})" if not qcd else
                 "per-epoch QCD thresholds and exponents: f_tot differs by design)"))


if __name__ == "__main__":
    main()
