"""Root finding on a monotone quantity bounded by walls (for :mod:`scan.pipeline.tune`).

Pure functions: an Illinois (modified regula falsi) iteration whose bracket ends may be
infinite (a wall: invalid models beyond it), bisected until finite values take over.
"""
from __future__ import annotations

import math
from collections.abc import Callable

#: Narrowest bracket in ln w (or φᵢ) before a target is declared unreachable.
MIN_GAP = 1e-7


class Unreachable(Exception):
    """The search stops: budget used up, bracket closed on a wall, or saturation."""


def illinois(f: Callable[[float], float], a: float, fa: float, b: float, fb: float,
             tol: float) -> float:
    """Illinois iteration for f(x) = 0 on a bracket (fa < 0 < fb, infinite values allowed:
    those ends are bisected); stops when |f| <= tol; returns the last x evaluated.

    Raises
    ------
    Unreachable
        When the bracket closes below :data:`MIN_GAP`, or its finite end stops moving
        next to an infinite one (:func:`_saturated`).
    """
    side = 0
    while True:
        if math.isfinite(fa) and math.isfinite(fb):
            x = b - fb * (b - a) / (fb - fa)
            lo, hi = min(a, b), max(a, b)
            if not lo + 1e-3 * (hi - lo) < x < hi - 1e-3 * (hi - lo):
                x = 0.5 * (a + b)
        else:
            x = 0.5 * (a + b)
        fx = f(x)
        if abs(fx) <= tol:
            return x
        if abs(b - a) < MIN_GAP:
            raise Unreachable
        if (fx < 0) == (fa < 0):
            if not math.isfinite(fb) and _saturated(fa, fx, b - x, tol):
                raise Unreachable
            a, fa = x, fx
            if side == -1 and math.isfinite(fb):
                fb *= 0.5
            side = -1
        else:
            b, fb = x, fx
            if side == 1 and math.isfinite(fa):
                fa *= 0.5
            side = 1


#: A bracket narrower than this (in ln w) against a wall, with the valid end no longer
#: moving, means P_peak saturates below the target before the wall (seen for p < 1).
SATURATION_GAP = 1e-3


def _saturated(f_old: float, f_new: float, gap: float, tol: float) -> bool:
    """The valid end moved by less than tol/2 while the wall is within SATURATION_GAP."""
    return (math.isfinite(f_old) and math.isfinite(f_new) and abs(f_new - f_old) < 0.5 * tol
            and abs(gap) < SATURATION_GAP)
