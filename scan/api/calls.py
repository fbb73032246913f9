"""The API's verbs: solve a config, observe a spectrum, load a result file.

Each is a thin layer over the library function the command line uses (``zetascan solve``:
:func:`scan.pipeline.solve_config`; ``zetascan observe``:
:func:`scan.observables.compute_observables`): inputs checked the same way, outputs as
:mod:`scan.api.records` with astropy units.
"""
from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import astropy.units as u
import h5py
import numpy as np

from scan.api.records import PER_MPC, Observed, Solution, solution_from_file
from scan.config import load_config, load_config_text
from scan.config.schema import ObservablesSection, RunConfig
from scan.errors import InputFileError
from scan.config.spec import build_section
from scan.observables.settings import settings_of
from scan.pipeline import solve_config
from scan.pipeline.result_file import write_solve_result
from scan.pipeline.spectrum_file import load_spectrum, validate_spectrum

ConfigLike = str | Path | Mapping[str, Any] | RunConfig


# --------------------------------------------------------------------------- configs
def toml_text(tables: Mapping[str, Any]) -> str:
    """TOML text of nested dicts (tables), lists of dicts (arrays of tables) and values.

    The inverse of ``tomllib.loads`` for the value types a run config uses (strings,
    numbers, booleans, lists), so a config given as a dict is stored as text like a file.
    """
    lines: list[str] = []
    _emit_table(lines, "", tables)
    return "\n".join(lines).strip("\n") + "\n"


def _is_table_array(value: Any) -> bool:
    return isinstance(value, (list, tuple)) and bool(value) and \
        all(isinstance(v, Mapping) for v in value)


def _emit_table(lines: list[str], prefix: str, table: Mapping[str, Any]) -> None:
    for key, value in table.items():
        if not isinstance(value, Mapping) and not _is_table_array(value):
            lines.append(f"{key} = {_toml_value(value)}")
    for key, value in table.items():
        name = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, Mapping):
            lines += ["", f"[{name}]"]
            _emit_table(lines, name, value)
        elif _is_table_array(value):
            for item in value:
                lines += ["", f"[[{name}]]"]
                _emit_table(lines, name, item)


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return repr(v) if math.isfinite(v) else ("nan" if math.isnan(v) else
                                                 ("inf" if v > 0 else "-inf"))
    if isinstance(value, str):
        return json.dumps(value)  # a TOML basic string: same escapes as JSON
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, Mapping):
        return "{" + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + "}"
    raise InputFileError("<config dict>", f"cannot write {type(value).__name__} {value!r} "
                         "as a TOML value (use strings, numbers, booleans and lists)")


def _override_strings(overrides: Mapping[str, Any] | Sequence[str] | None) -> tuple[str, ...]:
    if not overrides:
        return ()
    if isinstance(overrides, Mapping):
        return tuple(f"{key}={_toml_value(value)}" for key, value in overrides.items())
    return tuple(overrides)


def as_config(config: ConfigLike, overrides: Mapping[str, Any] | Sequence[str] | None = None
              ) -> RunConfig:
    """A validated :class:`~scan.config.schema.RunConfig` from a file path, a dict of TOML
    tables or a config, with ``--set``-style overrides (``{"modes.n_k": 48}``).

    Relative input paths of a file resolve against its folder; of a dict, against the
    working directory.
    """
    sets = _override_strings(overrides)
    if isinstance(config, RunConfig):
        if not sets:
            return config
        return load_config_text(config.text, config.source, tuple(config.overrides) + sets,
                                config.run.name, config.base_dir)
    if isinstance(config, Mapping):
        return load_config_text(toml_text(config), "<config dict>", sets)
    return load_config(config, overrides=sets)


# --------------------------------------------------------------------------- verbs
def solve(config: ConfigLike, overrides: Mapping[str, Any] | Sequence[str] | None = None, *,
          observables: bool = True, out: str | Path | None = None) -> Solution:
    """Solve one configured model exactly: background, pivot, modes, Ω_GW h², f_PBH.

    Parameters
    ----------
    config : str, Path, dict or RunConfig
        A run config file, its tables as a dict, or a loaded config.
    overrides : mapping or sequence of str, optional
        Keys to change, ``{"model.poles[0].width": 0.02}`` or ``["modes.n_k=48"]``.
    observables : bool
        Also compute Ω_GW h²(f) and f_PBH(M) of the spectrum.
    out : str or Path, optional
        Also write the result file ``zetascan solve`` writes (no figures).

    Returns
    -------
    Solution
        An invalid model is a value (``valid`` False, ``reason``), not an exception.

    Raises
    ------
    ConfigError
        The config is not valid (the message names the key and a fix).
    """
    cfg = as_config(config, overrides)
    result = solve_config(cfg, with_observables=observables)
    if out is not None:
        write_solve_result(out, cfg, result)
    return Solution.from_record(result, source=cfg.source)


def observe(spectrum: str | Path | Any, P_zeta: Any = None, **observables: Any) -> Observed:
    """Ω_GW h²(f) today and f_PBH(M) of a curvature spectrum.

    Parameters
    ----------
    spectrum : str, Path, Quantity or array
        A table file (CSV ``k,P_zeta`` or a zetascan result with a ``spectrum`` group), or
        the wavenumbers k (a Quantity convertible to 1/Mpc, or numbers in Mpc⁻¹).
    P_zeta : array, optional
        The dimensionless spectrum at ``k`` (when ``spectrum`` is k).
    **observables
        Any key of a config's ``[observables]`` table (``configs/README.md``): the PBH
        conventions ``window``, ``criterion``, ``threshold``, ``mass_function``,
        ``gamma_c``, ``collapse_K``, ``gamma``, ``ps_factor``, ``omega_dm_h2``; the grids
        ``n_f``, ``n_m``; ``n_eff``, ``gstar``, ``gstar_table``; non-Gaussianity keys.
        Defaults are the config defaults, as for ``zetascan observe``.

    Returns
    -------
    Observed

    Raises
    ------
    InputFileError
        An unreadable table, k not positive and strictly increasing, fewer than 8 points.
    ConfigError
        An unknown key or a bad value (the message names it).
    """
    if P_zeta is None:
        k, P = load_spectrum(str(spectrum))
    else:
        k = (spectrum.to_value(PER_MPC) if isinstance(spectrum, u.Quantity)
             else np.asarray(spectrum, dtype=float))
        P = u.Quantity(P_zeta, u.one).to_value(u.one)
        k, P = np.ravel(k).astype(float), np.ravel(P).astype(float)
        if k.shape != P.shape:
            raise InputFileError("<arrays>", f"k and P_zeta lengths differ ({k.size} vs "
                                 f"{P.size})")
        validate_spectrum("<arrays>", k, P)
    section = build_section(ObservablesSection, dict(observables), "observables",
                            "scan.observe")
    return Observed.from_record(settings_of(section).compute(k, P))


def load_result(path: str | Path) -> Solution:
    """Read a ``zetascan solve`` result (or a ``zetascan observe`` output) with units.

    Raises
    ------
    InputFileError
        Not an HDF5 file, or none of the groups ``spectrum``, ``gw``/``pbh``.
    """
    path = Path(path)
    if not path.is_file():
        raise InputFileError(str(path), "no such file (give a result of zetascan solve or "
                             "zetascan observe)")
    try:
        with h5py.File(path, "r") as handle:
            if "spectrum" not in handle and "gw" not in handle:
                raise InputFileError(str(path), "neither a 'spectrum' nor a 'gw' group: not "
                                     "a result of zetascan solve or observe")
            return solution_from_file(handle, str(path))
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None
