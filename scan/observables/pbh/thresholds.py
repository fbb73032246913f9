"""Collapse thresholds and the non-linear compaction function.

* Harada, Yoo & Kohri 2013 (arXiv:1309.4201): delta_c(w) on comoving slicing.
* Young, Musco & Byrnes 2019 (arXiv:1904.00984); De Luca et al. 2019 (arXiv:1904.00970):
  C = C_l - (3/8) C_l^2 with C_l Gaussian; type I is C_l < 4/3 where C peaks at 2/3.
"""
from __future__ import annotations

import math

import numpy as np

#: Type-I bound on the linear compaction C_l and the maximum of C.
C_L_MAX: float = 4.0 / 3.0
C_MAX: float = 2.0 / 3.0


def delta_c_harada(w: float = 1 / 3) -> float:
    """delta_c = [3(1+w)/(5+3w)] sin^2(pi sqrt(w)/(1+3w)) [1] (Harada, Yoo & Kohri 2013)."""
    return 3 * (1 + w) / (5 + 3 * w) * math.sin(math.pi * math.sqrt(w) / (1 + 3 * w))**2


def compaction_nonlinear(c_l):
    """C = C_l - (3/8) C_l^2 [1] from the linear (Gaussian) compaction ``c_l`` [1]."""
    c_l = np.asarray(c_l, dtype=float)
    return c_l - 0.375 * c_l * c_l


def compaction_linear(c):
    """Type-I inverse C_l = (4/3)[1 - sqrt(1 - 3C/2)] [1] for C <= 2/3."""
    c = np.asarray(c, dtype=float)
    return (4 / 3) * (1 - np.sqrt(np.clip(1 - 1.5 * c, 0.0, None)))


def compaction_linear_threshold(c_th: float) -> float:
    """C_l,th = (4/3)[1 - sqrt(1 - 3 C_th/2)] [1]; requires 0 < C_th < 2/3."""
    if not 0 < c_th < C_MAX:
        raise ValueError(f"compaction threshold must lie in (0, 2/3), got {c_th}")
    return float(compaction_linear(c_th))
