"""Measure which one-map representation reproduces the model's own delta-N f_PBH.

For models of a training store with log10 P_peak >= a level (default -2.5), solve the
model exactly, compute its delta-N map at the peak (:func:`scan.observables.pbh.deltan.
peak_map`), fit it over |zeta_G| <= 5 sqrt(P_peak) by the logarithmic map's lambda and by
local (f_NL, g_NL) (:mod:`scan.observables.pbh.map_fit`), and compare f_PBH of each
(per-spectrum path) with f_PBH of the tabulated map itself.  Prints one line per model
and the summary (dex); also the wall time of the delta-N map against the solve.

Run:  python tests/tools/ng_representation.py CONFIG STORE [N] [LEVEL] [TOP]
      (STORE: a training.h5 made from CONFIG, or "prior" for uniform draws in its box
      (uniform priors only); N models, default 24, with LEVEL <= log10 P_peak < TOP,
      default -2.5 and no top)
"""
from __future__ import annotations

import math
import sys
import time

import h5py
import numpy as np

from scan.api.calls import as_config
from scan.observables.pbh.deltan import peak_map
from scan.observables.pbh.map_fit import fit_capped, fit_local, fit_logarithmic
from scan.observables.pbh.nongaussian import plan_nongaussian
from scan.observables.pbh.plan import plan_pbh
from scan.observables.pbh.zeta_map import ZetaMap
from scan.observables.settings import settings_of
from scan.observables.single import (
    N_FORMATION,
    mass_grid,
    max_table_rows,
    resample_table,
)
from scan.pipeline.solve import solve_config

_FLOOR = 1e-300
#: Models whose exact f_PBH is below this are left out of the summary (no bound curve
#: reaches there, common practice): their abundance comes from zeta_G far beyond the
#: delta-N table (6 sqrt(P_peak)), where the model map is the table's linear continuation.
LIVE = 1e-30


def totals(cfg, spectrum, maps):
    """f_PBH totals [1] of one spectrum with each map (per-spectrum path)."""
    st = settings_of(cfg.observables)
    k, P, _ = resample_table(spectrum.k, spectrum.P_zeta, max_table_rows(st.n_f))
    M = mass_grid(k, st.conventions, st.n_m, st.dof, st.n_eff)
    plan = plan_pbh(k, M, st.conventions, n_formation=N_FORMATION, dof=st.dof,
                    n_eff=st.n_eff)
    ng = plan_nongaussian(plan, N_FORMATION)
    return [float(ng.evaluate(P, m).f_pbh_total) for m in maps]


def candidates(base, store: str, level: float, top: float) -> np.ndarray:
    """Parameter vectors to try: a store's points with LEVEL <= log10 P_peak < TOP in
    random order, or (STORE = "prior") 400 uniform draws in the config's box (those outside
    the level are solved and skipped)."""
    rng = np.random.default_rng(0)
    if store == "prior":
        low = np.array([p.low for p in base.parameters], float)
        high = np.array([p.high for p in base.parameters], float)
        return low + (high - low) * rng.random((400, low.size))
    with h5py.File(store, "r") as h:
        params = h["points/params"][...]
        logp = h["points/scalars"][:, 1]
    pick = np.flatnonzero(np.isfinite(logp) & (logp >= level) & (logp < top))
    return params[pick[rng.permutation(pick.size)]]


def main(config: str, store: str, n: int, level: float, top: float = math.inf) -> None:
    base = as_config(config)
    keys = [p.key for p in base.parameters]
    params = candidates(base, store, level, top)
    rows = []
    for theta in params:
        if len(rows) == n:
            break
        cfg = as_config(base, {k: float(v) for k, v in zip(keys, theta)})
        t0 = time.perf_counter()
        res = solve_config(cfg, with_observables=False)
        t1 = time.perf_counter()
        if not res.valid or not (level <= math.log10(res.spectrum.P_peak) < top):
            continue
        s = res.spectrum
        dn = peak_map(res.background, s.k_peak, s.P_peak, s.N_star, s.k_star)
        t2 = time.perf_counter()
        sigma = math.sqrt(s.P_peak)
        lam = fit_logarithmic(dn.zeta_map, sigma)
        f_nl, g_nl = fit_local(dn.zeta_map, sigma)
        cap = fit_capped(dn.zeta_map, sigma)
        largest = fit_capped(dn.zeta_map, sigma, cap="max")
        maps = [ZetaMap(), dn.zeta_map, ZetaMap("logarithmic", log_lambda=lam.log_lambda),
                ZetaMap("local", f_nl=f_nl, g_nl=g_nl), cap.zeta_map(), largest.zeta_map()]
        f_g, f_m, f_log, f_loc, f_cap, f_top = (max(v, _FLOOR) for v in totals(cfg, s, maps))
        d_log, d_loc = math.log10(f_log / f_m), math.log10(f_loc / f_m)
        d_cap, d_top = math.log10(f_cap / f_m), math.log10(f_top / f_m)
        rows.append((math.log10(s.P_peak), f_m, d_log, d_loc, t1 - t0, t2 - t1, d_cap,
                     d_top))
        print(f"log10P {math.log10(s.P_peak):6.3f}  f_G {f_g:8.2e}  f_model {f_m:8.2e}  "
              f"lambda {lam.log_lambda:6.3f} (rms {lam.rms:.1e})  f_NL {f_nl:6.3f} "
              f"g_NL {g_nl:7.3f}  capped ({cap.log_lambda:.3f}, {cap.slope_max:.3f}; rms "
              f"{cap.rms:.1e})  dex log {d_log:+.3f} local {d_loc:+.3f} "
              f"capped {d_cap:+.3f} capped-max ({largest.log_lambda:.3f}, {largest.slope_max:.3f}) "
              f"{d_top:+.3f}  "
              f"solve {t1 - t0:.1f} s  deltaN {t2 - t1:.1f} s", flush=True)
    r = np.array(rows)
    print(f"largest f_PBH: model map {r[:, 1].max():.2e}")
    alive = r[:, 1] > LIVE
    if not alive.any():
        return
    for name, col in (("logarithmic", 2), ("local", 3), ("capped logarithmic", 6),
                      ("capped at the largest slope", 7)):
        d = np.abs(r[alive, col])
        print(f"{name}: |dex| median {np.median(d):.3f}, 90 % {np.quantile(d, 0.9):.3f}, "
              f"max {d.max():.3f} over {alive.sum()} models with f_PBH > {LIVE:g}")
    print(f"delta-N / solve wall time: median {np.median(r[:, 5] / r[:, 4]):.2f}")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]) if len(sys.argv) > 3 else 24,
         float(sys.argv[4]) if len(sys.argv) > 4 else -2.5,
         float(sys.argv[5]) if len(sys.argv) > 5 else math.inf)
