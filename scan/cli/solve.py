"""``zetascan solve CONFIG``: one model, solved exactly, written to one HDF5 file."""
from __future__ import annotations

import argparse
from pathlib import Path

from scan.cli import with_plugin_note
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
        epilog=with_plugin_note(EXAMPLE),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", help="run configuration (TOML)")
    parser.add_argument("--out", metavar="FILE", default=None,
                        help="result file (default: <run.output_dir>/<run.name>.h5)")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key, e.g. model.alpha=2 (repeatable)")
    parser.add_argument("--no-figures", action="store_true", help="do not draw figures")
    return parser


def run(args: argparse.Namespace) -> int:
    """Solve, write, summarise; exit 0 even for an invalid model (the file says why)."""
    config = load_config(args.config, overrides=args.overrides)
    solved = solve_to_file(config, args.out, None if args.no_figures else _draw_figures)
    print(format_summary(solved.result, solved.out, list(solved.figures)))
    return 0


def _draw_figures(out: Path, result: SolveResult) -> list[Path]:
    """Figures next to the result file (only for what was computed)."""
    return draw_solve_figures(out.with_suffix(""), result)


def format_summary(result: SolveResult, out: Path, figures: list[Path]) -> str:
    """A short human summary of one solve."""
    return "\n".join(result.summary_lines() + [f"result: {out}"]
                     + [f"figure: {path}" for path in figures])
