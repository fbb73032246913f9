"""Guards of the exact background: arithmetic failures and the names of stuck poles.

Kept apart from the integration (:mod:`scan.background.solve`) so the numerical kernel
can change without touching what a user reads when a model is invalid.
"""
from __future__ import annotations

import math

from scan.background.types import Chart, chart_map
from scan.models import Model, kernel, pole_number

#: Arithmetic errors a trial stage can raise far from the accepted solution (e.g. a
#: pole chart of power p near 2 maps s to u = |s|^{1/(1 - p/2)}, cosh(u) overflows).
ARITHMETIC = (OverflowError, ZeroDivisionError, ValueError)


def overflow_reason(err: Exception, N: float) -> str:
    """Reason text of an integration that failed in floating-point arithmetic."""
    return (f"floating-point failure in the background after N = {N:.6g} "
            f"({type(err).__name__}: {err}); the pole is too narrow or the potential "
            f"vanishes on the path (V = 0)")


def describe_pole(model: Model, position: float) -> str:
    """``the pole at phi = X (pole I of the config)``, I its config number."""
    number = pole_number(model, position)
    return f"the pole at phi = {position:g}" + (f" (pole {number} of the config)"
                                                  if number >= 0 else "")


def stuck_pole(model: Model, chart: Chart, x: float, moving: float) -> str:
    """The pole the field is stuck before: the next one ahead, if it lies in the current
    chart (the field has not reached it); "" otherwise.

    Parameters
    ----------
    chart : Chart
        The chart the integration ended in.
    x : float
        The chart coordinate at the end.
    moving : float
        Sign of dφ/dN (+1 or -1).
    """
    kern = kernel(model)
    phi = chart_map(kern, chart, x, math)[0]
    ahead = [s.position for s in kern.singular if (s.position - phi) * moving >= 0.0
             and chart.lo <= s.position <= chart.hi]
    if not ahead:
        return ""
    position = min(ahead, key=lambda p: abs(p - phi))
    gap = abs(phi - position)
    where = f"|phi - phi_pole| = {gap:.3g}" if gap > 0 else "on it to double precision"
    return f"the field stalls before {describe_pole(model, position)} ({where})"


def nearest_pole_at(model: Model, nodes: list, flat: int) -> str:
    """``" at pole I (phi = X)"`` for the pole nearest the field at node ``flat`` of the
    concatenated solution nodes ``[(chart, N, y), ...]``; "" without poles."""
    kern = kernel(model)
    for chart, t, y in nodes:
        if flat < t.size:
            phi = chart_map(kern, chart, float(y[0, flat]), math)[0]
            break
        flat -= t.size
    else:
        return ""
    if not kern.singular:
        return ""
    position = min((s.position for s in kern.singular), key=lambda p: abs(p - phi))
    return f" near {describe_pole(model, position)}"
