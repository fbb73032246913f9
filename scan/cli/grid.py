"""``zetascan grid CONFIG``: a 2-D exclusion grid over two parameters, in one grid file."""
from __future__ import annotations

import argparse

from scan.cli import with_plugin_note
from scan.cli.output import Output, add_output_options
from scan.config import load_config
from scan.grid.command import grid_run
from scan.grid.run import describe_plan
from scan.sampler.stop import EXIT_CODES

EXAMPLE = """examples:
  zetascan grid configs/pole_scan.toml --set 'grid.x="model.poles[0].position"' \\
      --set 'grid.y="model.poles[0].sharpness"'      # surrogate observables, serial
  zetascan grid my_grid.toml --resume                # continue after an interruption
  zetascan grid my_grid.toml --restart --set grid.x_points=40
  zetascan grid my_grid.toml --exact --processes 2   # exact solves of every point
  mpiexec -n 3 python -m mpi4py.futures -m scan grid my_grid.toml --exact --mpi

The [grid] table names the two axes (x, y: [[parameters]] keys); the other parameters are
fixed at their start values (or maximised over with profile = true). The grid file
<run.output_dir>/<run.name>/grid.h5 is the run's state: --resume continues it (a changed
config is refused with the list of changed keys), --restart overwrites it.

exit codes: 0 complete, 2 bad input or config mismatch, 143 stopped by SIGTERM,
  130 stopped by Ctrl-C (finished points are written; rerun with --resume), 1 internal error.
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``grid``."""
    parser = subparsers.add_parser(
        "grid", help="evaluate every constraint on a 2-D parameter grid (exclusion regions)",
        description="Evaluate the [likelihood] constraints on the [grid] of two [[parameters]]: "
                    "per point and constraint allowed / excluded / detectable (with the SNR), "
                    "ln L, k_peak, P_peak, f_PBH and the GW peak, written to "
                    "<output_dir>/<name>/grid.h5 as points finish.",
        epilog=with_plugin_note(EXAMPLE),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", help="run configuration (TOML) with a [grid] table")
    again = parser.add_mutually_exclusive_group()
    again.add_argument("--resume", action="store_true",
                       help="continue an existing grid file of the same config")
    again.add_argument("--restart", action="store_true",
                       help="overwrite an existing grid file")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--processes", type=int, default=None, metavar="N",
                       help="worker processes (default: 1 for the surrogate, all cores for "
                            "--exact)")
    where.add_argument("--mpi", action="store_true",
                       help="evaluate on the MPI ranks (run under mpiexec with "
                            "python -m mpi4py.futures)")
    parser.add_argument("--exact", action="store_true",
                        help="exact solves of every point (same as --set grid.source=exact)")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key (repeatable)")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run or resume the grid; print the summary; the exit code says how it ended."""

    overrides = list(args.overrides) + (['grid.source="exact"'] if args.exact else [])
    config = load_config(args.config, overrides=overrides)
    output = Output.of(args)
    line = output.progress("grid", "point", config.grid.progress_every_s)
    try:
        outcome = grid_run(config, resume=args.resume, restart=args.restart,
                           processes=args.processes, mpi=args.mpi,
                           on_start=lambda run_: output.info(describe_plan(run_)),
                           progress=line.update)
    finally:
        line.close()
    lines = list(outcome.summary)
    if outcome.status == "stopped":
        lines.append(f"stopped after {outcome.done}/{outcome.total} points; everything "
                     "finished is written; run the same command with --resume to continue")
    output.result({"grid": outcome.path, "status": outcome.status, "done": outcome.done,
                   "total": outcome.total, "summary": list(outcome.summary)},
                  "\n".join(lines))
    if outcome.status == "stopped":
        return EXIT_CODES.get(outcome.stopped_by or "", 1)
    return 0
