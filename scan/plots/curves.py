"""Figure of bound curves in their natural axes (f [Hz] vs Omega_GW h^2; M vs f_PBH)."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from scan.constants import M_SUN_G
from scan.curves import Curve
from scan.plots.looks import Look, look_of, readable
from scan.plots.style import COLUMN_WIDTH_IN, PAGE_WIDTH_IN, figure

_AXES = {
    "frequency": ("frequency $f$ [Hz]", r"$\Omega_{\rm GW} h^2$"),
    "mass": ("PBH mass $M$ [g]", r"$f_{\rm PBH}$ (monochromatic bound)"),
}
#: Marks a synthetic (invented) curve in legends; :data:`SYNTHETIC_NOTE` explains it.
SYNTHETIC_MARK: str = "*"
SYNTHETIC_NOTE: str = "* synthetic (invented) data"


def legend_label(curve: Curve) -> str:
    """Short legend text: readable label, what the line means, ``*`` if synthetic.

    Upper limits give their confidence, detections their interval, threshold-form
    sensitivity curves their SNR and observing time; a noise-form curve is the noise
    spectrum itself and says so (no SNR).
    """
    extra = {"upper_limit": f"{curve.confidence:.0%} UL" if curve.confidence else "UL",
             "detection": f"{curve.interval:.0%} intervals" if curve.interval else "",
             "sensitivity": _sensitivity_text(curve),
             "posterior_grid": "free spectrum"}[curve.kind]
    text = readable(curve.name, curve.label)
    if extra and extra.lower() not in text.lower():
        text = f"{text}, {extra}"
    return text + (SYNTHETIC_MARK if curve.synthetic else "")


def _sensitivity_text(curve: Curve) -> str:
    if curve.curve_form == "noise":
        return "noise"
    if curve.snr_threshold is None:
        return ""
    years = (curve.t_obs_s or 0) / 3.15576e7
    return f"SNR {curve.snr_threshold:g}" + (f", {years:g} yr" if years else "")


def draw_curve(ax, curve: Curve, look: Look | str | None = None, *,
               mass_unit: str = "g") -> None:
    """Draw one curve on ``ax`` by its kind (upper limits shaded above), labelled.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    curve : Curve
    look : Look or str, optional
        Colour and marker, or a colour (default: the curve's fixed look, :func:`look_of`).
    mass_unit : {"g", "M_sun"}
        Unit of the x axis for mass curves.
    """
    look = look_of(curve.name) if look is None else \
        Look(look, look_of(curve.name).marker) if isinstance(look, str) else look
    color = look.colour
    to_axis = M_SUN_G if mass_unit == "g" else 1.0
    x = curve.x * (to_axis if curve.x_quantity == "mass" else 1.0)
    label = legend_label(curve)
    if curve.kind == "upper_limit":
        ax.plot(x, curve.y, color=color, label=label)
        top = 1.0 if curve.y_quantity == "f_pbh" else 30.0 * float(curve.y.max())
        ax.fill_between(x, curve.y, top, color=color, alpha=0.12, lw=0)
    elif curve.kind == "sensitivity":
        ax.plot(x, curve.y, color=color, ls="--", label=label)
    elif curve.kind == "detection":
        err = np.vstack([curve.y - curve.y_lo, curve.y_hi - curve.y])
        ax.errorbar(x, curve.y, yerr=err, fmt=look.marker, ms=2.5, color=color, capsize=1.5,
                    label=label)
    else:
        for xk, grid, dens in zip(x, curve.grid_log10_y, curve.grid_density):
            width = 0.08 * dens / dens.max()
            ax.fill_betweenx(10.0**grid, xk * 10.0**-width, xk * 10.0**width, color=color,
                             alpha=0.6, lw=0, label=label if xk == x[0] else None)


def synthetic_note(curves) -> str | None:
    """The legend title explaining :data:`SYNTHETIC_MARK`, if a curve is synthetic."""
    return SYNTHETIC_NOTE if any(c.synthetic for c in curves) else None


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
        drawn = [c for c in curves if c.x_quantity == quantity]
        for curve in drawn:
            draw_curve(ax, curve)
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel(_AXES[quantity][0])
        ax.set_ylabel(_AXES[quantity][1])
        ax.legend(loc="best", title=synthetic_note(drawn))
    return fig
