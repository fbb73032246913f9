"""``zetascan curves``: check, plot and generate bound-curve files."""
from __future__ import annotations

import argparse
import warnings

from scan.cli.output import Output, add_output_options
from scan.curves import CurveWarning, load_curve
from scan.curves.sensitivity_file import write_sensitivity
from scan.plots.curves import curves_figure
from scan.plots.style import save

EPILOG = """examples:
  zetascan curves check constraints/demo/*.csv
  zetascan curves plot constraints/demo/*.csv --out results/figures/demo_curves
  zetascan curves sensitivity --snr 10 --years 4 --out constraints/lisa_pli_snr10_4yr.csv
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``curves`` with its sub-verbs check, plot, sensitivity."""
    parser = subparsers.add_parser(
        "curves", help="check, plot and generate bound-curve CSV files",
        description="Bound curves in the zetascan curve format (constraints/README.md).",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = parser.add_subparsers(dest="curves_action", metavar="ACTION", required=True)
    check = sub.add_parser("check", help="validate files, one summary line each")
    check.add_argument("files", nargs="+", metavar="FILE", help="bound-curve CSV files")
    plot = sub.add_parser("plot", help="figure of the curves in their natural axes")
    plot.add_argument("files", nargs="+", metavar="FILE", help="bound-curve CSV files")
    plot.add_argument("--out", default="curves", help="path stem of the PDF/PNG "
                                                      "(default: ./curves)")
    sens = sub.add_parser("sensitivity", help="write the LISA sensitivity as a curve file")
    sens.add_argument("--snr", type=float, default=10.0, help="SNR threshold (default 10)")
    sens.add_argument("--years", type=float, default=4.0, help="observation time [yr]")
    sens.add_argument("--confusion", action="store_true",
                      help="add the galactic confusion noise (0.5, 1, 2 or 4 yr only)")
    sens.add_argument("--form", choices=("pli", "noise"), default="pli",
                      help="power-law-integrated curve (default) or Omega_n h^2 itself")
    sens.add_argument("--points", type=int, default=241, help="rows written (default 241)")
    sens.add_argument("--out", required=True, metavar="FILE.csv",
                      help="the curve file to write")
    for action in (check, plot, sens):
        add_output_options(action)
    return parser


def run(args: argparse.Namespace) -> int:
    """Dispatch to the chosen action; return the exit code."""
    return {"check": _check, "plot": _plot, "sensitivity": _sensitivity}[
        args.curves_action](args)


def _load_all(files, output: Output) -> tuple[list, list[str]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", CurveWarning)
        curves = [load_curve(f) for f in files]
    notes = [f"warning: {w.message}" for w in caught if issubclass(w.category, CurveWarning)]
    for note in notes:
        output.note(note)
    return curves, notes


def _check(args) -> int:
    output = Output.of(args)
    curves, notes = _load_all(args.files, output)
    output.result({"curves": [{"file": c.path, "ok": True, "name": c.name, "kind": c.kind,
                               "summary": c.summary(), "synthetic": c.synthetic}
                              for c in curves], "notes": notes},
                  "\n".join(f"ok  {c.path}: {c.summary()}" for c in curves))
    return 0


def _plot(args) -> int:
    output = Output.of(args)
    curves, notes = _load_all(args.files, output)
    paths = save(curves_figure(curves), args.out)
    output.result({"figures": paths, "notes": notes},
                  "wrote " + ", ".join(str(p) for p in paths))
    return 0


def _sensitivity(args) -> int:
    path = write_sensitivity(args.out, args.snr, args.years, args.confusion, args.form,
                             args.points)
    Output.of(args).result({"curve": path}, f"wrote {path}")
    return 0
