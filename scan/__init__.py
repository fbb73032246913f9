"""zetascan: confront inflation models that enhance small-scale curvature perturbations
with induced gravitational waves, primordial black holes and the CMB pivot.

Stages (each a module of pure functions over arrays and small frozen values):
config -> models -> background -> pivot -> modes -> cosmo/sigw/pbh -> curves/likelihood
-> surrogate -> sampler/grid.  I/O (``store``), the command line (``cli``) and figures
(``plots``) live at the edges.
"""
from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _version

try:
    __version__ = _version("zetascan")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
