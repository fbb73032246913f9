"""Figure of bound curves in their natural axes (f [Hz] vs Omega_GW h^2; M vs f_PBH)."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from scan.constants import M_SUN_G
from scan.curves import Curve
from scan.plots.style import COLUMN_WIDTH_IN, PAGE_WIDTH_IN, PALETTE, figure

_AXES = {
    "frequency": ("frequency $f$ [Hz]", r"$\Omega_{\rm GW} h^2$"),
    "mass": ("PBH mass $M$ [g]", r"$f_{\rm PBH}$ (monochromatic bound)"),
}


def legend_label(curve: Curve) -> str:
    """Legend text from the metadata: label, kind, confidence, 'synthetic'."""
    extra = {"upper_limit": f"{curve.confidence:.0%} UL" if curve.confidence else "UL",
             "detection": f"{curve.interval:.0%} intervals" if curve.interval else "",
             "sensitivity": f"SNR {curve.snr_threshold:g}, "
                            f"{(curve.t_obs_s or 0) / 3.15576e7:g} yr"
                            if curve.snr_threshold else "",
             "posterior_grid": "per-bin density"}[curve.kind]
    tag = ", synthetic" if curve.synthetic else ""
    return f"{curve.label} ({extra}{tag})" if extra or tag else curve.label


def draw_curve(ax, curve: Curve, color: str, *, mass_unit: str = "g") -> None:
    """Draw one curve on ``ax`` by its kind (upper limits shaded above), labelled.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    curve : Curve
    color : str
    mass_unit : {"g", "M_sun"}
        Unit of the x axis for mass curves.
    """
    to_axis = M_SUN_G if mass_unit == "g" else 1.0
    x = curve.x * (to_axis if curve.x_quantity == "mass" else 1.0)
    label = legend_label(curve)
    if curve.kind == "upper_limit":
        ax.plot(x, curve.y, color=color, label=label)
        top = 1.0 if curve.y_quantity == "f_pbh" else 30.0 * float(curve.y.max())
        ax.fill_between(x, curve.y, top, color=color, alpha=0.15, lw=0)
    elif curve.kind == "sensitivity":
        ax.plot(x, curve.y, color=color, ls="--", label=label)
    elif curve.kind == "detection":
        err = np.vstack([curve.y - curve.y_lo, curve.y_hi - curve.y])
        ax.errorbar(x, curve.y, yerr=err, fmt="o", ms=2.5, color=color, capsize=1.5,
                    label=label)
    else:
        for xk, grid, dens in zip(x, curve.grid_log10_y, curve.grid_density):
            width = 0.08 * dens / dens.max()
            ax.fill_betweenx(10.0**grid, xk * 10.0**-width, xk * 10.0**width, color=color,
                             alpha=0.6, lw=0)
        ax.plot([], [], color=color, lw=4, alpha=0.6, label=label)


def curves_figure(curves: Sequence[Curve]):
    """One panel per x quantity present, log-log, legend naming each curve.

    Parameters
    ----------
    curves : sequence of Curve

    Returns
    -------
    matplotlib.figure.Figure
    """
    kinds = [q for q in ("frequency", "mass") if any(c.x_quantity == q for c in curves)]
    width = COLUMN_WIDTH_IN if len(kinds) == 1 else PAGE_WIDTH_IN
    fig, axes = figure(width=width, aspect=0.75 if len(kinds) == 1 else 0.4,
                       ncols=max(len(kinds), 1), squeeze=False)
    for ax, quantity in zip(axes[0], kinds):
        for i, curve in enumerate(c for c in curves if c.x_quantity == quantity):
            draw_curve(ax, curve, PALETTE[i % len(PALETTE)])
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel(_AXES[quantity][0])
        ax.set_ylabel(_AXES[quantity][1])
        ax.legend(loc="best")
    return fig
