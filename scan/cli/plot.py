"""``zetascan plot RESULT``: paper-ready figures (PDF and PNG) of any result file."""
from __future__ import annotations

import argparse

from scan.cli.output import Output, add_output_options
from scan.plots.make import plot_result
from scan.plots.sources import KINDS
from scan.sampler.bands import N_SAMPLES, SEED

EXAMPLE = """examples:
  zetascan plot results/tmodel_pole.h5                      # every figure of a solve
  zetascan plot results/tmodel_pole.h5 --kind gw --curves constraints/demo/*.csv \\
      constraints/lisa_pli_snr10_4yr.csv
  zetascan plot results/pole_run --kind corner bands        # a run folder (chain.h5)
  zetascan plot results/pole_scan/grid.h5 --kind exclusion --chain results/pole_run
  zetascan plot results/tmodel_pole.h5 --kind gw --chain results/pole_run --out figures

kinds: spectrum, model (solve results); gw, pbh (solve results, posterior chains: with
posterior bands); corner (chains); bands (posterior chains: gw and pbh bands); exclusion
(grids; the chain's 68 % / 95 % regions on top with --chain); all (every kind the files
support). Files are <out>/<name>_<figure>.pdf and .png.  A kind the files cannot make
exits 2 with the list of kinds they support.

Posterior bands: --samples draws (seed --seed) from the chain after its burn-in and
thinning, surrogate observables re-evaluated, 2.5/16/50/84/97.5 percentiles per
frequency and mass.  Values below a plotting floor (Omega_GW h^2 1e-25, f_PBH per ln M
1e-30), and frequencies outside a sample's computed range, count at the floor: bands
above it are exact, at it mean "at or below".  Corner and exclusion contours hold 68 %
and 95 % of the 2-D posterior mass (not corner's default sigma levels).
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``plot``."""
    parser = subparsers.add_parser(
        "plot", help="paper-ready figures of a solve result, chain or grid",
        description="Draw journal-column figures (PDF and PNG) from a result file: the "
                    "spectrum, the model, Omega_GW h^2 and f_PBH with bound curves and "
                    "posterior bands, the posterior triangle and the exclusion map.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("result", metavar="RESULT",
                        help="solve result (.h5), chain.h5, grid.h5, or a run folder")
    parser.add_argument("--kind", nargs="+", default=["all"], metavar="KIND",
                        choices=list(KINDS) + ["all"],
                        help="figures to make (default: all): " + ", ".join(KINDS) + ", all")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output folder (default: the result's folder)")
    parser.add_argument("--chain", metavar="RUN", default=None,
                        help="a chain (run folder or chain.h5) to add posterior bands and "
                             "regions to a solve or grid result")
    parser.add_argument("--curves", nargs="+", metavar="FILE", default=None,
                        help="bound-curve CSV files (default: the [likelihood] curves of "
                             "the stored config)")
    parser.add_argument("--samples", type=int, default=N_SAMPLES, metavar="N",
                        help=f"posterior samples drawn for the bands (default {N_SAMPLES})")
    parser.add_argument("--seed", type=int, default=SEED,
                        help=f"seed of that draw (default {SEED})")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Make the figures; print the files written (and notes); 2 for an unsupported kind."""

    plotted = plot_result(args.result, args.kind, out=args.out, chain=args.chain,
                          curves=args.curves, samples=args.samples, seed=args.seed)
    output = Output.of(args)
    for note in plotted.notes:
        output.note(f"note: {note}")
    output.result({"figures": list(plotted.paths), "kinds": list(plotted.kinds),
                   "notes": list(plotted.notes)},
                  "\n".join(f"figure: {p}" for p in plotted.paths))
    return 0
