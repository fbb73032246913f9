"""Writing one solve (``zetascan solve``) into the run's HDF5 file, and its figures.

Layout (every dataset has a ``units`` attribute):

* root attributes: provenance (see :func:`scan.store.provenance`), ``valid``, ``reason``;
* ``config``: the TOML text, attribute ``overrides``;
* ``background/``: ``N``, ``phi``, ``chi``, ``dchi_dN``, ``H`` (V0 = 1), ``eps1``, ``eps2``;
  attributes ``valid``, ``reason``, ``N_start``, ``N_end``; sub-group ``crossings`` with one
  dataset per crossing field;
* ``cmb/``: attributes ``N_star``, ``n_s``, ``r``, ``V0``, ``k_star`` (exact-mode values when
  the spectrum exists, otherwise the background's second-order slow-roll values) plus
  ``n_s_slow_roll``, ``r_slow_roll``, ``eps1``, ``eps2``, ``eps3``, ``source``;
* ``spectrum/``: ``k`` [Mpc^-1], ``P_zeta``, ``P_tensor``, ``N_exit``; attributes ``k_peak``,
  ``P_peak``, ``k_dip``, ``P_dip``, ``n_s``, ``r``, ``alpha_s``, ``A_s``, ``V0``, ``N_star``,
  ``usr_efolds``, ``valid``, ``reason``; ``peaks``: one row per peak of P_ζ (compound:
  ``pole``, ``k``, ``P_zeta``, ``f_gw``, ``omega_gw_h2``, ``M_pbh``, ``f_pbh``; units per
  column as attributes ``units_<column>``);
* ``gw/``: ``f`` [Hz], ``k`` [Mpc^-1], ``omega_gw_h2``; attributes ``f_peak``, ``omega_gw_h2_peak``,
  ``sigw_kernel``;
* ``pbh/``: ``M`` [M_sun], ``M_g`` [g], ``f_pbh`` (per ln M); attribute ``f_pbh_total`` and
  every convention (window, criterion, threshold, gamma_c, K, ...).
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan import store
from scan.config.schema import RunConfig
from scan.observables import Observables, cosmo
from scan.pipeline.peaks import UNITS, as_records
from scan.pipeline.solve import SolveResult, solve_config
from scan.store import RunFolder

@dataclasses.dataclass(frozen=True)
class Solved:
    """What :func:`solve_to_file` computed and wrote."""

    result: SolveResult
    out: Path
    figures: tuple[Path, ...] = ()


def solve_to_file(config: RunConfig, out: str | Path | None = None,
                  draw: Callable[[Path, SolveResult], list[Path]] | None = None) -> Solved:
    """``zetascan solve`` as one call: solve the configured model exactly and write it.

    Parameters
    ----------
    config : RunConfig
    out : str or Path, optional
        The result file (default: ``<run.output_dir>/<run.name>.h5``).
    draw : callable, optional
        ``draw(out, result) -> figure paths`` after the file is written.

    Raises
    ------
    InputFileError
        Another process writes ``out`` (named by its PID).
    """
    out = Path(out) if out else RunFolder.of(config).solve_result
    store.check_output_file(out, "result file")
    with store.RunLock(out, "another zetascan solve writes this result file; wait for it "
                       "or choose another --out"):
        result = solve_config(config)
        write_solve_result(out, config, result)
    figures = tuple(draw(out, result)) if draw is not None else ()
    return Solved(result, out, figures)


_BACKGROUND_UNITS = {"N": store.UNITS_EFOLDS, "phi": store.UNITS_M_P, "chi": store.UNITS_M_P,
                     "dchi_dN": store.UNITS_M_P, "H": store.UNITS_M_P, "eps1": "1", "eps2": "1"}
_BACKGROUND_NOTES = {"N": "e-folds (ln a)", "phi": "inflaton [reduced Planck mass M_p]",
                     "chi": "canonical field [M_p]", "dchi_dN": "d chi / dN [M_p per e-fold]",
                     "H": "Hubble rate [M_p] for V0 = 1 (scales as sqrt(V0))"}


def write_solve_result(path: str | Path, config: RunConfig, result: SolveResult) -> Path:
    """Write a new result file for one solve (atomically); return its path."""
    path = Path(path)
    with store.atomic_h5(path) as handle:
        store.write_attrs(handle, store.provenance(config.effective_text, config.run.seed))
        store.write_attrs(handle, {"valid": result.valid, "reason": result.reason})
        store.write_config(handle, config.text, config.overrides, config.base_dir)
        _write_background(handle.create_group("background"), result)
        _write_cmb(handle.create_group("cmb"), result)
        if result.spectrum is not None:
            _write_spectrum(handle.create_group("spectrum"), result)
        if result.observables is not None:
            write_observables(handle, result.observables)
    return path


def _write_background(group: h5py.Group, result: SolveResult) -> None:
    bg = result.background
    for name, units in _BACKGROUND_UNITS.items():
        store.write_dataset(group, name, getattr(bg, name), units,
                            _BACKGROUND_NOTES.get(name, ""))
    store.attach_scale(group, "N", *(n for n in _BACKGROUND_UNITS if n != "N"))
    store.write_attrs(group, {"valid": bg.valid, "reason": bg.reason, "N_start": bg.N_start,
                              "N_end": bg.N_end, "n_crossings": len(bg.crossings)})
    if bg.crossings:
        sub = group.create_group("crossings")
        for fld in dataclasses.fields(bg.crossings[0]):
            values = [getattr(c, fld.name) for c in bg.crossings]
            units = store.UNITS_M_P if fld.name == "position" else "1"  # index, e-folds
            store.write_dataset(sub, fld.name, values, units)


def _write_cmb(group: h5py.Group, result: SolveResult) -> None:
    p, s = result.pivot, result.spectrum
    nan = math.nan
    attrs = {"k_star": nan, "N_star": nan, "n_s": nan, "r": nan, "V0": nan,
             "source": "none", "units_k_star": "Mpc^-1", "units_V0": store.UNITS_M_P4}
    if p is not None:
        attrs.update(k_star=p.k_star, N_star=p.N_star, n_s=p.n_s, r=p.r, V0=p.V0,
                     n_s_slow_roll=p.n_s, r_slow_roll=p.r, eps1=p.eps1, eps2=p.eps2,
                     eps3=p.eps3, source="second-order slow roll on the exact background",
                     valid=p.valid, reason=p.reason)
    if s is not None and s.valid:
        attrs.update(N_star=s.N_star, n_s=s.n_s, r=s.r, V0=s.V0, alpha_s=s.alpha_s, A_s=s.A_s,
                     source="exact Mukhanov-Sasaki modes")
    store.write_attrs(group, attrs)


def _write_spectrum(group: h5py.Group, result: SolveResult) -> None:
    s = result.spectrum
    store.write_dataset(group, "k", s.k, "Mpc^-1")
    store.write_dataset(group, "P_zeta", s.P_zeta, "1", "dimensionless curvature power spectrum")
    store.write_dataset(group, "P_tensor", s.P_tensor, "1", "dimensionless tensor power "
                        "spectrum (both polarisations)")
    store.write_dataset(group, "N_exit", s.N_exit, store.UNITS_EFOLDS,
                        "e-fold of horizon exit k = aH")
    store.attach_scale(group, "k", "P_zeta", "P_tensor", "N_exit")
    store.write_attrs(group, {
        "k_peak": s.k_peak, "P_peak": s.P_peak, "k_dip": s.k_dip, "P_dip": s.P_dip,
        "n_s": s.n_s, "r": s.r, "alpha_s": s.alpha_s, "A_s": s.A_s, "V0": s.V0,
        "N_star": s.N_star, "k_star": s.k_star, "usr_efolds": s.usr_efolds,
        "valid": s.valid, "reason": s.reason, "units_k_peak": "Mpc^-1", "units_V0": store.UNITS_M_P4})
    peaks = store.write_dataset(group, "peaks", as_records(result.peaks), "1",
                                "every peak of P_zeta (prominence >= 1 dex), one row each: "
                                "pole (config number), k, P_zeta, Omega_GW h^2 maximum "
                                "(f_gw, omega_gw_h2) and f_PBH per ln M maximum (M_pbh, "
                                "f_pbh) in the peak's share of the axis; each column's units "
                                "in the attribute units_<column>")
    store.write_attrs(peaks, {f"units_{k}": u for k, u in UNITS.items()})


def write_observables(handle: h5py.Group, obs: Observables) -> None:
    """Groups ``gw`` (``f`` [Hz], ``k``, ``omega_gw_h2``) and ``pbh`` (``M`` [M_sun], ``M_g``,
    ``f_pbh`` per ln M; attribute ``f_pbh_total`` and every PBH convention, the QCD-era
    ones ``qcd_threshold`` and ``qcd_collapse`` included); ``gw`` carries ``sigw_kernel``,
    the induced-GW kernel's name."""
    gw = handle.create_group("gw")
    store.write_dataset(gw, "f", obs.f_hz, "Hz", "GW frequency today")
    store.write_dataset(gw, "k", cosmo.f_to_k(obs.f_hz), "Mpc^-1", "comoving wavenumber")
    store.write_dataset(gw, "omega_gw_h2", obs.omega_gw_h2, "1", "Omega_GW,0 h^2 per ln f")
    store.attach_scale(gw, "f", "k", "omega_gw_h2")
    store.write_attrs(gw, {"f_peak": obs.f_gw_peak, "omega_gw_h2_peak": obs.omega_gw_h2_peak,
                           "units_f_peak": "Hz", "notes": list(obs.notes) or ["none"],
                           "sigw_kernel": obs.sigw_kernel or "radiation"})
    pbh = handle.create_group("pbh")
    store.write_dataset(pbh, "M", obs.m_msun, "M_sun", "PBH mass")
    store.write_dataset(pbh, "M_g", cosmo.msun_to_grams(obs.m_msun), "g", "PBH mass")
    store.write_dataset(pbh, "f_pbh", obs.f_pbh_per_lnm, "1", "fraction of dark matter per ln M")
    store.attach_scale(pbh, "M", "M_g", "f_pbh")
    pbh.attrs["f_pbh_total"] = obs.f_pbh_total
    store.write_attrs(pbh, obs.conventions.as_attrs())
    if obs.qcd is not None:
        store.write_attrs(pbh, obs.qcd)
    write_zeta_map(pbh, obs)


def write_zeta_map(pbh: h5py.Group, obs: Observables) -> None:
    """The non-Gaussianity convention as ``pbh`` attributes (``non_gaussianity`` and its
    parameters; ``f_pbh_total_gaussian`` beside a non-Gaussian total) and, for ``model``,
    the delta-N map as dataset ``zeta_map`` (columns zeta_G, zeta) and ``f_nl_peak``."""
    zmap = obs.zeta_map
    if zmap is None:
        pbh.attrs["non_gaussianity"] = "gaussian"
        return
    store.write_attrs(pbh, zmap.as_attrs())
    if obs.f_pbh_total_gaussian is not None:
        pbh.attrs["f_pbh_total_gaussian"] = obs.f_pbh_total_gaussian
    if zmap.kind == "model":
        store.write_dataset(pbh, "zeta_map", np.column_stack([zmap.zeta_g, zmap.zeta]), "1",
                            "delta-N map at the peak scale: columns zeta_G, zeta")


def read_spectrum(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """``(k [Mpc^-1], P_zeta)`` from a result file's ``spectrum`` group."""
    with h5py.File(path, "r") as handle:
        return handle["spectrum/k"][()], handle["spectrum/P_zeta"][()]


def read_solve(path: str | Path) -> dict[str, Any]:
    """Arrays and attributes of a solve result's ``spectrum``, ``gw`` and ``pbh`` groups
    (only the groups the file has) and the background's ``N_end``.

    Raises
    ------
    InputFileError
        Not a solve result (:func:`scan.store.require`).
    """
    store.require(path, "solve")
    out: dict[str, Any] = {}
    with h5py.File(path, "r") as h:
        out["N_end"] = float(h["background"].attrs["N_end"])
        if "spectrum" in h:
            s = h["spectrum"]
            out["spectrum"] = {name: s[name][()] for name in ("k", "P_zeta", "P_tensor",
                                                              "N_exit")}
            out["spectrum"]["k_star"] = float(s.attrs["k_star"])
        if "gw" in h:
            out["gw"] = (h["gw/f"][()], h["gw/omega_gw_h2"][()])
        if "pbh" in h:
            out["pbh"] = (h["pbh/M"][()], h["pbh/f_pbh"][()], float(h["pbh"].attrs["f_pbh_total"]))
    return out
