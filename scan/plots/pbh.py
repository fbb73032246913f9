"""Figure: f_PBH per ln M against M in M_sun, with a secondary axis in grams."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from scan import constants as C
from scan.plots.style import figure, save


def f_pbh_figure(M_msun, f_pbh, total: float | None = None):
    """Build the figure (log-log); returns the matplotlib Figure.

    Parameters
    ----------
    M_msun : array_like [M_sun]
    f_pbh : array_like [1]
        Fraction of dark matter per ln M.
    total : float [1], optional
        f_PBH integrated over ln M, shown in the legend.
    """
    fig, ax = figure()
    m, f = np.asarray(M_msun), np.asarray(f_pbh)
    positive = f > 0
    label = None if total is None else rf"$f_{{\rm PBH}} = {_latex_number(total)}$"
    ax.loglog(m[positive], f[positive], label=label)
    if positive.any():  # show the mass function's top decades, not its far tails
        peak = float(f[positive].max())
        ax.set_ylim(max(float(f[positive].min()), peak * 1e-12) / 3, peak * 30)
        shown = m[positive][f[positive] >= peak * 1e-12]
        ax.set_xlim(shown.min() / 3, shown.max() * 3)
    ax.set_xlabel(r"$M$ [$M_\odot$]")
    ax.set_ylabel(r"$\mathrm{d}f_{\rm PBH}/\mathrm{d}\ln M$")
    top = ax.secondary_xaxis("top", functions=(lambda x: x * C.M_SUN_G,
                                               lambda g: g / C.M_SUN_G))
    top.set_xlabel(r"$M$ [g]")
    if label:
        ax.legend()
    return fig


def _latex_number(value: float) -> str:
    """``4.9 \\times 10^{-175}`` style mantissa-exponent text for labels."""
    if not np.isfinite(value) or value == 0:
        return f"{value:g}"
    exponent = int(np.floor(np.log10(abs(value))))
    mantissa = value / 10**exponent
    return rf"{mantissa:.2g} \times 10^{{{exponent}}}" if abs(exponent) > 2 else f"{value:.3g}"


def save_f_pbh(M_msun, f_pbh, path_stem: str | Path, total: float | None = None) -> list[Path]:
    """Build and save the figure as PDF and PNG; return the paths."""
    return save(f_pbh_figure(M_msun, f_pbh, total), path_stem)
