"""``zetascan curves``: check, plot and generate bound-curve files."""
from __future__ import annotations

import argparse
import warnings

import numpy as np

from scan.cli.output import Output, add_output_options
from scan.constants import YEAR_S
from scan.curves import CurveWarning, format_curve, load_curve, write_curve
from scan.curves.noise import LISA_CONFUSION_TABLE, lisa_sensitivity
from scan.errors import InputFileError
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


def sensitivity_text(snr: float, years: float, confusion: bool, form: str,
                     points: int) -> str:
    """The curve file text of a LISA sensitivity (Robson, Cornish & Liu 2019)."""
    if confusion and years not in LISA_CONFUSION_TABLE:
        raise InputFileError("--years", f"galactic confusion noise is tabulated for "
                                        f"{sorted(LISA_CONFUSION_TABLE)} years, not {years:g}")
    if snr <= 0 or years <= 0 or points < 2:
        raise InputFileError("--snr/--years/--points", "need snr > 0, years > 0, points >= 2")
    grid = np.geomspace(1e-5, 1.0, 4001)
    f_out = np.geomspace(1e-5, 1.0, points)
    kind = "power_law_integrated" if form == "pli" else "noise"
    omega = lisa_sensitivity(grid, snr, years, confusion, kind, f_out=f_out)
    conf = f"with {years:g}-yr galactic confusion noise" if confusion else "instrument only"
    meta = {
        "name": f"lisa_{form}_snr{snr:g}_{years:g}yr" + ("_confusion" if confusion else ""),
        "label": f"LISA {'PLI' if form == 'pli' else 'noise'} ({conf})",
        "kind": "sensitivity", "curve_form": kind, "x_quantity": "frequency", "x_unit": "Hz",
        "y_quantity": "omega_gw_h2", "y_unit": "1", "y_scale": "linear",
        "snr_threshold": f"{snr:g}", "t_obs_yr": f"{years:g}", "snr_convention": "single",
        "synthetic": "false",
        "citation": "Robson, Cornish & Liu 2019, CQG 36, 105011, arXiv:1803.01944 (noise); "
                    "Thrane & Romano 2013, PRD 88, 124032, arXiv:1310.5300 (PLI)",
        "description": f"computed by zetascan curves sensitivity; {conf}; "
                       f"T = {years * YEAR_S:.6e} s",
    }
    return format_curve(meta, (f_out, omega), comments=(
        f"zetascan curves sensitivity --snr {snr:g} --years {years:g}"
        + (" --confusion" if confusion else "") + f" --form {form} --points {points}",))


def _sensitivity(args) -> int:
    text = sensitivity_text(args.snr, args.years, args.confusion, args.form, args.points)
    path = write_curve(args.out, text)
    load_curve(path)  # what we write must pass our own checks
    Output.of(args).result({"curve": path}, f"wrote {path}")
    return 0
