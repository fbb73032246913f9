"""Re-evaluate f_PBH of a demo posterior with a local non-Gaussian map (README demo section).

Draws N posterior samples from a demo chain, takes their surrogate spectra on the batch
path's k table and evaluates f_PBH with each sample's own C_th, Gaussian and with the
local map at the given f_NL (scan/observables/pbh/ng_stack.py).  Synthetic demo only.

Run:  python tests/tools/demo_nongaussian.py RUN_FOLDER F_NL [N]
      (RUN_FOLDER holds chain.h5 and surrogate.h5 of `zetascan demo`)
"""
from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np

from scan.config import load_config
from scan.observables.batch import plan_batch
from scan.observables.pbh.ng_stack import plan_pbh_mapped
from scan.observables.pbh.zeta_map import zeta_map_of
from scan.observables.settings import settings_of
from scan.observables.window import spectra_on_table
from scan.posterior.blobs import peak_range
from scan.sampler.summary import posterior_samples
from scan.surrogate import load_surrogate

ROOT = Path(__file__).resolve().parents[2]


def main(run: Path, f_nl: float, n: int) -> None:
    cfg = load_config(ROOT / "configs" / "demo.toml")
    sur = load_surrogate(str(run / "surrogate.h5"), cfg)
    st = settings_of(cfg.observables)
    plan = plan_batch(sur.emulator.basis.x, peak_range(sur), st.conventions, dof=st.dof,
                      n_eff=st.n_eff)
    post = posterior_samples(run / "chain.h5")
    idx = np.random.default_rng(0).choice(len(post["samples"]), n, replace=False)
    names = list(post["names"])
    theta = post["samples"][idx]
    pred = sur.predict(theta[:, [names.index(k) for k in sur.space.keys]])
    table = spectra_on_table(plan.lnk_table, pred.ln_k_peak, plan.x,
                             pred.log10_P_peak[:, None] + pred.shape)
    zmap = zeta_map_of("local", f_nl=f_nl)
    totals = np.empty((n, 2))
    for j, c_th in enumerate(theta[:, names.index("pbh.threshold")]):
        conv = dataclasses.replace(st.conventions, threshold=float(c_th))
        res = plan_pbh_mapped(np.exp(plan.lnk_table), plan.pbh.M, conv, zmap, dof=st.dof,
                              n_eff=st.n_eff).evaluate(table[j])
        totals[j] = res.f_pbh_total_gaussian, res.f_pbh_total
    for col, name in enumerate(("gaussian", f"local f_NL = {f_nl:g}")):
        v = totals[:, col]
        print(f"{name}: median {np.median(v):.2e}, 95 % upper {np.quantile(v, 0.975):.2e}, "
              f"max {v.max():.2e}")
    shift = np.log10(np.maximum(totals[:, 1], 1e-300) / np.maximum(totals[:, 0], 1e-300))
    print(f"decades moved: median {np.median(shift):.0f}, range {shift.min():.0f} to "
          f"{shift.max():.0f}")


if __name__ == "__main__":
    main(Path(sys.argv[1]), float(sys.argv[2]), int(sys.argv[3]) if len(sys.argv) > 3 else 1000)
