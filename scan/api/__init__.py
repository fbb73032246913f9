"""zetascan's Python API: the command line's verbs as functions returning small records
whose arrays carry astropy units.

>>> import scan
>>> sol = scan.solve("configs/tmodel_pole.toml", {"modes.n_k": 48})   # doctest: +SKIP
>>> sol.k, sol.P_zeta              # Quantity [1/Mpc], Quantity [dimensionless]
>>> sol.f, sol.omega_gw_h2         # Quantity [Hz], Ω_GW,0 h² per ln f
>>> sol.M, sol.f_pbh               # Quantity [solMass], f_PBH per ln M
>>> obs = scan.observe(k, P_zeta, criterion="compaction", threshold=0.5)
>>> scan.load_result("results/tmodel_pole.h5")
>>> idata = scan.load_chain("results/pole_scan")      # ArviZ InferenceData

See ``docs/example_api.py`` for a worked example (run by the tests).
"""
from scan.api.calls import as_config, load_result, observe, solve, toml_text
from scan.api.chain import chain_arrays, load_chain
from scan.api.records import REDUCED_PLANCK_MASS, Observed, Solution

__all__ = ["REDUCED_PLANCK_MASS", "Observed", "Solution", "as_config", "chain_arrays",
           "load_chain", "load_result", "observe", "solve", "toml_text"]
