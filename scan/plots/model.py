"""Figure: the model a builder looks at first — V(φ) and K(φ), K near each pole, U(χ)."""
from __future__ import annotations

import numpy as np

from scan.plots.looks import GUIDE_GREY
from scan.plots.style import PAGE_WIDTH_IN, PALETTE, figure


def model_figure(model, background):
    """Panels: V/V0 and K against φ over the solved range; K near each pole against
    (φ − φ_i)/w_i (when the model has poles); U(χ)/V0 against χ.

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
    poles = tuple(getattr(model, "poles", ()))
    fig, axes = figure(width=PAGE_WIDTH_IN, aspect=0.3, ncols=3 if poles else 2)
    ax_phi, ax_chi = axes[0], axes[-1]
    phi_nodes = np.asarray(background.phi)
    lo, hi = float(np.min(phi_nodes)), float(np.max(phi_nodes))
    phi = np.linspace(lo, hi, 1500)
    for pole in poles:  # resolve the poles' neighbourhoods
        if lo < pole.position < hi:
            offs = pole.width * np.geomspace(1e-4, 30.0, 300)
            phi = np.concatenate([phi, pole.position - offs, pole.position + offs])
    phi = np.unique(phi[(phi >= lo) & (phi <= hi)])
    ax_phi.plot(phi, model.V(phi), color=PALETTE[0], label=r"$V/V_0$")
    ax_phi.set_xlabel(r"$\phi\ [M_p]$")
    ax_phi.set_ylabel(r"$V(\phi)/V_0$")
    if poles:
        twin = ax_phi.twinx()
        twin.semilogy(phi, model.K(phi), color=PALETTE[1], lw=0.8, label=r"$K(\phi)$")
        twin.set_ylabel(r"$K(\phi)$", color=PALETTE[1])
        for pole in poles:
            ax_phi.axvline(pole.position, color=GUIDE_GREY, lw=0.6, ls=":")
        _pole_panel(axes[1], model, poles)
    _canonical_panel(ax_chi, model, background)
    return fig


def _pole_panel(ax, model, poles) -> None:
    """K(φ) against the distance |φ − φ_i|/w_i to each pole (log-log; the side φ < φ_i
    dashed): K − 1 ∝ |φ − φ_i|^(−p) inside the width, K → 1 outside."""
    u = np.geomspace(1e-3, 30.0, 300)
    for i, pole in enumerate(poles):
        color = PALETTE[(i + 1) % len(PALETTE)]
        ax.loglog(u, model.K(pole.position + u * pole.width), color=color,
                  label=rf"$\phi_{i} = {pole.position:.4g}$, $w_{i} = {pole.width:.3g}$ "
                        rf"[$M_p$], $p_{i} = {pole.power:g}$")
        left = model.K(pole.position - u * pole.width)
        if not np.allclose(left, model.K(pole.position + u * pole.width), rtol=1e-2):
            ax.loglog(u, left, color=color, ls="--", lw=0.8)  # other poles or V break symmetry
    ax.set_xlabel(r"$|\phi - \phi_i|/w_i$ (dashed: $\phi < \phi_i$ where different)")
    ax.set_ylabel(r"$K(\phi)$ near the poles")
    ax.legend(loc="upper right", handlelength=1.2)


def _canonical_panel(ax, model, background) -> None:
    """U(χ)/V0 along the solution (dense output), poles marked at their χ."""
    N = np.linspace(background.N_start, background.N_last, 3000)
    pt = background.evaluate(N)
    ax.plot(pt.chi, model.V(pt.phi), color=PALETTE[0])
    for c in background.crossings:
        chi_c = background.evaluate(c.N_cross).chi[0]
        ax.axvline(chi_c, color=GUIDE_GREY, lw=0.6, ls=":")
    ax.set_xlabel(r"$\chi\ [M_p]$ (canonical field)")
    ax.set_ylabel(r"$U(\chi)/V_0$")
