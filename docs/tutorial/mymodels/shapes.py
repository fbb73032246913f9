"""A plug-in potential for the zetascan tutorial: V(phi)/V0 and its derivative.

zetascan calls these with numpy arrays of phi in reduced Planck units (M_p = 1); V0 is
never set here: the CMB amplitude fixes it.  This is the alpha = 1 T-model,
V/V0 = tanh^2(phi / sqrt(6)), written out as your own function would be.
"""
import numpy as np

SCALE = np.sqrt(6.0)


def V(phi):
    """V(phi) / V0, vectorised."""
    return np.tanh(phi / SCALE) ** 2


def dV(phi):
    """dV/dphi / V0 (optional: without it zetascan differentiates V numerically)."""
    t = np.tanh(phi / SCALE)
    return 2.0 * t * (1.0 - t * t) / SCALE
