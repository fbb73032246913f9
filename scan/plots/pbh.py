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
    label = None if total is None else rf"$f_{{\rm PBH}} = {total:.2g}$"
    ax.loglog(m[positive], f[positive], label=label)
    ax.set_xlabel(r"$M$ [$M_\odot$]")
    ax.set_ylabel(r"$\mathrm{d}f_{\rm PBH}/\mathrm{d}\ln M$")
    top = ax.secondary_xaxis("top", functions=(lambda x: x * C.M_SUN_G,
                                               lambda g: g / C.M_SUN_G))
    top.set_xlabel(r"$M$ [g]")
    if label:
        ax.legend()
    return fig


def save_f_pbh(M_msun, f_pbh, path_stem: str | Path, total: float | None = None) -> list[Path]:
    """Build and save the figure as PDF and PNG; return the paths."""
    return save(f_pbh_figure(M_msun, f_pbh, total), path_stem)
