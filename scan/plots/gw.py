"""Figure: Omega_GW h^2 against frequency, with a secondary axis of wavenumber."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from scan import constants as C
from scan.plots.style import figure, save


def omega_gw_figure(f_Hz, omega_h2, label: str | None = None):
    """Build the figure (log-log); returns the matplotlib Figure.

    Parameters
    ----------
    f_Hz : array_like [Hz]
    omega_h2 : array_like [1]
    """
    fig, ax = figure()
    f, om = np.asarray(f_Hz), np.asarray(omega_h2)
    positive = om > 0
    ax.loglog(f[positive], om[positive], label=label)
    ax.set_xlabel(r"$f$ [Hz]")
    ax.set_ylabel(r"$\Omega_{\rm GW}h^2$")
    top = ax.secondary_xaxis("top", functions=(lambda x: x / C.HZ_PER_INV_MPC,
                                               lambda k: k * C.HZ_PER_INV_MPC))
    top.set_xlabel(r"$k$ [Mpc$^{-1}$]")
    if label:
        ax.legend()
    return fig


def save_omega_gw(f_Hz, omega_h2, path_stem: str | Path) -> list[Path]:
    """Build and save the figure as PDF and PNG; return the paths."""
    return save(omega_gw_figure(f_Hz, omega_h2), path_stem)
