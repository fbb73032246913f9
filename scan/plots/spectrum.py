"""Figure: the curvature spectrum P_ζ(k), the CMB pivot, e-folds of horizon exit on top."""
from __future__ import annotations

import numpy as np
from matplotlib.ticker import FixedLocator, FormatStrFormatter, NullLocator

from scan.plots.looks import GUIDE_GREY
from scan.plots.style import PALETTE, figure


def spectrum_figure(k: np.ndarray, P_zeta: np.ndarray, N_exit: np.ndarray, *, k_star: float,
                    N_end: float, P_tensor: np.ndarray | None = None):
    """P_ζ(k) (and P_t) against k [Mpc⁻¹]; the top axis gives N_end − N at exit.

    Parameters
    ----------
    k : ndarray
        Wavenumbers [Mpc⁻¹], increasing.
    P_zeta : ndarray
        Dimensionless curvature power spectrum.
    N_exit : ndarray
        E-fold of horizon exit k = aH of each k.
    k_star : float
        CMB pivot [Mpc⁻¹] (marked).
    N_end : float
        End of inflation (same e-fold clock as ``N_exit``).
    P_tensor : ndarray, optional
        Tensor spectrum, drawn dashed.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, ax = figure()
    ax.loglog(k, P_zeta, color=PALETTE[0], label=r"$\mathcal{P}_\zeta$")
    if P_tensor is not None and np.size(P_tensor) == np.size(k):
        ax.loglog(k, P_tensor, color=PALETTE[1], ls="--", label=r"$\mathcal{P}_t$")
    ax.axvline(k_star, color=GUIDE_GREY, lw=0.7, ls=":")
    ax.annotate(r"$k_\ast$", (k_star, 0.92), xycoords=("data", "axes fraction"),
                xytext=(3, 0), textcoords="offset points", fontsize=7, color=GUIDE_GREY)
    ax.set_xlabel(r"$k\ [\mathrm{Mpc}^{-1}]$")
    ax.set_ylabel(r"$\mathcal{P}(k)$")
    ax.legend(loc="upper right")
    _exit_axis(ax, np.log(k), np.asarray(N_exit, dtype=float), N_end)
    return fig


def _exit_axis(ax, ln_k: np.ndarray, N_exit: np.ndarray, N_end: float) -> None:
    """Secondary top axis: e-folds before the end of inflation at which k exits."""
    order = np.argsort(ln_k)
    ln_k, N_exit = ln_k[order], N_exit[order]

    def to_efolds(k):
        with np.errstate(divide="ignore", invalid="ignore"):
            return N_end - np.interp(np.log(np.maximum(k, 1e-300)), ln_k, N_exit)

    def to_k(dN):
        return np.exp(np.interp(N_end - np.asarray(dN), N_exit, ln_k))

    top = ax.secondary_xaxis("top", functions=(to_efolds, to_k))
    span = N_end - N_exit
    step = 10.0 if span.max() - span.min() > 30 else 5.0
    ticks = np.arange(np.ceil(span.min() / step) * step, span.max() + 1e-9, step)
    top.xaxis.set_major_locator(FixedLocator(ticks))
    top.xaxis.set_minor_locator(NullLocator())
    top.xaxis.set_major_formatter(FormatStrFormatter("%g"))
    top.set_xlabel(r"$N_\mathrm{end} - N$ at horizon exit")
