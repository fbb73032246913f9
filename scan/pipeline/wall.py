"""The wall of a pole: the smallest sharpness λ_w at which its model is still valid.

Below λ_w the field stalls at the pole (p ≥ 1: both canonical derivatives vanish there)
or the pole's phase moves onto CMB scales (every p, and the only wall for p < 1).  The
enhancement grows without bound toward the wall for p ≥ 1, so ρ = λ/λ_w normalises the
power: a box in ρ just above 1 holds enhanced models at every power, where a box in λ
is stalled for p ≳ 1.1 (issue 14: λ_c ≈ 0.85 at p = 1, 2.8 at 1.5, 5.0 at 1.9).

The wall is located by bisection in ln λ on a yes/no test (an exact background and
pivot, no modes); :func:`locate_wall` is the pure search, the pipeline supplies the test.
"""
from __future__ import annotations

import math
from collections.abc import Callable

#: Relative accuracy of λ_w.  A model at wall distance d = ρ - 1 inherits a relative
#: error WALL_RTOL/d in d, and near the wall ln k_peak moves by 3.5-7 per unit of ln d
#: (wide_scan_high, p = 1.24-1.34, measured): with 1e-4 at d = 2e-3 that was up to 0.15 in
#: ln k_peak and 0.03 dex in P_peak, and since the bisection's final bracket jumps as the
#: power changes, ln k_peak(p) became a step function the emulator could not follow (steps
#: of 1e-3 in the unit cube moved it by -0.11/+0.001).  At 1e-8 the error is below 1e-5 in
#: ln d over the shipped boxes (d >= 1e-3); the validity test itself (background at rtol
#: 1e-10) agreed with a 1e-10 bisection to 3e-9.  Cost: 30 instead of 16 background solves,
#: ~+0.4 s on a ~1.8 s model.
WALL_RTOL = 1e-8
#: Search range of λ_w.
LAMBDA_RANGE = (1e-3, 1e3)


class NoWall(Exception):
    """No sign change of validity inside :data:`LAMBDA_RANGE`."""


def locate_wall(valid_at: Callable[[float], bool], start: float = 1.0,
                rtol: float = WALL_RTOL) -> float:
    """The smallest λ with ``valid_at(λ)`` true, assuming validity is monotone in λ.

    Parameters
    ----------
    valid_at : callable
        ``valid_at(λ) -> bool`` (an exact background solve at sharpness λ).
    start : float
        First λ tried; the bracket grows by factors of 4 from there.
    rtol : float
        Relative width of the final bracket; its valid end is returned.

    Raises
    ------
    NoWall
        If every λ in :data:`LAMBDA_RANGE` tried is valid (or every one invalid).
    """
    lo_lim, hi_lim = LAMBDA_RANGE
    lam = start
    if valid_at(lam):
        hi = lam
        while True:
            lam /= 4.0
            if lam < lo_lim:
                raise NoWall(f"valid down to sharpness {lam * 4.0:g}")
            if not valid_at(lam):
                lo = lam
                break
            hi = lam
    else:
        lo = lam
        while True:
            lam *= 4.0
            if lam > hi_lim:
                raise NoWall(f"invalid up to sharpness {lam / 4.0:g}")
            if valid_at(lam):
                hi = lam
                break
            lo = lam
    while hi / lo - 1.0 > rtol:
        mid = math.sqrt(lo * hi)
        if valid_at(mid):
            hi = mid
        else:
            lo = mid
    return hi
