"""``zetascan solve CONFIG``: one model, solved exactly, written to one HDF5 file."""
from __future__ import annotations

import argparse
import dataclasses
from pathlib import Path
from typing import Any

from scan.cli import with_plugin_note
from scan.cli.output import Output, add_output_options
from scan.config import load_config
from scan.pipeline import SolveResult
from scan.pipeline.result_file import solve_to_file
from scan.plots.solve import draw_solve_figures

EXAMPLE = """example:
  zetascan solve configs/tmodel_pole.toml
  zetascan solve configs/tmodel_pole.toml --set model.poles[0].width=0.018 --out results/w018.h5
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``solve``."""
    parser = subparsers.add_parser(
        "solve", help="solve one model exactly (background, pivot, modes, observables)",
        description="Solve the background and the Mukhanov–Sasaki modes of one model exactly, "
                    "normalise to the CMB, and write an HDF5 result with provenance.",
        epilog=with_plugin_note(EXAMPLE), formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", help="run configuration (TOML)")
    parser.add_argument("--out", metavar="FILE", default=None,
                        help="result file (default: <run.output_dir>/<run.name>.h5)")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key, e.g. model.alpha=2 (repeatable)")
    parser.add_argument("--no-figures", action="store_true", help="do not draw figures")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Solve, write, summarise; exit 0 even for an invalid model (the file says why)."""
    config = load_config(args.config, overrides=args.overrides)
    output = Output.of(args)
    output.detail(f"config {config.source} (paths relative to {config.base_dir or '.'})")
    solved = solve_to_file(config, args.out, None if args.no_figures else _draw_figures)
    figures = list(solved.figures)
    output.result(solve_report(solved.result, solved.out, figures),
                  format_summary(solved.result, solved.out, figures))
    return 0


def solve_report(result: SolveResult, out: Path, figures: list[Path]) -> dict[str, Any]:
    """The ``--json`` document of one solve (numbers in the result file's units)."""
    bg, p, s, o = result.background, result.pivot, result.spectrum, result.observables
    report: dict[str, Any] = {
        "result": out, "figures": figures, "valid": result.valid, "reason": result.reason,
        "N_total": bg.N_end - bg.N_start,
        "pole_crossings": [dataclasses.asdict(c) for c in bg.crossings],
        "pivot": None, "spectrum": None, "gw": None, "pbh": None, "notes": []}
    if p is not None and p.valid:
        report["pivot"] = {"k_star_Mpc^-1": p.k_star, "N_star": p.N_star,
                           "n_s_slow_roll": p.n_s, "r_slow_roll": p.r}
    if s is not None and s.valid:
        report["spectrum"] = {"n_s": s.n_s, "alpha_s": s.alpha_s, "r": s.r, "A_s": s.A_s,
                              "V0_M_p^4": s.V0, "N_star": s.N_star,
                              "k_peak_Mpc^-1": s.k_peak, "P_peak": s.P_peak,
                              "k_dip_Mpc^-1": s.k_dip, "P_dip": s.P_dip}
    if o is not None:
        report["gw"] = {"f_peak_Hz": o.f_gw_peak, "omega_gw_h2_peak": o.omega_gw_h2_peak,
                        "sigw_kernel": o.sigw_kernel}
        report["pbh"] = {"f_pbh_total": o.f_pbh_total,
                         "conventions": o.conventions.as_attrs()}
        report["notes"] = list(o.notes)
    return report


def _draw_figures(out: Path, result: SolveResult) -> list[Path]:
    """Figures next to the result file (only for what was computed)."""
    return draw_solve_figures(out.with_suffix(""), result)


def format_summary(result: SolveResult, out: Path, figures: list[Path]) -> str:
    """A short human summary of one solve."""
    return "\n".join(result.summary_lines() + [f"result: {out}"]
                     + [f"figure: {path}" for path in figures])
