"""zetascan from Python, notebook style (run by tests/test_api.py).

Run it from a checkout:  python docs/example_api.py [RUN_FOLDER]
RUN_FOLDER is a posterior run of ``zetascan sample`` (e.g. results/demo after
``zetascan demo``); without it the chain part is skipped.
"""
import sys
from pathlib import Path

import arviz as az
import numpy as np

import scan

CONFIG = Path(__file__).resolve().parents[1] / "configs" / "tmodel_pole.toml"


def example(config=CONFIG, run=None, n_k=48):
    # --- user code: one exact solve, its spectrum and observables as astropy Quantities
    sol = scan.solve(config, {"modes.n_k": n_k})         # a T-model with one kinetic pole
    k, P_zeta = sol.k, sol.P_zeta                         # [1/Mpc], dimensionless
    f, omega = sol.f, sol.omega_gw_h2                     # [Hz], Omega_GW,0 h^2 per ln f
    M, f_pbh = sol.M, sol.f_pbh                           # [solMass], f_PBH per ln M
    print(f"P_zeta peaks at k = {k[np.argmax(P_zeta)]:.3g}: {P_zeta.max():.3g}")
    print(f"Omega_GW h^2 peaks at f = {f[np.argmax(omega)].to('nHz'):.3g}")
    own = scan.observe(k, P_zeta, criterion="compaction", threshold=0.45)  # your conventions
    idata = scan.load_chain(run) if run else None         # burn-in and thinning applied
    table = az.summary(idata, kind="stats") if run else None  # every parameter and blob
    # --- end of user code
    return {"solution": sol, "k": k, "P_zeta": P_zeta, "f": f, "omega_gw_h2": omega,
            "M": M, "f_pbh": f_pbh, "own": own, "idata": idata, "summary": table}


if __name__ == "__main__":
    out = example(run=sys.argv[1] if len(sys.argv) > 1 else None)
    if out["summary"] is not None:
        print(out["summary"])
