"""The background interface the mode solver needs (duck-typed).

``scan.background.Background`` satisfies it; the tests build analytic backgrounds that
do too.  Only ``eps1``, ``H`` (and ``eps2`` for the initial data and the choice of the
end of integration) are used: the Hamiltonian form of the mode equations needs neither
``V_chichi`` nor ``eps3``.
"""
from __future__ import annotations

from typing import Protocol, runtime_checkable

import numpy as np


class PointLike(Protocol):
    """The background at an array of e-folds (reduced Planck units, V0 = 1)."""

    N: np.ndarray
    H: np.ndarray
    eps1: np.ndarray
    eps2: np.ndarray


@runtime_checkable
class BackgroundLike(Protocol):
    """A solved background in e-folds N (a = e^N), H for V0 = 1.

    Attributes
    ----------
    valid : bool
        False if the background itself is not to be trusted.
    reason : str
        Why it is invalid ("" if valid).
    N_start, N_end : float
        First e-fold of the solution; end of inflation (eps1 = 1), nan if none.
    N : ndarray
        Node e-folds of the solution (they include pole crossings and kinks).
    """

    valid: bool
    reason: str
    N_start: float
    N_end: float
    N: np.ndarray

    def evaluate(self, N: np.ndarray) -> PointLike:
        """Dense output at the e-folds ``N`` (vectorised)."""
        ...
