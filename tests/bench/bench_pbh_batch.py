"""Benchmark: f_PBH of 64 walkers on the shared table (scan.observables.batch.pbh_on_table).

64 Gaussian peaks in log10 P on the emulator's relative grid (41 points, x in [-3, 3]),
ln k_peak uniform in [13, 31], log10 P_peak uniform in [-3, -1.3] (f_PBH,total from 0 up
to ~1e-15, default compaction criterion), 32 masses, as the posterior's plan.  Timed
side by side in alternating blocks (thread CPU time; medians and min-based ratios):

* pbh_on_table as used (windowed interpolation, beta from scan.observables.pbh.tables) vs the direct
  path (10 ** interp_uniform_shifted on the whole table, plan_pbh(..., tabulate=False));
* its pieces: table interpolation, sigma^2, mass-weighted beta on the live pairs.

Run:  python tests/bench/bench_pbh_batch.py [criterion]
"""
from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import sys  # noqa: E402

import numpy as np  # noqa: E402
from _timing import alternating_times  # noqa: E402

from scan.observables.batch import interp_uniform_shifted, pbh_on_table, plan_batch
from scan.observables.pbh import PBHConventions, beta_weighted, plan_pbh  # noqa: E402
from scan.observables.pbh.plan import _live_epochs  # noqa: E402
from scan.observables.pbh.tables import beta_tabulated  # noqa: E402
from scan.observables.window import spectra_on_table  # noqa: E402

M_WALKERS, BLOCKS, BLOCK = 64, 20, 10


def main() -> None:
    criterion = sys.argv[1] if len(sys.argv) > 1 else "compaction"
    conv = PBHConventions(criterion=criterion,
                          threshold=0.5 if criterion == "compaction" else 0.45)
    x = np.linspace(-3.0, 3.0, 41)
    rng = np.random.default_rng(1)
    ln_k = rng.uniform(13.0, 31.0, M_WALKERS)
    log10_p = rng.uniform(-3.0, -1.3, M_WALKERS)[:, None] - 0.5 * x[None, :]**2
    plan = plan_batch(x, (12.0, 32.0), conv, n_mass=32)
    direct = plan_pbh(np.exp(plan.lnk_table), plan.pbh.M, conv, tabulate=False)

    def slow():
        return direct.evaluate(10.0 ** interp_uniform_shifted(plan.lnk_table, ln_k, plan.x,
                                                               log10_p))

    P = spectra_on_table(plan.lnk_table, ln_k, plan.x, log10_p)
    s2, k2 = plan.pbh.sigma2(P)
    s2 = np.maximum(s2, 1e-300)
    live = _live_epochs(s2, k2, conv)
    s_live, k_live = s2[live], k2[live]
    fast, ref = pbh_on_table(plan, ln_k, log10_p), slow()
    ok = ref.f_pbh_total > 1e-250
    dev = np.max(np.abs(fast.f_pbh_total[ok] / ref.f_pbh_total[ok] - 1))
    print(f"{M_WALKERS} walkers x {plan.lnk_table.size} table points, {plan.pbh.M_H.size} "
          f"epochs ({live.sum()} live pairs), {plan.pbh.M.size} masses; {criterion}; "
          f"max |rel dev| of f_PBH,total vs direct {dev:.1e}")
    rows = [("pbh_on_table", lambda: pbh_on_table(plan, ln_k, log10_p), slow),
            ("table interp", lambda: spectra_on_table(plan.lnk_table, ln_k, plan.x, log10_p),
             lambda: 10.0 ** interp_uniform_shifted(plan.lnk_table, ln_k, plan.x, log10_p)),
            ("sigma^2", lambda: plan.pbh.sigma2(P), lambda: P @ direct._v0.T),
            ("beta (live)", lambda: beta_tabulated(plan.pbh._beta_table, s_live, k_live),
             lambda: beta_weighted(s_live, k_live, conv))]
    for name, new, old in rows:
        t_new, t_old = alternating_times({"new": new, "old": old}, BLOCKS, BLOCK,
                                         warm_up=True).values()
        ratio = np.median(t_old) / np.median(t_new)
        print(f"  {name:13s} fast {1e3 * np.median(t_new):6.3f} ms  direct "
              f"{1e3 * np.median(t_old):6.3f} ms  ratio {ratio:5.2f}"
              f"  (min {min(t_old) / min(t_new):5.2f})")


if __name__ == "__main__":
    main()
