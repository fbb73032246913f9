"""zetascan: confront inflation models that enhance small-scale curvature perturbations
with induced gravitational waves, primordial black holes and the CMB pivot.

The Python API (:mod:`scan.api`), in a notebook or a script:

* :func:`solve` — one configured model exactly (a TOML file, its tables as a dict, or a
  loaded config): P_ζ(k), the CMB pivot numbers, Ω_GW h²(f) and f_PBH(M);
* :func:`observe` — Ω_GW h²(f) and f_PBH(M) of your own P_ζ(k) (arrays or a table file);
* :func:`load_result` — a result file of ``zetascan solve`` or ``observe``;
* :func:`load_chain` — a posterior run (``zetascan sample``) as ArviZ InferenceData,
  burn-in and thinning applied, every parameter and derived quantity named.

Arrays are ``astropy.units.Quantity``: k in 1/Mpc, f in Hz, M in solar masses.  A worked
example is ``docs/example_api.py``.

Stages (each a module of pure functions over arrays and small frozen values):
config -> models -> background -> pivot -> modes -> cosmo/sigw/pbh -> curves/likelihood
-> surrogate -> sampler/grid.  I/O (``store``), the command line (``cli``) and figures
(``plots``) live at the edges.
"""
from scan.constants import ZETASCAN_VERSION as __version__
from scan.api import Observed, Solution, load_chain, load_result, observe, solve

__all__ = ["Observed", "Solution", "__version__", "load_chain", "load_result", "observe",
           "solve"]
