"""``zetascan tune CONFIG``: a pole's width (and position) for a target peak, written as
a new config."""
from __future__ import annotations

import argparse
import math
from pathlib import Path

from scan.cli import with_plugin_note
from scan.cli.output import Output, add_output_options
from scan.config import load_config, load_config_text
from scan.config.edit import set_pole_keys
from scan.config.model import WIDTH_KEYS
from scan.errors import ZetascanError
from scan.observables.cosmo import f_to_k
from scan.pipeline.tune import TuneError, TuneResult, tune_pole

EXAMPLE = """example:
  zetascan tune configs/tmodel_pole.toml --peak-height -2.5 --out results/tuned.toml
  zetascan tune configs/tmodel_pole.toml --peak-height -2 --peak-k 1e7 --pole 0 --out t.toml
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``tune``."""
    parser = subparsers.add_parser(
        "tune", help="find a pole's width (and position) for a target peak, by exact solves",
        description="Bracket and root-find the width of one pole so that log10 P_peak hits "
                    "a target (and its position so that the peak sits at a given k or f); "
                    "write the config with the values found.  Exit 2 when the target "
                    "cannot be reached (the message names why and the closest value).",
        epilog=with_plugin_note(EXAMPLE), formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("config", help="run configuration (TOML) with [[model.poles]] tables")
    parser.add_argument("--peak-height", type=float, metavar="LOG10P", default=None,
                        help="target log10 P_zeta at the peak")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--peak-k", type=float, metavar="K_MPC", default=None,
                       help="target peak wavenumber [Mpc^-1] (moves the pole)")
    where.add_argument("--peak-f", type=float, metavar="HZ", default=None,
                       help="target peak as a frequency f = c k/(2 pi) [Hz] (moves the pole)")
    parser.add_argument("--pole", type=int, default=0, metavar="I",
                        help="which pole, numbered from 0 in the config's order (default 0)")
    parser.add_argument("--tolerance", type=float, default=None, metavar="DEX",
                        help="tolerance on log10 P_peak (default 0.005)")
    parser.add_argument("--max-solves", type=int, default=25, metavar="N",
                        help="budget of exact solves (default 25)")
    parser.add_argument("--out", metavar="TUNED.toml", required=True,
                        help="where to write the tuned config")
    add_output_options(parser)
    return parser


def run(args: argparse.Namespace) -> int:
    """Tune, print the search, write the config; exit 2 if the target is unreachable."""
    output = Output.of(args)
    config = load_config(args.config)
    peak_k = _target_k(args)
    kwargs = {} if args.tolerance is None else {"height_tol": args.tolerance}
    try:
        result = tune_pole(config, pole=args.pole, peak_height=args.peak_height,
                           peak_k=peak_k, max_solves=args.max_solves, **kwargs)
    except TuneError as err:
        output.info("\n".join(format_trials(err.result)))
        raise
    text = tuned_text(config, result)
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(text)
    best = result.best
    output.result({"config": out, "pole": result.pole, "solves": len(result.trials),
                   "width": best.width, "position": best.position,
                   "log10_P_peak": best.log10_P_peak, "k_peak": best.k_peak},
                  "\n".join(format_trials(result) + [f"tuned config: {out}"]))
    return 0


def _target_k(args: argparse.Namespace) -> float | None:
    for name, value in (("--peak-k", args.peak_k), ("--peak-f", args.peak_f)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise ZetascanError(f"{name} {value}: must be a positive number")
    if args.peak_f is not None:
        return float(f_to_k(args.peak_f))
    return args.peak_k


def tuned_text(config, result: TuneResult) -> str:
    """The config text with the pole's width (and position) found; checked by reloading."""
    best = result.best
    values = {"width": best.width}
    if best.position != config.model.poles[result.pole].position:
        values["position"] = best.position
    note = f"zetascan tune: log10 P_peak = {best.log10_P_peak:.4f}, k_peak = {best.k_peak:.4g}"
    text = set_pole_keys(config.text, result.pole, values, drop=WIDTH_KEYS[1:], note=note,
                         source=config.source)
    check = load_config_text(text, source=config.source).model.poles[result.pole]
    if check.width != best.width or check.position != best.position:
        raise ZetascanError(f"{config.source}: could not rewrite pole {result.pole} "
                            "(is it the same [[model.poles]] table in file order?)")
    return text


def format_trials(result: TuneResult) -> list[str]:
    """One line per exact solve, then the count."""
    lines = [f"pole {result.pole}: solve  width [M_p]        position [M_p]   log10 P_peak  "
             f"k_peak [Mpc^-1]"]
    for i, t in enumerate(result.trials, 1):
        peak = (f"{t.log10_P_peak:12.4f}  {t.k_peak:.4g}" if t.has_peak else
                "  featureless" if t.featureless else
                ("  maximum at the k-grid edge" if t.valid else f"  invalid: {t.reason}"))
        lines.append(f"  {i:3d}  {t.width:.10g}  {t.position:.10g}  {peak}")
    lines.append(f"exact solves: {result.solves}")
    return lines
