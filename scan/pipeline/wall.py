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

#: Relative accuracy of λ_w.  The map w(ρ) = w(λ_w)/ρ then carries a relative error of
#: 1e-4 in the width, far below the 1e-2 relative width changes that move log10 P_peak by
#: ~0.1 dex at P ≈ 1e-2 (issue 14: λ tuned to 0.2-1.4 % for P ≈ 1e-2).
WALL_RTOL = 1e-4
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
