"""``zetascan demo``: the whole job on the invented scenario (see :mod:`scan.cli.demo_plan`)."""
from __future__ import annotations

import argparse

from scan.cli import with_plugin_note
from scan.cli import main
from scan.cli.demo_plan import plan_demo, run_demo

EXAMPLE = """examples:
  zetascan demo                    # about 10 minutes on 2 cores: results/demo/
  zetascan demo --quick            # about 2 minutes, smaller surrogate, grid and chain
  zetascan demo --out /tmp/mydemo
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``demo``."""
    parser = subparsers.add_parser(
        "demo", help="run the whole job on an invented scenario (synthetic data)",
        description="Train a surrogate on exact solves of configs/demo.toml, sample the "
                    "posterior against the synthetic curves of constraints/demo (plus "
                    "LISA), verify samples exactly, compute an exclusion grid, draw every "
                    "figure and print the summary. All data are invented.",
        epilog=with_plugin_note(EXAMPLE),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--out", metavar="DIR", default="results/demo",
                        help="output folder (default: results/demo)")
    parser.add_argument("--quick", action="store_true",
                        help="a smaller, faster demo (about 2 minutes)")
    parser.add_argument("--processes", type=int, default=None, metavar="N",
                        help="worker processes for the exact solves (default: up to 2)")
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the demo's steps; exit with the first failing step's code."""

    plan = plan_demo(args.out, args.quick, args.processes)
    return run_demo(plan, main, lambda line: print(line, flush=True))
