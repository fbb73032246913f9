"""``zetascan train CONFIG``: train the surrogate on exact solves; ``--report FILE`` reprints."""
from __future__ import annotations

import argparse
import dataclasses

from scan.cli import with_plugin_note
from scan.cli.output import Output, add_output_options
from scan.config import load_config
from scan.errors import ConfigError
from scan.pool import choose_pool
from scan.surrogate.command import train_surrogate
from scan.surrogate.surrogate_file import read_report
from scan.surrogate.validate import format_report

EXAMPLE = """example:
  zetascan train configs/tmodel_pole.toml --processes 2
  zetascan train configs/tmodel_pole.toml --resume            # continue after an interruption
  zetascan train --report results/tmodel_pole/surrogate.h5    # reprint the validation report
  zetascan train configs/wide_scan.toml --refine-from results/wide_scan --points 120
                                     # solve where the posterior lies, refit (then sample again)
"""
LOG_EVERY_S = 30.0


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``train``."""
    parser = subparsers.add_parser(
        "train", help="train the fast surrogate on exact solves (and validate it)",
        description="Solve a space-filling design of the [[parameters]] space exactly (in "
                    "parallel, appended to <output_dir>/<name>/training.h5 as points "
                    "finish), refine it adaptively, fit the emulator, validate it on "
                    "held-out points and write <output_dir>/<name>/surrogate.h5.",
        epilog=with_plugin_note(EXAMPLE), formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", nargs="?", help="run configuration (TOML)")
    parser.add_argument("--points", type=int, default=None, metavar="N",
                        help="design points (default: surrogate.points); with --refine-from, "
                             "posterior points to add (default: surrogate.refine_points)")
    mode = parser.add_mutually_exclusive_group()
    mode.add_argument("--resume", action="store_true",
                      help="continue an existing training store of the same model")
    mode.add_argument("--refine-from", metavar="CHAIN", default=None,
                      help="add exact solves at up to --points well-spread posterior samples "
                           "of CHAIN (a chain.h5 or run folder sampled on this surrogate) to "
                           "the existing training store, refit and re-validate")
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--processes", type=int, default=None, metavar="N",
                       help="worker processes (default: all cores)")
    group.add_argument("--mpi", action="store_true", help="solve through an MPI pool")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key (repeatable)")
    parser.add_argument("--report", metavar="FILE", default=None,
                        help="only reprint the validation report of a surrogate file")
    add_output_options(parser)
    return parser


def _pool(args: argparse.Namespace):
    """The pool of :mod:`scan.pool` (processes by default: one per core)."""
    import os


    processes = None if args.mpi else (args.processes or os.cpu_count() or 1)
    return choose_pool(processes, args.mpi), processes or 1


def run(args: argparse.Namespace) -> int:
    """Train (or reprint a report); exit 0 on success."""

    if args.report:
        report = read_report(args.report)
        Output.of(args).result({"surrogate": args.report, "report": report},
                               "\n".join(format_report(report)))
        return 0
    if not args.config:
        raise ConfigError("zetascan train", "CONFIG", "no run configuration given",
                          "zetascan train CONFIG, or zetascan train --report FILE")
    return _train(args)


def _train(args: argparse.Namespace) -> int:

    output = Output.of(args)
    config = load_config(args.config, overrides=args.overrides)
    pool, workers = _pool(args)
    line = output.progress("train", "point", LOG_EVERY_S)
    with pool:
        output.detail(f"training on {workers} worker(s)")
        outcome = train_surrogate(
            config, pool.map, workers=workers, points=args.points, resume=args.resume,
            progress=lambda done, total, label: line.update(done, total, f"train [{label}]"),
            refine_from=args.refine_from)
    line.close()
    extra = _chain_round_lines(outcome.chain_round)
    output.result({"training_store": outcome.training, "surrogate": outcome.surrogate,
                   "report": outcome.report,
                   "chain_round": None if outcome.chain_round is None
                   else dataclasses.asdict(outcome.chain_round)},
                  "\n".join(format_report(outcome.report) + extra
                            + [f"training store: {outcome.training}",
                               f"surrogate: {outcome.surrogate}"]))
    return 0


def _chain_round_lines(chain_round) -> list[str]:
    """What --refine-from added, in words."""
    if chain_round is None:
        return []
    if chain_round.stage is None:
        return [(f"--refine-from: {chain_round.pending} points planned earlier were solved "
                 "first and no new round was planned; run the command again to add one")]
    return [(f"--refine-from: {chain_round.planned} posterior points added (stage "
             f"{chain_round.stage}, chosen from {chain_round.samples} samples; samples closer "
             "than half the local spacing to a planned point are skipped); the surrogate "
             "changed: sample again (zetascan sample CONFIG --restart) and verify")]
