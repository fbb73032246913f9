"""``zetascan verify RUN``: exact solves of posterior samples vs the surrogate posterior."""
from __future__ import annotations

import argparse

from scan.cli import with_plugin_note
from scan.cli.output import Output, add_output_options
from scan.errors import ZetascanError
from scan.evidence.file import write_shift
from scan.evidence.reweight import evidence_shift, ln_z_of, open_nested, shift_lines
from scan.observables.pbh.qcd import qcd_lines
from scan.pool import BasePool
from scan.verify.compare import DEFAULT_SAMPLES, Thresholds
from scan.verify.run import Run, verify_command

EXAMPLE = f"""examples:
  zetascan verify results/pole_scan                      # {DEFAULT_SAMPLES} samples, serial
  zetascan verify results/pole_scan/chain.h5 --samples 400 --processes 2
  mpiexec -n 9 python -m mpi4py.futures -m scan verify results/pole_scan --mpi
  zetascan verify results/pole_scan --json               # the report as JSON
  zetascan verify results/pole_scan --resume             # continue after a kill
  zetascan verify results/pole_scan --nested             # nested samples: how ln Z moves

M samples are drawn without replacement (seed run.seed) from the chain after burn-in and
thinning and solved exactly (~ seconds each); they are scored by the run's own likelihood.
Importance weights w ~ exp(ln p_exact - ln p_surrogate) give Kish's ESS and reweighted
medians / 68 % intervals.  The run is flagged as biased when ESS/M < --min-ess, when a
reweighted median moves by more than --max-shift x its 68 % half-width, or when no sample
has weight.  The result is stored as group 'verify' of the chain file (replacing an
earlier one).

Every exact solve is kept as it finishes in chain.verify_partial.h5 next to the chain
(removed once 'verify' is written).  After an interruption, --resume solves only the
samples still missing (same --samples and chain: the draw is fixed by run.seed) and
writes the same 'verify' group an uninterrupted run would; without --resume, earlier
partial results are discarded.

With --nested the samples are the equal-weight nested samples of evidence.h5 ('zetascan
evidence'); the group 'verify' goes into evidence.h5, and the importance-sampled change
of ln Z (surrogate -> exact) with its error and ESS is added to its 'evidence' group.

exit codes: 0 done (flagged or not: read the report), 2 bad input, 1 internal error.
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``verify``."""
    parser = subparsers.add_parser(
        "verify", help="solve posterior samples exactly and check the surrogate posterior",
        description="Draw M posterior samples, solve each exactly, and report the "
                    "surrogate's errors, the log-likelihood differences, importance "
                    "weights with their effective sample size, and reweighted summaries.",
        epilog=with_plugin_note(EXAMPLE),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("run", help="run folder (containing chain.h5) or chain file")
    parser.add_argument("--samples", type=int, default=DEFAULT_SAMPLES, metavar="M",
                        help=f"posterior samples to solve exactly (default {DEFAULT_SAMPLES})")
    parser.add_argument("--processes", type=int, default=None, metavar="N",
                        help="solve in N worker processes")
    parser.add_argument("--mpi", action="store_true",
                        help="solve on the MPI ranks (run under mpiexec with "
                             "python -m mpi4py.futures)")
    parser.add_argument("--min-ess", type=float, default=Thresholds.ess_fraction,
                        metavar="F", help="flag when ESS/M < F (default %(default)s)")
    parser.add_argument("--max-shift", type=float, default=Thresholds.shift, metavar="S",
                        help="flag when a reweighted median moves by more than S x its "
                             "68%% half-width (default %(default)s)")
    parser.add_argument("--resume", action="store_true",
                        help="continue an interrupted verification of the same draw, "
                             "solving only the samples it lacks")
    parser.add_argument("--nested", action="store_true",
                        help="verify the nested samples of evidence.h5 and report how "
                             "ln Z moves")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Verify the run, store the group, print the report."""

    if not 0.0 < args.min_ess <= 1.0:
        raise ZetascanError(f"--min-ess {args.min_ess}: give a fraction in (0, 1]")
    if not args.max_shift > 0.0:
        raise ZetascanError(f"--max-shift {args.max_shift}: give a positive number")
    output = Output.of(args)
    line = output.progress("verify", "exact solve", every_s=10.0)
    opened: dict[str, Run] = {}

    def started(run_: Run, pool: BasePool) -> None:
        opened["run"] = run_
        output.info(f"verifying {run_.path}: {args.samples} exact solves ({pool.describe()})")

    try:
        result = verify_command(args.run, args.samples, processes=args.processes, mpi=args.mpi,
                                thresholds=Thresholds(args.min_ess, args.max_shift),
                                resume=args.resume, on_start=started, on_progress=line.update,
                                log=output.note, opener=open_nested if args.nested else None)
    finally:
        line.close()
    report, lines = result.report, []
    if args.nested:
        shift = evidence_shift(result.evaluated)
        write_shift(opened["run"].path, shift)
        report = {**report, "evidence_shift": shift}
        lines = shift_lines(shift, ln_z_of(opened["run"].path))
    output.result(report, lambda: "\n".join([format_report(report), *lines]))
    return 0


#: Width of the name column of the report.
_W = 32


def _g(value, fmt: str = ".3g") -> str:
    return "-" if value is None else format(value, fmt)


def _quantiles(q: dict, scale: str) -> str:
    if q["median"] is None:
        return "-"
    if scale == "log10":
        return (f"{10 ** q['median']:.4g} [{10 ** q['q16']:.4g}, {10 ** q['q84']:.4g}]")
    return f"{q['median']:.5g} [{q['q16']:.5g}, {q['q84']:.5g}]"


def format_report(r: dict) -> str:
    """Human-readable report lines."""
    verdict = "BIASED" if r["biased"] else "ok"
    lines = [f"{r['file']}: {r['samples']} of {r['available']} samples (burn-in "
             f"{r['burn_in']}, thin {r['thin']}, chain {r['chain_status']}, seed {r['seed']})",
             f"exact solver: {r['exact_solver']}",
             f"verdict: {verdict}   ESS = {r['ess']:.1f}, ESS/M = {r['ess_fraction']:.3f} "
             f"(flag below {r['thresholds']['ess_fraction']:g}); {r['positive_weight']} "
             f"samples with weight > 0, {r['valid_exact']} exact models valid"]
    lines += [f"  flag: {f}" for f in r["flags"]]
    lines += qcd_lines(r.get("pbh_convention") or {})
    if r["zero_weight"]:
        lines.append("weight 0: " + "; ".join(f"{k} ({v})" for k, v in r["zero_weight"].items()))
    d = r["log_like_difference"]
    lines.append(f"delta ln L = exact - surrogate: |d| median {_g(d['median'])}, p95 "
                 f"{_g(d['p95'])}, max {_g(d['max'])}; median d {_g(d['bias'], '+.3g')} "
                 f"({d['n']} samples)")
    diff = r.get("stored_log_prob_max_abs_diff")
    if diff is not None and diff > 1e-6:
        lines.append(f"note: the recomputed surrogate posterior differs from the chain's "
                     f"stored log_prob by up to {diff:.3g} (surrogate or code changed since "
                     "sampling); weights use the recomputed values")
    if r["exact_notes"]:
        lines.append(f"note: {r['exact_notes']} exact solves warned in the observables "
                     "stage (see zetascan solve)")
    lines.append("surrogate error on the samples, |exact - surrogate| (log10 = dex):")
    lines.append(f"  {'quantity':<{_W}} {'scale':<8} {'median':>9} {'p95':>9} {'max':>9} "
                 f"{'bias':>10} {'n':>5}")
    for name, e in {**r["errors"], **r["log_like_terms"]}.items():
        lines.append(f"  {name:<{_W}} {e['scale']:<8} {_g(e['median']):>9} "
                     f"{_g(e['p95']):>9} {_g(e['max']):>9} {_g(e['bias'], '+.2g'):>10} "
                     f"{e['n']:>5}")
    for name, frac in r["agreement"].items():
        lines.append(f"  {name:<{_W}} agrees on {_g(frac, '.1%')} of the samples")
    lines.append("posterior: median [68 %] unweighted (surrogate) -> reweighted (exact), "
                 "shift in 68 % half-widths:")
    for group in ("parameters", "derived"):
        for name, s in r[group].items():
            lines.append(f"  {name:<{_W}} {_quantiles(s['unweighted'], s['scale']):<36} -> "
                         f"{_quantiles(s['reweighted'], s['scale']):<36} "
                         f"{_g(s['shift'], '+.2f')}")
    return "\n".join(lines)
