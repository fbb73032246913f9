"""Exact inflationary background in e-folds, through integrable kinetic poles.

CONTRACT (shared with ``scan.modes``; keep it stable):

* ``BackgroundPoint`` — a frozen record of arrays ``phi, chi, dchi_dN, H, eps1, eps2``
  at given e-folds ``N`` (H in reduced Planck units for the potential's V0 = 1: the
  background in N does not depend on V0, H scales as sqrt(V0)).
* ``Background`` — the solution: ``valid``, ``reason``, ``N_start``, ``N_end`` (nan if
  inflation did not end), node arrays ``N, phi, chi, dchi_dN, H, eps1, eps2`` and
  ``evaluate(N) -> BackgroundPoint`` (dense output, vectorised over an array of N).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class BackgroundPoint:
    """The background at an array of e-folds (reduced Planck units, V0 = 1)."""

    N: np.ndarray
    phi: np.ndarray
    chi: np.ndarray
    dchi_dN: np.ndarray
    H: np.ndarray
    eps1: np.ndarray
    eps2: np.ndarray
