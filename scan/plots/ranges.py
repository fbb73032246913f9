"""Axis ranges of log-log figures that show what matters: peaks and bound curves."""
from __future__ import annotations

from collections.abc import Iterable

import numpy as np


def log_span(x: np.ndarray, y: np.ndarray, depth: float = np.inf
             ) -> tuple[float, float, float, float] | None:
    """``(x_lo, x_hi, y_lo, y_hi)`` of the part of a curve within ``depth`` decades of its peak.

    Non-positive and non-finite values are ignored; None when nothing is left.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    keep = np.isfinite(x) & np.isfinite(y) & (y > 0) & (x > 0)
    if not keep.any():
        return None
    x, y = x[keep], y[keep]
    peak = float(y.max())
    near = y >= peak * 10.0 ** -depth
    return float(x[near].min()), float(x[near].max()), float(y[near].min()), peak


def union_limits(spans: Iterable[tuple[float, float, float, float] | None],
                 x_pad: float = 1.5, y_pad: tuple[float, float] = (3.0, 30.0),
                 max_decades: float = 16.0):
    """Padded union of spans: ``((x_lo, x_hi), (y_lo, y_hi))``, or None if all are None.

    The y range is cut to ``max_decades`` below its top so that one very faint curve
    does not flatten the others.
    """
    spans = [s for s in spans if s is not None]
    if not spans:
        return None
    x_lo, x_hi = min(s[0] for s in spans) / x_pad, max(s[1] for s in spans) * x_pad
    y_hi = max(s[3] for s in spans) * y_pad[1]
    y_lo = max(min(s[2] for s in spans) / y_pad[0], y_hi * 10.0 ** -max_decades)
    return (x_lo, x_hi), (y_lo, y_hi)


def latex_number(value: float) -> str:
    """``4.9 \\times 10^{-175}`` style mantissa-exponent text (for mathtext)."""
    if not np.isfinite(value) or value == 0:
        return f"{value:g}"
    exponent = int(np.floor(np.log10(abs(value))))
    mantissa = value / 10**exponent
    return rf"{mantissa:.2g} \times 10^{{{exponent}}}" if abs(exponent) > 2 else f"{value:.3g}"


def note_if_below(ax, values: np.ndarray, what: str, color: str, row: int = 0,
                  floor: float = 0.0) -> bool:
    """Write "<what> peaks at ..., below the axis" when all of ``values`` lie below the
    y axis (values at ``floor``, a plotting floor, mean "at or below it"); ``row`` stacks
    several notes.  Returns True if a note was written."""
    values = np.asarray(values, float)
    positive = values[np.isfinite(values) & (values > 0)]
    top = float(positive.max()) if positive.size else 0.0
    if top >= ax.get_ylim()[0]:
        return False
    if top <= floor:
        text = f"{what} is at or below ${latex_number(floor)}$ everywhere"
    else:
        text = f"{what} peaks at ${latex_number(top)}$, below the axis" if top > 0 \
            else f"{what} is zero everywhere"
    ax.text(0.03, 0.04 + 0.07 * row, text,
            transform=ax.transAxes, fontsize=6.5, color=color)
    return True
