"""``zetascan sample CONFIG``: start or resume a posterior run (emcee) in one chain file."""
from __future__ import annotations

import argparse
from collections.abc import Callable

from scan.cli.output import Output, ProgressLine, add_output_options
from scan.config import load_config
from scan.observables.pbh.qcd import qcd_lines
from scan.observables.settings import gw_convention_attrs, pbh_convention_attrs
from scan.observables.sigw_kernel_table import kernel_lines
from scan.pool import BasePool
from scan.posterior.build import width_prior_note
from scan.sampler.command import sample_run
from scan.sampler.driver import Progress, RunOutcome, RunPlan
from scan.sampler.stop import EXIT_CODES

EXAMPLE = """examples:
  zetascan sample configs/gaussian_test.toml                 # start, or resume the same chain
  zetascan sample configs/gaussian_test.toml --processes 2   # walkers in 2 worker processes
  zetascan sample configs/gaussian_test.toml --restart       # discard the old chain
  mpiexec -n 3 python -m mpi4py.futures -m scan sample configs/gaussian_test.toml --mpi

The chain file <run.output_dir>/<run.name>/chain.h5 is the run's state: running the same
command again continues the chain (bit-identical to an uninterrupted run); a changed config
is refused with the list of changed keys unless --restart is given.

exit codes: 0 finished (converged or max_steps), 2 bad input or config mismatch,
  143 stopped by SIGTERM, 130 stopped by Ctrl-C (everything written; rerun to resume),
  1 internal error (a worker's exception is shown with its traceback).
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``sample``."""
    parser = subparsers.add_parser(
        "sample", help="run (or resume) an MCMC posterior run with emcee",
        description="Sample the posterior of the [[parameters]] and [[nuisance]] "
                    "parameters with emcee; stop on the autocorrelation rule of [sampler].",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", help="run configuration (TOML)")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key (repeatable)")
    parser.add_argument("--out", metavar="FILE", default=None,
                        help="chain file (default: <run.output_dir>/<run.name>/chain.h5)")
    parser.add_argument("--processes", type=int, default=None, metavar="N",
                        help="evaluate walkers in N worker processes")
    parser.add_argument("--mpi", action="store_true",
                        help="evaluate on the MPI ranks (run under mpiexec with "
                             "python -m mpi4py.futures)")
    parser.add_argument("--restart", action="store_true",
                        help="discard an existing chain file and start again")
    add_output_options(parser)
    return parser


def _reporter(line: ProgressLine) -> Callable[[Progress], None]:
    """Sampler progress as a :class:`~scan.cli.output.ProgressLine` (steps of max_steps)."""

    def show(p: Progress) -> None:
        tau = "-" if p.tau_max is None else f"{p.tau_max:.1f}"
        ratio = "-" if p.n_over_tau is None else f"{p.n_over_tau:.1f}"
        line.update(p.step, p.max_steps,
                    extra=f"acceptance {p.acceptance:.3f}, tau {tau}, N/tau {ratio}")

    return show


def run(args: argparse.Namespace) -> int:
    """Start or resume the run; the exit code tells how it ended (see the epilog)."""
    config = load_config(args.config, overrides=args.overrides)
    output = Output.of(args)
    line = output.progress("sample", "step", config.sampler.progress_every_s)

    def started(plan: RunPlan, pool: BasePool) -> None:
        output.info(f"sampling {plan.priors.dim} parameters with {config.sampler.walkers} "
                    f"walkers ({pool.describe()}) -> {plan.path}")
        note = width_prior_note(plan.target)
        if note:
            output.note(f"note: {note}")
        for line_ in qcd_lines(pbh_convention_attrs(config.observables)) \
                + kernel_lines(gw_convention_attrs(config.observables)):
            output.note(f"note: {line_.strip()}")
    try:
        outcome = sample_run(config, out=args.out, restart=args.restart,
                             processes=args.processes, mpi=args.mpi, on_start=started,
                             on_progress=_reporter(line))
    finally:
        line.close()
    output.result(outcome, format_outcome(outcome))
    return EXIT_CODES.get(outcome.stopped_by or "", 1) if outcome.status == "stopped" else 0


def format_outcome(outcome: RunOutcome) -> str:
    """A few lines on how the invocation ended."""
    tau = "-" if outcome.tau is None else ", ".join(f"{t:.1f}" for t in outcome.tau)
    lines = [f"{outcome.status}{' by ' + outcome.stopped_by if outcome.stopped_by else ''}"
             f" after {outcome.steps} steps ({outcome.steps_this_run} in this run"
             f"{', resumed' if outcome.resumed else ''})",
             f"acceptance fraction {outcome.acceptance:.3f}; tau per parameter: {tau}",
             "evaluations by reason: " + ", ".join(f"{k} {v}" for k, v in
                                                   outcome.reason_counts.items()),
             f"chain: {outcome.path}"]
    if outcome.status == "stopped":
        lines.append("everything is written; run the same command again to resume")
    return "\n".join(lines)
