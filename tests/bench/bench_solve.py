"""Benchmark: one full exact solve, stage by stage, earlier path vs current (a script).

Run:  python tests/bench/bench_solve.py [repeats] [config]
Default config: configs/tmodel_pole.toml (T-model, one p = 1 pole, 128 modes, N* from
instant-reheating matching).  Stages: background (``solve_background``), table
(``build_table``: "bisect" = earlier, "scaled" = current), spectrum (``compute_spectrum``
including its table: ``reuse_modes=False, table_method="bisect"`` = earlier path,
defaults = current), total (background + pivot + spectrum; observables excluded).
The two paths are timed alternately in every repeat; medians and ratios are printed.
"""
from __future__ import annotations

import math
import statistics
import sys
import time
from pathlib import Path

from scan.background.pivot import solve_pivot
from scan.config import load_config
from scan.modes import build_table, compute_spectrum
from scan.pipeline import (PIVOT_MARGIN_EFOLDS, _n_star_rule, mode_settings_of, reheating_of,
                           solve_background_of)

ROOT = Path(__file__).resolve().parents[2]

PATHS = {"earlier": dict(reuse_modes=False, table_method="bisect"),
         "current": dict(reuse_modes=True, table_method="scaled")}


def one_solve(config, path: dict) -> dict[str, float]:
    """Wall times [s] of the stages of one solve along ``path``."""
    t0 = time.perf_counter()
    bg = solve_background_of(config)
    t1 = time.perf_counter()
    build_table(bg, bg.N_start, bg.N_end, mode_settings_of(config).table_tol,
                method=path["table_method"])
    t2 = time.perf_counter()
    reh = reheating_of(config)
    A_s = math.exp(config.pivot.ln_1e10_As) * 1e-10
    t3 = time.perf_counter()
    pivot = solve_pivot(bg, N_star=config.pivot.n_star, k_star=config.pivot.k_star,
                        reheating=reh, A_s=A_s, margin=PIVOT_MARGIN_EFOLDS)
    spec = compute_spectrum(bg, N_star=_n_star_rule(config, bg, reh, A_s),
                            n_modes=config.modes.n_k, k_star=config.pivot.k_star,
                            ln10As=config.pivot.ln_1e10_As, settings=mode_settings_of(config),
                            N_star_guess=pivot.N_star, **path)
    t4 = time.perf_counter()
    assert spec.valid, spec.reason
    return {"background": t1 - t0, "table": t2 - t1, "spectrum": t4 - t3,
            "total": (t1 - t0) + (t4 - t3), "P_peak": spec.P_peak, "n_s": spec.n_s,
            "V0": spec.V0}


def main(repeats: int = 7, config_path: str = str(ROOT / "configs" / "tmodel_pole.toml")):
    config = load_config(config_path)
    for path in PATHS.values():  # warm-up (imports, caches)
        one_solve(config, path)
    runs = {name: [] for name in PATHS}
    for _ in range(repeats):
        for name, path in PATHS.items():
            runs[name].append(one_solve(config, path))
    print(f"{config_path}: medians of {repeats} alternating repeats [ms]")
    print(f"{'stage':12s}" + "".join(f"{n:>12s}" for n in PATHS) + f"{'ratio':>10s}")
    for stage in ("background", "table", "spectrum", "total"):
        med = {n: 1e3 * statistics.median(r[stage] for r in runs[n]) for n in PATHS}
        print(f"{stage:12s}" + "".join(f"{med[n]:12.1f}" for n in PATHS)
              + f"{med['earlier'] / med['current']:10.2f}")
    a, b = runs["earlier"][-1], runs["current"][-1]
    print(f"results: P_peak {a['P_peak']:.7e} vs {b['P_peak']:.7e} "
          f"(rel {b['P_peak'] / a['P_peak'] - 1:.1e}); n_s {a['n_s']:.8f} vs {b['n_s']:.8f}; "
          f"V0 rel {b['V0'] / a['V0'] - 1:.1e}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 7, *sys.argv[2:3])
