"""Measure how well a kernel regressor emulates the capped logarithmic fit of the δN map,
and what its error does to f_PBH.

Takes N models of a training store with log10 P_peak >= -2.5 (random order), solves each,
fits its delta-N map (scan/observables/pbh/map_fit.py fit_capped), fits the emulator's
regressor (scan/surrogate/gp.py fit_best, as the surrogate's ``ng`` block) on the first
N - H and predicts the last H; reports the hold-out errors of lambda and ln(slope_max - 1)
and |d log10 f_PBH| of each hold-out spectrum with the emulated against the fitted map
(per-spectrum path), besides the fitted map against the tabulated one.  A real training
has more points above the level (and adaptive refinement), so this is a pessimistic
check of the emulation step.

Run:  python tests/tools/ng_emulation.py CONFIG STORE [N] [H]
"""
from __future__ import annotations

import math
import sys

import h5py
import numpy as np
from ng_representation import totals

from scan.api.calls import as_config
from scan.observables.pbh.deltan import peak_map
from scan.observables.pbh.map_fit import NG_LEVEL, fit_capped
from scan.observables.pbh.zeta_map import ZetaMap
from scan.pipeline.solve import solve_config
from scan.surrogate.gp import fit_best, predict_gp
from scan.surrogate.space import from_config


def main(config: str, store: str, n: int, hold: int) -> None:
    base = as_config(config)
    keys = [p.key for p in base.parameters]
    space = from_config(base)
    with h5py.File(store, "r") as h:
        params = h["points/params"][...]
        logp = h["points/scalars"][:, 1]
    pick = np.flatnonzero(np.isfinite(logp) & (logp >= NG_LEVEL))
    pick = pick[np.random.default_rng(1).permutation(pick.size)[:n]]
    rows = []
    for j in pick:
        cfg = as_config(base, {k: float(v) for k, v in zip(keys, params[j])})
        res = solve_config(cfg, with_observables=False)
        if not res.valid:
            continue
        s = res.spectrum
        dn = peak_map(res.background, s.k_peak, s.P_peak, s.N_star, s.k_star)
        fit = fit_capped(dn.zeta_map, math.sqrt(s.P_peak))
        rows.append((space.to_unit(params[j][None])[0], fit, cfg, s, dn.zeta_map))
    train, test = rows[:-hold], rows[-hold:]
    y = np.array([[r[1].log_lambda, math.log(r[1].slope_max - 1)] for r in train])
    gp = fit_best(np.array([r[0] for r in train]), y)
    pred = predict_gp(gp, np.array([r[0] for r in test]))
    d_lam, d_cap, d_emu, d_fit = [], [], [], []
    for (u, fit, cfg, s, table), (lam, ln_cap) in zip(test, pred):
        emulated = ZetaMap("logarithmic", log_lambda=lam, slope_max=1 + math.exp(ln_cap))
        f_tab, f_fit, f_emu = (max(v, 1e-300) for v in totals(cfg, s, [table,
                                                                        fit.zeta_map(),
                                                                        emulated]))
        d_lam.append(lam - fit.log_lambda)
        d_cap.append(ln_cap - math.log(fit.slope_max - 1))
        if f_tab > 1e-30:
            d_emu.append(math.log10(f_emu / f_fit))
            d_fit.append(math.log10(f_fit / f_tab))
        print(f"lambda {fit.log_lambda:.3f} -> {lam:.3f}, slope_max {fit.slope_max:.3f} -> "
              f"{1 + math.exp(ln_cap):.3f}; f_PBH table {f_tab:.2e} fit {f_fit:.2e} "
              f"emulated {f_emu:.2e}", flush=True)
    for name, d in (("lambda", d_lam), ("ln(slope_max - 1)", d_cap),
                    ("log10 f_PBH emulated vs fitted map", d_emu),
                    ("log10 f_PBH fitted vs tabulated map", d_fit)):
        a = np.abs(np.array(d))
        print(f"{name}: |error| median {np.median(a):.3g}, max {a.max():.3g} "
              f"({a.size} hold-out models; {len(train)} training)")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]) if len(sys.argv) > 3 else 60,
         int(sys.argv[4]) if len(sys.argv) > 4 else 15)
