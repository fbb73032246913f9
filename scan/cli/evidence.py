"""``zetascan evidence CONFIG``: ln Z by nested sampling, and Bayes factors between runs."""
from __future__ import annotations

import argparse
import time

from scan.cli.output import add_output_options, strict_json
from scan.config import load_config
from scan.errors import ZetascanError
from scan.evidence.compare import compare_runs
from scan.evidence.file import FOREGROUND_NOTE
from scan.evidence.likelihood import install
from scan.evidence.nested import ENGINE, NestedProgress, NestedSettings, Stopped
from scan.evidence.run import EvidenceOutcome, plan_evidence, run_evidence
from scan.evidence.scale import kass_raftery
from scan.pool import choose_pool
from scan.sampler.stop import EXIT_CODES, graceful_stop
from scan.store import check_output_file

EXAMPLE = """examples:
  zetascan evidence configs/demo.toml                    # model and foreground-only ln Z
  zetascan evidence configs/demo.toml --processes 2      # likelihood chunks in 2 workers
  zetascan evidence configs/demo.toml --resume           # continue after Ctrl-C or a kill
  zetascan evidence --compare results/p_low results/p_high   # ln B between two runs

The same priors and likelihood as 'zetascan sample' are integrated by nested sampling;
<run>/evidence.h5 holds ln Z, its error, ln B against the foreground-only hypothesis (the
model's Omega_GW switched off, SMBH-binary amplitude free), the weighted and equal-weight
posterior samples and the provenance.  Checkpoints are kept in <run>/nested/; --resume
continues them (without it they are overwritten).

exit codes: 0 done, 2 bad input, 130/143 stopped by Ctrl-C/SIGTERM (rerun with --resume),
  1 internal error.
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``evidence``."""
    parser = subparsers.add_parser(
        "evidence", help="evidences by nested sampling and Bayes factors",
        description=f"Nested sampling ({ENGINE}) of the run's posterior: ln Z of the model, "
                    "of the foreground alone, their Bayes factor; or ln B between two runs.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", nargs="?", help="run configuration (TOML)")
    parser.add_argument("--set", dest="overrides", metavar="KEY=VALUE", action="append",
                        default=[], help="override a config key (repeatable)")
    parser.add_argument("--processes", type=int, default=None, metavar="N",
                        help="evaluate the likelihood in N worker processes")
    parser.add_argument("--mpi", action="store_true",
                        help="evaluate on the MPI ranks (run under mpiexec with "
                             "python -m mpi4py.futures)")
    parser.add_argument("--resume", action="store_true",
                        help="continue the checkpoints of an interrupted run")
    parser.add_argument("--live-points", type=int, default=NestedSettings.live_points,
                        metavar="N", help="minimum live points (default %(default)s)")
    parser.add_argument("--dlogz", type=float, default=NestedSettings.dlogz, metavar="D",
                        help="stop when the remaining ln Z is below D (default %(default)s)")
    parser.add_argument("--compare", nargs=2, metavar=("RUN_A", "RUN_B"),
                        help="print ln B = ln Z_A - ln Z_B of two finished runs")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the nested samplings, or compare two runs."""
    if args.compare:
        if args.config:
            raise ZetascanError("give either CONFIG or --compare RUN_A RUN_B, not both")
        info = compare_runs(*args.compare)
        print(strict_json(info) if args.json else format_compare(info))
        return 0
    if not args.config:
        raise ZetascanError("give a CONFIG (or --compare RUN_A RUN_B)")
    if args.live_points < 10 or not args.dlogz > 0.0:
        raise ZetascanError("--live-points must be >= 10 and --dlogz > 0")
    config = load_config(args.config, overrides=args.overrides)
    plan = plan_evidence(config)
    check_output_file(plan.path, "evidence file")
    settings = NestedSettings(live_points=args.live_points, dlogz=args.dlogz,
                              seed=config.run.seed)
    pool = choose_pool(args.processes, args.mpi, initializer=install,
                       initargs=(plan.likelihoods,))
    with graceful_stop() as flag, pool:
        if not args.json:
            print(f"nested sampling of {', '.join(plan.likelihoods)} ({ENGINE}, "
                  f"{settings.live_points} live points, {pool.describe()}) -> {plan.path}",
                  flush=True)
        try:
            outcome = run_evidence(plan, pool, settings, resume=args.resume,
                                   should_stop=flag,
                                   on_progress=None if args.json else _Progress())
        except Stopped:
            print(f"stopped by {flag.signal_name}; the checkpoints are kept in "
                  f"{plan.nested_dir}: run again with --resume", flush=True)
            return EXIT_CODES.get(flag.signal_name or "", 1)
    print(strict_json(outcome_json(outcome)) if args.json
          else format_outcome(outcome))
    return 0


class _Progress:
    """A line per hypothesis at most every few seconds: iteration, calls, ln Z, ETA."""

    def __init__(self, every_s: float = 10.0) -> None:
        self.every_s, self.last = every_s, 0.0

    def __call__(self, name: str, p: NestedProgress) -> None:
        now = time.monotonic()
        if now - self.last < self.every_s:
            return
        self.last = now
        eta = "-" if p.eta_s != p.eta_s else f"{p.eta_s:.0f} s"
        print(f"  {name}: iteration {p.iteration}, {p.ncall} calls, ln Z {p.ln_Z:.2f}, "
              f"~{100 * p.fraction:.0f} % done, eta {eta}", flush=True)


def outcome_json(outcome: EvidenceOutcome) -> dict:
    """The outcome as plain values."""
    return {"file": str(outcome.path),
            "ln_B_vs_foreground": outcome.factor.ln_B,
            "ln_B_vs_foreground_err": outcome.factor.ln_B_err,
            "hypotheses": {name: {"ln_Z": r.ln_Z, "ln_Z_err": r.ln_Z_err, "ncall": r.ncall,
                                  "ncall_this_run": r.ncall_this_run, "ess": r.ess}
                           for name, r in outcome.results.items()}}


def format_outcome(outcome: EvidenceOutcome) -> str:
    """A few lines: each ln Z, the Bayes factor and what it means."""
    lines = [f"{name:<11} ln Z = {r.ln_Z:.3f} +- {r.ln_Z_err:.3f}  ({r.ncall} likelihood "
             f"calls, {r.ncall_this_run} in this run; ESS {r.ess:.0f})"
             for name, r in outcome.results.items()]
    factor = outcome.factor
    if factor.ln_B == factor.ln_B:
        lines += [(f"ln B (model vs foreground only) = {factor.ln_B:.3f} +- "
                   f"{factor.ln_B_err:.3f}"), kass_raftery(factor.ln_B),
                  f"note: {FOREGROUND_NOTE}"]
    lines.append(f"evidence: {outcome.path}")
    return "\n".join(lines)


def format_compare(info: dict) -> str:
    """ln B of two runs with its error and the scale note."""
    lines = [f"A: {info['run_a']}: ln Z = {info['ln_Z_a']:.3f} +- {info['ln_Z_a_err']:.3f}",
             f"B: {info['run_b']}: ln Z = {info['ln_Z_b']:.3f} +- {info['ln_Z_b_err']:.3f}",
             f"ln B (A vs B) = {info['ln_B']:.3f} +- {info['ln_B_err']:.3f}",
             info["scale_note"]]
    if info["likelihood_differs"]:
        lines.append("WARNING: the two runs use different likelihoods (curve files or target):"
                     " a Bayes factor compares models on the same data")
    return "\n".join(lines)
