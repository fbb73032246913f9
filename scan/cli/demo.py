"""``zetascan demo``: the whole job on the invented scenario (see :mod:`scan.cli.demo_plan`)."""
from __future__ import annotations

import argparse
import contextlib
import sys

from scan.cli import with_plugin_note
from scan.cli import main
from scan.cli.demo_plan import plan_demo, run_demo
from scan.cli.output import Output, add_output_options

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
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the demo's steps; exit with the first failing step's code.

    With --json every step prints on stderr and stdout holds only the final document
    (output folder, exit code, files); --quiet and -v are passed to every step.
    """
    output = Output.of(args)
    plan = plan_demo(args.out, args.quick, args.processes)
    flags = ["--quiet"] * output.quiet + ["-v"] * output.verbose
    lines: list[str] = []

    def step(argv) -> int:
        return main([*argv, *flags])

    def say(line: str) -> None:
        lines.append(line)
        output.info(line)

    with contextlib.redirect_stdout(sys.stderr) if output.json else contextlib.nullcontext():
        code = run_demo(plan, step, say)
    files = sorted(str(p) for p in plan.out.iterdir() if p.suffix in (".h5", ".png", ".pdf"))
    if output.json:
        output.result({"out": plan.out, "exit_code": code, "files": files,
                       "log": [ln.strip() for ln in lines if ln.strip()]}, "")
    return code
