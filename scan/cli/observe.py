"""``zetascan observe``: induced GWs and PBH abundance from a user's curvature spectrum.

Input: a CSV table (columns ``k`` [Mpc^-1] and ``P_zeta``; ``#`` comments and a header
line allowed; without a header the first two columns are k, P_zeta) or a zetascan HDF5
result (group ``spectrum`` with datasets ``k``, ``P_zeta``).  Output: an HDF5 file with
groups ``gw`` (``f`` [Hz], ``k`` [Mpc^-1], ``omega_gw_h2``) and ``pbh`` (``M`` [M_sun],
``M_g`` [g], ``f_pbh`` per ln M; attribute ``f_pbh_total`` and the conventions), written
atomically through :mod:`scan.store`.
"""
from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

import h5py
import numpy as np

from scan import store
from scan.config.load import apply_override
from scan.config.schema import ObservablesSection
from scan.config.spec import build_section
from scan.errors import ConfigError, InputFileError
from scan.observables import Observables, cosmo
from scan.observables.pbh import CRITERIA, MASS_FUNCTIONS, WINDOWS, PBHConventions
from scan.observables.settings import settings_of
from scan.pipeline.result_file import write_observables
from scan.plots import gw as gw_plot
from scan.plots import pbh as pbh_plot

#: Fewest table points accepted.
MIN_POINTS: int = 8

EPILOG = """example:
  zetascan observe spectrum.csv --out obs.h5 --figures figs/ --criterion compaction \\
      --threshold 0.5 --window gaussian
  zetascan observe spectrum.csv --set observables.non_gaussianity=local \\
      --set observables.f_nl=2.5
"""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``observe``."""
    p = subparsers.add_parser("observe", help="Omega_GW h^2(f) and f_PBH(M) from a P_zeta table",
                              epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("spectrum", metavar="SPECTRUM", help="CSV (k [Mpc^-1], P_zeta) or zetascan .h5")
    p.add_argument("--out", help="output HDF5 (default: SPECTRUM stem + _observables.h5)")
    p.add_argument("--figures", metavar="DIR", help="write gw and pbh figures (PDF, PNG) here")
    p.add_argument("--n-f", type=int, default=200, help="number of frequencies (default 200)")
    p.add_argument("--n-m", type=int, default=200, help="number of PBH masses (default 200)")
    p.add_argument("--gstar-table", metavar="CSV", help="g_* table: T [GeV], g_rho, g_s")
    p.add_argument("--n-eff", type=float, default=cosmo.N_EFF_DEFAULT, help="N_eff today")
    d = PBHConventions()
    p.add_argument("--window", choices=WINDOWS, default=d.window)
    p.add_argument("--criterion", choices=CRITERIA, default=d.criterion)
    p.add_argument("--threshold", type=float, default=d.threshold,
                   help="C_th (compaction) or delta_c; must match the window")
    p.add_argument("--mass-function", choices=MASS_FUNCTIONS, default=d.mass_function)
    p.add_argument("--gamma-c", type=float, default=d.gamma_c, help="critical exponent")
    p.add_argument("--K", type=float, default=d.K, help="critical-collapse coefficient")
    p.add_argument("--gamma", type=float, default=d.gamma, help="M/M_H (monochromatic)")
    p.add_argument("--ps-factor", type=float, default=d.ps_factor)
    p.add_argument("--omega-dm-h2", type=float, default=d.omega_dm_h2)
    p.add_argument("--set", action="append", metavar="observables.KEY=VALUE",
                   help="override an [observables] key as in zetascan solve, e.g. "
                        "observables.non_gaussianity=local (repeatable)")
    return p


def _parse_row(path: str, number: int, text: str) -> list[float] | None:
    """Numbers of one CSV line, or None if it is not numeric (a header)."""
    fields = [f for f in text.replace(",", " ").split()]
    try:
        return [float(f) for f in fields]
    except ValueError:
        return None


def load_spectrum_csv(path: str) -> tuple[np.ndarray, np.ndarray]:
    """Read and validate a (k [Mpc^-1], P_zeta) CSV table; errors name the line."""
    try:
        lines = Path(path).read_text().splitlines()
    except (OSError, UnicodeDecodeError) as err:
        raise InputFileError(path, f"cannot read ({err})") from None
    cols, rows, lines_of = (0, 1), [], []
    header_seen = False
    for number, line in enumerate(lines, start=1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        values = _parse_row(path, number, text)
        if values is None:
            if header_seen or rows:
                raise InputFileError(path, f"not a number in '{text}'", line=number)
            cols = _header_columns(path, number, text)
            header_seen = True
            continue
        need = max(cols) + 1
        if len(values) < need:
            raise InputFileError(path, f"expected at least {need} columns, found "
                                 f"{len(values)}", line=number)
        rows.append((values[cols[0]], values[cols[1]]))
        lines_of.append(number)
    data = np.array(rows, dtype=float).reshape(-1, 2)
    validate_spectrum(path, data[:, 0], data[:, 1], lines_of)
    return data[:, 0], data[:, 1]


def _header_columns(path: str, number: int, text: str) -> tuple[int, int]:
    """Column indices of ``k`` and ``P_zeta`` in a header line."""
    names = [f.strip().lower() for f in text.replace(",", " ").split()]
    try:
        return names.index("k"), names.index("p_zeta")
    except ValueError:
        raise InputFileError(path, f"header must name columns 'k' and 'P_zeta', "
                             f"found {names}", line=number) from None


def validate_spectrum(path: str, k: np.ndarray, P: np.ndarray,
                      lines: list[int] | None = None) -> None:
    """Finite, positive, strictly increasing k; finite P >= 0; at least MIN_POINTS rows."""
    def where(i: int) -> dict:
        return {"line": lines[i]} if lines else {}

    def entry(i: int) -> str:
        return "" if lines else f" (entry {i})"
    if k.size < MIN_POINTS:
        raise InputFileError(path, f"only {k.size} data points; need at least {MIN_POINTS}")
    for name, arr in (("k", k), ("P_zeta", P)):
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise InputFileError(path, f"{name} is not finite{entry(bad[0])}",
                                 column=name, **where(bad[0]))
    if k[0] <= 0:
        raise InputFileError(path, "k must be positive [Mpc^-1]", column="k", **where(0))
    bad = np.flatnonzero(np.diff(k) <= 0)
    if bad.size:
        raise InputFileError(path, f"k must increase strictly{entry(bad[0] + 1)}",
                             column="k", **where(bad[0] + 1))
    bad = np.flatnonzero(P < 0)
    if bad.size:
        raise InputFileError(path, f"P_zeta is negative{entry(bad[0])}", column="P_zeta",
                             **where(bad[0]))


def load_spectrum_h5(path: str) -> tuple[np.ndarray, np.ndarray]:
    """Read group ``spectrum`` (datasets ``k``, ``P_zeta``) of a zetascan result."""
    try:
        with h5py.File(path, "r") as handle:
            if "spectrum" not in handle:
                raise InputFileError(path, "no group 'spectrum' (with datasets k, P_zeta)")
            group = handle["spectrum"]
            for name in ("k", "P_zeta"):
                if name not in group:
                    raise InputFileError(path, f"group 'spectrum' has no dataset '{name}'",
                                         column=name)
            k, P = np.asarray(group["k"], float).ravel(), np.asarray(group["P_zeta"], float).ravel()
    except OSError as err:
        raise InputFileError(path, f"cannot open as HDF5 ({err})") from None
    if k.shape != P.shape:
        raise InputFileError(path, f"k and P_zeta lengths differ ({k.size} vs {P.size})")
    validate_spectrum(path, k, P)
    return k, P


def load_spectrum(path: str) -> tuple[np.ndarray, np.ndarray]:
    """A spectrum table from CSV or zetascan HDF5 (chosen by content, not extension)."""
    if not Path(path).is_file():
        raise InputFileError(path, "no such file")
    return load_spectrum_h5(path) if h5py.is_hdf5(path) else load_spectrum_csv(path)


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


def compute(k, P, args) -> Observables:
    """Both observables of the table (k, P) with the command line's conventions."""
    return settings_of(observables_section(args)).compute(k, P)


def write_result(out: Path, source: str, obs: Observables, options: dict) -> None:
    """Write groups gw and pbh with units and provenance (atomic, via scan.store)."""
    with store.atomic_h5(out) as handle:
        store.write_attrs(handle, store.provenance(json.dumps(options, sort_keys=True)))
        handle.attrs["input_spectrum"] = source
        write_observables(handle, obs)


def run(args: argparse.Namespace) -> int:
    """Compute both observables, write the HDF5 file (and figures); exit code."""
    source = str(args.spectrum)
    out = Path(args.out) if args.out else Path(source).with_name(Path(source).stem
                                                                 + "_observables.h5")
    k, P = load_spectrum(source)
    store.check_output_file(out, "observables file")
    obs = compute(k, P, args)
    write_result(out, source, obs, {k_: v for k_, v in vars(args).items()
                                                     if not k_.startswith("_")})
    for note in obs.notes:
        print(f"zetascan observe: warning: {note}")
    print(f"wrote {out}: max Omega_GW h^2 = {obs.omega_gw_h2_peak:.3e} at "
          f"f = {obs.f_gw_peak:.3e} Hz; f_PBH total = {obs.f_pbh_total:.3e}")
    if args.figures:
        paths = gw_plot.save_omega_gw(obs.f_hz, obs.omega_gw_h2, Path(args.figures) / "omega_gw")
        paths += pbh_plot.save_f_pbh(obs.m_msun, obs.f_pbh_per_lnm,
                                     Path(args.figures) / "f_pbh", total=obs.f_pbh_total)
        print("figures: " + ", ".join(str(p) for p in paths))
    return 0 if math.isfinite(obs.f_pbh_total) else 1
