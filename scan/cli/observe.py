"""``zetascan observe``: induced GWs and PBH abundance from a user's curvature spectrum.

Input: a CSV table or a zetascan HDF5 result (the format: :mod:`scan.pipeline.spectrum_file`).
Output: an HDF5 file with groups ``gw`` (``f`` [Hz], ``k`` [Mpc^-1], ``omega_gw_h2``) and
``pbh`` (``M`` [M_sun], ``M_g`` [g], ``f_pbh`` per ln M; attribute ``f_pbh_total`` and the
conventions).  The work is :func:`scan.pipeline.observe.observe_spectrum`.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from scan.cli.output import Output, add_output_options
from scan.config.load import apply_override
from scan.config.schema import ObservablesSection
from scan.config.spec import N_GRID_MAX, build_section
from scan.errors import ConfigError
from scan.observables import Observables, cosmo
from scan.observables.pbh import CRITERIA, MASS_FUNCTIONS, WINDOWS, PBHConventions
from scan.pipeline.observe import observe_spectrum
from scan.plots import gw as gw_plot
from scan.plots import pbh as pbh_plot

EPILOG = """example:
  zetascan observe spectrum.csv --out obs.h5 --figures figs/ --criterion compaction \\
      --threshold 0.5 --window gaussian
  zetascan observe spectrum.csv --set observables.non_gaussianity=local \\
      --set observables.f_nl=2.5
"""


#: The PBH-convention options: flag, PBHConventions field, type, help text.
CONVENTION_OPTIONS: tuple[tuple[str, str, type, str], ...] = (
    ("--window", "window", str, "smoothing window of the density variance; thresholds are "
                                "window-specific"),
    ("--criterion", "criterion", str, "collapse criterion"),
    ("--threshold", "threshold", float, "C_th (compaction) or delta_c; must match the window"),
    ("--mass-function", "mass_function", str, "critical collapse (extended) or monochromatic "
                                              "M = gamma M_H"),
    ("--gamma-c", "gamma_c", float, "critical-collapse exponent"),
    ("--K", "K", float, "critical-collapse coefficient K in M = K M_H (delta - delta_c)"
                        "^gamma_c"),
    ("--gamma", "gamma", float, "M/M_H of the monochromatic mass function"),
    ("--ps-factor", "ps_factor", float, "prefactor of the Press-Schechter-like integral, "
                                        "1 or 2"),
    ("--omega-dm-h2", "omega_dm_h2", float, "dark-matter density the PBH fraction refers to"),
)


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``observe``."""
    p = subparsers.add_parser(
        "observe", help="Omega_GW h^2(f) and f_PBH(M) from a P_zeta table",
        description="Induced GWs today and the PBH mass function of your own curvature "
                    "spectrum, written to an HDF5 file (groups gw and pbh). A non-finite "
                    "f_PBH total (the spectrum or the conventions out of range) exits 2 "
                    "after the file is written.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("spectrum", metavar="SPECTRUM", help="CSV (k [Mpc^-1], P_zeta) or zetascan .h5")
    p.add_argument("--out", help="output HDF5 (default: SPECTRUM stem + _observables.h5)")
    p.add_argument("--figures", metavar="DIR", help="write gw and pbh figures (PDF, PNG) here")
    p.add_argument("--n-f", type=int, default=200, help="number of frequencies (default 200)")
    p.add_argument("--n-m", type=int, default=200, help="number of PBH masses (default 200)")
    p.add_argument("--gstar-table", metavar="CSV", help="g_* table: T [GeV], g_rho, g_s "
                   "(default: the built-in table of observables.gstar)")
    p.add_argument("--n-eff", type=float, default=cosmo.N_EFF_DEFAULT,
                   help="N_eff today (default %(default)s)")
    d = PBHConventions()
    for flag, field, kind, text in CONVENTION_OPTIONS:
        choices = {"window": WINDOWS, "criterion": CRITERIA,
                   "mass_function": MASS_FUNCTIONS}.get(field)
        p.add_argument(flag, dest=field, type=kind, choices=choices,
                       default=getattr(d, field), help=f"{text} (default %(default)s)")
    p.add_argument("--set", action="append", metavar="observables.KEY=VALUE",
                   help="override an [observables] key as in zetascan solve, e.g. "
                        "observables.non_gaussianity=local (repeatable)")
    add_output_options(p)
    return p


def observables_section(args) -> ObservablesSection:
    """The ``[observables]`` section of the command line: the options, then every
    ``--set observables.KEY=VALUE`` (as ``zetascan solve``'s overrides).

    Raises
    ------
    ConfigError
        For a key outside ``observables``, a bad value or combination, or
        ``non_gaussianity = 'model'`` (which needs a solved model).
    """
    table = {"n_f": args.n_f, "n_m": args.n_m, "n_eff": args.n_eff,
             "gstar_table": args.gstar_table or "", "window": args.window,
             "criterion": args.criterion, "threshold": args.threshold,
             "mass_function": args.mass_function, "gamma_c": args.gamma_c,
             "collapse_K": args.K, "gamma": args.gamma, "ps_factor": args.ps_factor,
             "omega_dm_h2": args.omega_dm_h2}
    raw = {"observables": table}
    for text in args.set or ():
        if not text.startswith("observables."):
            raise ConfigError("--set", text, "observe takes only observables.KEY=VALUE",
                              "e.g. --set observables.non_gaussianity=local")
        apply_override(raw, text)
    section = build_section(ObservablesSection, raw["observables"], "observables", "--set")
    if section.non_gaussianity == "model":
        raise ConfigError("--set", "observables.non_gaussianity", "'model' needs the solved "
                          "model's background (delta-N), which a spectrum table does not "
                          "carry", "use zetascan solve, or 'local'/'logarithmic' here")
    return section


def check_grid_sizes(args) -> None:
    """--n-f and --n-m within [8, N_GRID_MAX] (memory grows with them)."""
    for option, value in (("--n-f", args.n_f), ("--n-m", args.n_m)):
        if not 8 <= value <= N_GRID_MAX:
            raise ConfigError("command line", option, f"{value} is outside [8, {N_GRID_MAX}]",
                              f"give {option} between 8 and {N_GRID_MAX}")


def _draw(folder: str):
    """``draw(observables)``: the gw and pbh figures in ``folder``."""
    def draw(obs: Observables) -> list[Path]:
        paths = gw_plot.save_omega_gw(obs.f_hz, obs.omega_gw_h2, Path(folder) / "omega_gw")
        return paths + pbh_plot.save_f_pbh(obs.m_msun, obs.f_pbh_per_lnm,
                                           Path(folder) / "f_pbh", total=obs.f_pbh_total)
    return draw


#: Options that say how the output is printed, not how it is computed (not recorded).
_PRINT_OPTIONS = ("json", "quiet", "verbose")


def run(args: argparse.Namespace) -> int:
    """Compute both observables, write the HDF5 file (and figures); exit code.

    A non-finite f_PBH total is bad input: exit 2 with one line, before anything is written.
    """
    output = Output.of(args)
    check_grid_sizes(args)
    done = observe_spectrum(args.spectrum, observables_section(args), out=args.out,
                            options={k: v for k, v in vars(args).items()
                                     if not k.startswith("_") and k not in _PRINT_OPTIONS},
                            draw=_draw(args.figures) if args.figures else None)
    obs = done.observables
    for note in obs.notes:
        output.note(f"zetascan observe: warning: {note}")
    text = (f"wrote {done.out}: max Omega_GW h^2 = {obs.omega_gw_h2_peak:.3e} at "
            f"f = {obs.f_gw_peak:.3e} Hz; f_PBH total = {obs.f_pbh_total:.3e}")
    if done.figures:
        text += "\nfigures: " + ", ".join(str(p) for p in done.figures)
    output.result({"result": done.out, "input": str(args.spectrum),
                   "f_peak_Hz": obs.f_gw_peak, "omega_gw_h2_peak": obs.omega_gw_h2_peak,
                   "f_pbh_total": obs.f_pbh_total, "sigw_kernel": obs.sigw_kernel,
                   "conventions": obs.conventions.as_attrs(), "notes": list(obs.notes),
                   "figures": list(done.figures), "error": None}, text)
    return 0
