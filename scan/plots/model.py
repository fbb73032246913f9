"""Figure: the model a builder looks at first — V(φ), K(φ) near the poles, U(χ)."""
from __future__ import annotations

import numpy as np

from scan.plots.style import PAGE_WIDTH_IN, PALETTE, figure


def model_figure(model, background):
    """Two panels: V/V0 and K against φ over the solved range; U(χ)/V0 against χ.

    Parameters
    ----------
    model : scan.models.Model
        The model (V0 = 1 shape).
    background : scan.background.Background
        Its solution (sets the plotted field range; χ from the solution).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (ax_phi, ax_chi) = figure(width=PAGE_WIDTH_IN, aspect=0.32, ncols=2)
    phi_nodes = np.asarray(background.phi)
    lo, hi = float(np.min(phi_nodes)), float(np.max(phi_nodes))
    phi = np.linspace(lo, hi, 1500)
    for pole in getattr(model, "poles", ()):  # resolve the poles' neighbourhoods
        if lo < pole.position < hi:
            offs = pole.width * np.geomspace(1e-4, 30.0, 300)
            phi = np.concatenate([phi, pole.position - offs, pole.position + offs])
    phi = np.unique(phi[(phi >= lo) & (phi <= hi)])
    ax_phi.plot(phi, model.V(phi), color=PALETTE[0], label=r"$V/V_0$")
    ax_phi.set_xlabel(r"$\phi\ [M_p]$")
    ax_phi.set_ylabel(r"$V(\phi)/V_0$")
    if getattr(model, "poles", ()):
        twin = ax_phi.twinx()
        twin.semilogy(phi, model.K(phi), color=PALETTE[1], lw=0.8, label=r"$K(\phi)$")
        twin.set_ylabel(r"$K(\phi)$", color=PALETTE[1])
        for pole in model.poles:
            ax_phi.axvline(pole.position, color=PALETTE[7], lw=0.6, ls=":")
    _canonical_panel(ax_chi, model, background)
    return fig


def _canonical_panel(ax, model, background) -> None:
    """U(χ)/V0 along the solution (dense output), poles marked at their χ."""
    N = np.linspace(background.N_start, background.N_last, 3000)
    pt = background.evaluate(N)
    ax.plot(pt.chi, model.V(pt.phi), color=PALETTE[0])
    for c in background.crossings:
        chi_c = background.evaluate(c.N_cross).chi[0]
        ax.axvline(chi_c, color=PALETTE[7], lw=0.6, ls=":")
    ax.set_xlabel(r"$\chi\ [M_p]$ (canonical field)")
    ax.set_ylabel(r"$U(\chi)/V_0$")
