"""Print (or, with ``--write``, also draw ``docs/regimes.png``) the three regimes of the
pole power: p < 1, p = 1 and p > 1 on the T-model (α = 1), found by exact solves.

Each power's pole sits at the same position; its width is tuned by the width solver
(:func:`scan.pipeline.tune.tune_pole`, as ``zetascan tune --peak-height``) toward
log10 P_peak = :data:`TARGET`, just below the stochastic limit P_ζ = 0.1.  Where the
solver stops at a wall instead (the model turns invalid first), the closest valid solve
next to the wall is kept: the largest enhancement that power reaches there.  Each tuned
model is then solved exactly with its observables (:func:`scan.solve`) and drawn:
P_ζ(k) and Ω_GW h²(f), the invented demo curves faint behind::

    python tests/tools/regimes_figure.py            # tune, solve, print the table
    python tests/tools/regimes_figure.py --write    # ... and write docs/regimes.png

43 exact solves, about 15 s on one core.  The README section "Three regimes
of the pole power" quotes the table this prints.
"""
from __future__ import annotations

import argparse
import dataclasses
import sys
from pathlib import Path

import numpy as np

import scan
from scan.api import as_config
from scan.config.schema import RunConfig
from scan.curves import load_curve
from scan.observables import cosmo
from scan.pipeline import solve_config
from scan.pipeline.tune import TuneError, TuneResult, tune_pole, with_pole
from scan.pipeline.validity import K_CMB_MAX, K_CMB_MIN
from scan.plots.curves import draw_curve, synthetic_note
from scan.plots.looks import GUIDE_GREY, OKABE_ITO
from scan.plots.style import PAGE_WIDTH_IN, figure, legend_below, save

ROOT = Path(__file__).resolve().parents[2]
FIGURE = ROOT / "docs" / "regimes"
#: Target log10 P_peak: P = 0.079, below the stochastic limit 0.1 (``modes.stochastic_limit``).
TARGET = -1.1
#: The pole's position [M_p] shared by the three powers (crossed ~40 e-folds before the end).
POSITION = 5.0
#: Invented demo curves drawn faintly behind the Ω_GW panel (paths relative to ROOT).
CURVES = ("constraints/demo/pta_excess_kestrel.csv",
          "constraints/demo/ground_upper_limit_heron.csv",
          "constraints/lisa_pli_snr10_4yr.csv")
#: Opacity of those curves.
FAINT = 0.35
#: Widths past a wall (in units of the wall's width) solved by ``--past-wall``.
PAST_WALL = (1.001, 1.01, 1.05, 1.2, 1.4)


@dataclasses.dataclass(frozen=True)
class Regime:
    """One pole power and how it is drawn.

    Attributes
    ----------
    power : float
        The pole's power p.
    sharpness : float
        Start of the width search, λ = (1 − p/2)|V′/V|(φ₁)/w (a little above the wall).
    colour, style : str
        Line colour (Okabe–Ito, none of the demo curves' colours) and dash style.
    """

    power: float
    sharpness: float
    colour: str
    style: str


REGIMES = (Regime(0.8, 0.4, OKABE_ITO["blue"], "--"),
           Regime(1.0, 0.9, OKABE_ITO["black"], "-"),
           Regime(1.5, 3.0, OKABE_ITO["reddish purple"], "-."))
#: Powers for the tables only (``--powers``), not drawn.
MORE = (Regime(1.9, 5.5, OKABE_ITO["sky blue"], ":"),)


def base_config(regime: Regime, position: float = POSITION, n_k: int = 128) -> RunConfig:
    """The T-model (α = 1) with one pole of ``regime``'s power at ``position`` [M_p]."""
    return as_config({
        "run": {"name": f"regimes_p{regime.power:g}", "seed": 1},
        "model": {"potential": "t_model", "alpha": 1.0, "kinetic": "poles",
                  "poles": [{"position": position, "sharpness": regime.sharpness,
                             "power": regime.power}]},
        "pivot": {"k_star": 0.05, "reheating": "instant", "ln_1e10_As": 3.044},
        "modes": {"n_k": n_k}})


def tuned(config: RunConfig, target: float = TARGET) -> tuple[TuneResult, str]:
    """The width solver's result toward log10 P_peak = ``target``, and why it stopped
    short ("" if it reached the target)."""
    try:
        return tune_pole(config, peak_height=target), ""
    except TuneError as err:
        return err.result, str(err)


@dataclasses.dataclass(frozen=True)
class Found:
    """One regime's tuned model, solved exactly."""

    regime: Regime
    tune: TuneResult
    stopped: str
    solution: scan.Solution

    def row(self) -> str:
        """One line of the printed table."""
        s, best = self.solution, self.tune.best
        peak_k = float(s.scalars["k_peak"].value)
        text = (f"p = {self.regime.power:<4g} phi_1 = {best.position:g}: width = "
                f"{best.width:.6g} M_p ({self.tune.solves} solves, "
                f"{'at the wall' if self.stopped else 'target'}): log10 P_peak = "
                f"{np.log10(float(s.scalars['P_peak'])):.3f} at k = {peak_k:.3g} Mpc^-1 "
                f"(ln k = {np.log(peak_k):.2f}); n_s = {float(s.scalars['n_s']):.4f}")
        text += (f"; P_zeta within 10x of its peak over "
                 f"{decades_within(s.k.value, s.P_zeta.value):.1f} decades of k")
        for c in s.record.background.crossings:
            text += (f"; {c.efolds_near:.1f} e-folds with |phi - phi_1| < w, "
                     f"{c.usr_efolds:.1f} of ultra-slow roll")
        obs = s.record.observables
        if obs is not None:
            text += (f"; Omega_GW h^2 = {obs.omega_gw_h2_peak:.3g} at f = "
                     f"{obs.f_gw_peak:.3g} Hz; f_PBH = {obs.f_pbh_total:.3g}")
        return text


def decades_within(k: np.ndarray, P_zeta: np.ndarray, factor: float = 10.0) -> float:
    """Decades of k [Mpc⁻¹] between the first and last k where P_ζ is within ``factor``
    of its maximum (a plateau and a narrow peak of the same height differ here)."""
    above = k[P_zeta > P_zeta.max() / factor]
    return float(np.log10(above.max() / above.min()))


def find(regime: Regime, position: float = POSITION, observables: bool = True,
         target: float = TARGET, n_k: int = 128) -> Found:
    """Tune ``regime``'s width at ``position`` [M_p] toward log10 P_peak = ``target``;
    solve the tuned model exactly."""
    result, stopped = tuned(base_config(regime, position, n_k), target)
    return Found(regime, result, stopped,
                 scan.solve(result.config, observables=observables))


def past_wall(found: Found) -> list[str]:
    """What lies beyond the wall: solves at :data:`PAST_WALL` times its width, the
    validity verdict ignored (is the cap the rule's or the physics'?)."""
    rows = []
    for factor in PAST_WALL:
        width = found.tune.best.width * factor
        result = solve_config(with_pole(found.tune.config, 0, width=width),
                              with_observables=False)
        s = result.spectrum
        peak = "no spectrum" if s is None else (
            f"log10 P_peak = {np.log10(s.P_peak):.3f} at k = {s.k_peak:.3g} Mpc^-1"
            if s.P_peak > 0 else "no interior peak")
        tilt = "" if s is None else f", n_s = {s.n_s:.3f}"
        rows.append(f"    width x {factor:g}: {peak}{tilt} ({result.reason or 'valid'})")
    return rows


def legend_text(found: Found) -> str:
    """The regime's legend entry: its power, the peak it reaches and the pivot tilt."""
    scalars = found.solution.scalars
    log_p, n_s = np.log10(float(scalars["P_peak"])), float(scalars["n_s"])
    where = ", at the wall" if found.stopped else ""
    return (rf"$p = {found.regime.power:g}$: $\log_{{10}}P_{{\rm peak}} = {log_p:.2f}$"
            rf"{where}; $n_s = {n_s:.3f}$")


def regimes_figure(found: list[Found], curves=()):
    """Two panels: P_ζ(k) [Mpc⁻¹] with the stochastic limit and the CMB window, and
    Ω_GW h²(f) [Hz] with ``curves`` faint behind; returns the matplotlib Figure."""
    fig, (left, right) = figure(width=PAGE_WIDTH_IN, aspect=0.38, ncols=2)
    left.axvspan(K_CMB_MIN, K_CMB_MAX, color=GUIDE_GREY, alpha=0.15, lw=0)
    left.axhline(0.1, color=GUIDE_GREY, lw=0.7, ls=":")
    left.annotate("stochastic limit", (0.02, 0.1), xycoords=("axes fraction", "data"),
                  xytext=(0, 2), textcoords="offset points", fontsize=6.5, color=GUIDE_GREY)
    left.annotate("CMB", (K_CMB_MIN * 1.5, 0.02), xycoords=("data", "axes fraction"),
                  fontsize=6.5, color=GUIDE_GREY)
    for curve in curves:
        _draw_faint(right, curve)
    for item in found:
        s, obs, r = item.solution, item.solution.record.observables, item.regime
        left.loglog(s.k.value, s.P_zeta.value, color=r.colour, ls=r.style,
                    label=legend_text(item))
        right.loglog(obs.f_hz, obs.omega_gw_h2, color=r.colour, ls=r.style)
    _finish(left, right)
    entries = list(zip(*left.get_legend_handles_labels()))
    entries += list(zip(*right.get_legend_handles_labels()))
    columns = len(found)  # filled column by column: the regimes make the first row
    order = [entries[i] for c in range(columns) for i in range(c, len(entries), columns)]
    handles, labels = zip(*order)
    legend_below(fig, list(handles), ncols=columns, labels=list(labels),
                 title=synthetic_note(curves))
    return fig


def _draw_faint(ax, curve) -> None:
    """A bound curve in its own look, at :data:`FAINT` opacity."""
    before = set(ax.get_children())
    draw_curve(ax, curve)
    for artist in set(ax.get_children()) - before:
        artist.set_alpha(FAINT * (artist.get_alpha() or 1.0))


def _finish(left, right) -> None:
    """Ranges, labels with units, and the frequency of each k on top of the P_ζ panel."""
    left.set_xlim(1e-4, 1e18)
    left.set_ylim(1e-10, 1.0)
    left.set_xlabel(r"$k\ [\mathrm{Mpc}^{-1}]$")
    left.set_ylabel(r"$\mathcal{P}_\zeta(k)$")
    top = left.secondary_xaxis("top", functions=(
        lambda k: cosmo.k_to_f(np.maximum(k, 1e-300)),
        lambda f: cosmo.f_to_k(np.maximum(f, 1e-300))))
    top.set_xlabel(r"$f = ck/2\pi$ [Hz]")
    right.set_xlim(*cosmo.k_to_f(np.array([1e-4, 1e18])))
    right.set_ylim(1e-20, 1e-5)
    right.set_xlabel(r"frequency $f$ [Hz]")
    right.set_ylabel(r"$\Omega_{\rm GW}h^2$")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--write", action="store_true", help="write docs/regimes.png")
    parser.add_argument("--positions", type=float, nargs="+", metavar="PHI",
                        help="pole positions [M_p] to tune at instead of the figure's "
                             f"{POSITION:g} (table only, no observables)")
    parser.add_argument("--target", type=float, default=TARGET, metavar="LOG10P",
                        help=f"target log10 P_peak (default {TARGET:g}; the figure uses it)")
    parser.add_argument("--past-wall", action="store_true",
                        help="also solve past each wall, the validity verdict ignored")
    parser.add_argument("--powers", type=float, nargs="+", metavar="P",
                        help="only these of the powers " +
                             ", ".join(f"{r.power:g}" for r in REGIMES + MORE))
    args = parser.parse_args(argv)
    if args.write and (args.positions or args.powers or args.target != TARGET
                       or args.past_wall):
        parser.error("--write draws the figure's own models: drop --positions, --powers, "
                     "--target and --past-wall")
    regimes = [r for r in REGIMES + MORE if r.power in (args.powers or
                                                         [r.power for r in REGIMES])]
    print(f"T-model alpha = 1, target log10 P_peak = {args.target:g}")
    for position in args.positions or [POSITION]:
        found = [find(r, position, not args.positions, args.target) for r in regimes]
        for item in found:
            print(item.row() + (f"\n    {item.stopped}" if item.stopped and
                                not args.positions else ""))
            if args.past_wall and item.stopped:
                print(*past_wall(item), sep="\n")
    if args.write:
        curves = [load_curve(ROOT / c) for c in CURVES]
        print(*save(regimes_figure(found, curves), FIGURE, formats=("png",)), sep="\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
