"""Pole-crossing reports: the ultra-slow-roll and near-pole windows of a crossing."""
from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

from scan.background.types import Background, PoleCrossing
from scan.models import kernel, pole_number


def _edge(f, nodes: np.ndarray, values: np.ndarray, k: int, step: int) -> float:
    """Where f (negative at node k) first turns non-negative, stepping through the nodes
    by ``step`` (±1); the bracket from the node values is refined with brentq."""
    j = k
    while 0 <= j + step < nodes.size and values[j + step] < 0.0:
        j += step
    if not 0 <= j + step < nodes.size:
        return float(nodes[j])
    a, b = sorted((nodes[j], nodes[j + step]))
    return brentq(f, a, b, xtol=1e-10)


def crossing_report(bg: Background, index: int, N_c: float) -> PoleCrossing:
    """The USR window (ε2 < −3) and the near-pole window (|φ − φᵢ| < wᵢ) at a crossing.

    ``index`` is the pole's place in position order (the solver's charts); the report
    carries its config number (:func:`scan.models.pole_number`).
    """
    sing = kernel(bg.model).singular[index]
    k = int(np.argmin(abs(bg.N - N_c)))

    def usr(N: float) -> float:
        return float(bg.evaluate(N).eps2[0]) + 3.0

    def near(N: float) -> float:
        return abs(float(bg.evaluate(N).phi[0]) - sing.position) - sing.width

    windows = []
    for f, vals, ok in ((usr, bg.eps2 + 3.0, usr(N_c) < 0.0),
                        (near, abs(bg.phi - sing.position) - sing.width, sing.width > 0.0)):
        vals = vals.copy()
        vals[k] = -1.0
        a, b = (_edge(f, bg.N, vals, k, -1), _edge(f, bg.N, vals, k, 1)) if ok else (N_c, N_c)
        windows += [a, b, b - a]
    return PoleCrossing(pole_number(bg.model, sing.position), sing.position, N_c, *windows)
