"""The data ``zetascan plot`` draws, read from the result files once and on demand."""
from __future__ import annotations

import functools
import re
import warnings
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan.config import describe, load_config_text
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.curves import load_curve
from scan.errors import ConfigError, InputFileError
from scan.likelihood.from_config import curve_paths_of
from scan.plots.sources import Sources, chain_has_observables
from scan.sampler.bands import N_SAMPLES, SEED, posterior_bands
from scan.sampler.summary import posterior_samples
from scan.store import stored_base_dir


def stored_config(path: Path):
    """The run config stored in a result or chain file (with its overrides re-applied)."""

    with h5py.File(path, "r") as handle:
        if "config" not in handle:
            raise InputFileError(str(path), "no 'config' dataset: not a zetascan result file")
        raw = handle["config"][()]
        overrides = [str(v) for v in handle["config"].attrs.get("overrides", [])]
        name = str(handle.attrs.get("run_name", path.stem))
        base_dir = stored_base_dir(handle)
    text = raw.decode("utf-8") if isinstance(raw, bytes) else str(raw)
    return load_config_text(text, f"{path} (stored config)",
                            tuple(v for v in overrides if v != "none"), name, base_dir)


def read_solve(path: Path) -> dict[str, Any]:
    """Arrays and attributes of a solve result's ``spectrum``, ``gw`` and ``pbh`` groups."""
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


def _units_of_keys() -> dict[str, str]:

    return {row[0]: row[3] for row in describe(RunConfig)}


_UNIT_TEXT = {"M_p": r"$M_p$", "Mpc^-1": r"Mpc$^{-1}$", "GeV": "GeV", "dex": "dex"}


def axis_label(key: str, label: str, log: bool) -> str:
    """Axis text of a sampled parameter: its label, its config units, log10 when asked."""
    units = _units_of_keys().get(re.sub(r"\[\d+\]", "[]", key), "")
    unit = _UNIT_TEXT.get(units, units)
    if log:
        return rf"$\log_{{10}}$({label} / {unit})" if unit else rf"$\log_{{10}}$ {label}"
    return f"{label} [{unit}]" if unit else label


class Inputs:
    """Lazily loaded inputs of the figures of one :class:`Sources`.

    Parameters
    ----------
    sources : Sources
    curves : tuple of str or None
        Bound-curve files; None takes the ``[likelihood]`` curves of the stored config.
    samples, seed : int
        Posterior samples drawn for the bands, and the draw's seed.
    """

    def __init__(self, sources: Sources, curves: tuple[str, ...] | None = None,
                 samples: int = N_SAMPLES, seed: int = SEED) -> None:
        self.sources, self.curve_files, self.samples, self.seed = sources, curves, samples, seed
        self.notes: list[str] = []

    @functools.cached_property
    def solve(self) -> dict[str, Any]:
        """:func:`read_solve` of the solve result."""
        return read_solve(self.sources.solve)

    @functools.cached_property
    def config(self):
        """The stored config of the solve result, else of the chain."""
        return stored_config(self.sources.solve or self.sources.chain or self.sources.grid)

    @functools.cached_property
    def curves(self) -> list:
        """Bound curves (CSV files only; scalar bounds have no curve to draw)."""

        if self.curve_files is not None:
            for name in self.curve_files:
                if not Path(name).is_file():
                    raise InputFileError(name, "no such bound-curve file (give CSV files in "
                                         "the curve format of constraints/README.md)")
            paths = self.curve_files
        else:
            try:
                paths = curve_paths_of(self.config)
            except ConfigError as err:
                self.notes.append(f"no bound curves drawn ({err}); pass --curves FILE ...")
                return []
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            curves = [load_curve(p) for p in paths if str(p).endswith(".csv")]
        self.notes += [f"warning: {w.message}" for w in caught]
        return curves

    @functools.cached_property
    def bands(self):
        """:class:`scan.sampler.bands.PosteriorBands` of the chain, or None without one."""

        chain = self.sources.chain
        if chain is None or not chain_has_observables(chain):
            return None
        bands = posterior_bands(chain, self.samples, self.seed)
        self.notes.append(f"bands: {bands.used} of {bands.drawn} drawn samples "
                          f"(of {bands.available} after burn-in and thinning; seed {bands.seed}); "
                          f"median {bands.peak_points:g} mass points within 1 dex of a "
                          "sample's f_PBH maximum")
        return bands

    @functools.cached_property
    def posterior(self) -> dict[str, Any]:
        """Chain samples after burn-in and thinning, with names, labels and prior kinds."""

        chain = self.sources.chain
        post = posterior_samples(chain)
        if not len(post["samples"]):
            raise InputFileError(str(chain), f"no samples after burn-in {post['burn_in']} and "
                                 f"thinning {post['thin']}: run the chain longer")
        priors = PriorSet.from_config(stored_config(chain))
        post["priors"] = {p.name: p for p in priors.priors}
        return post

    def column(self, key: str, log: bool) -> np.ndarray:
        """One parameter (or derived blob field) of the chain's samples, log10 if asked."""
        post = self.posterior
        if key in post["names"]:
            values = post["samples"][:, list(post["names"]).index(key)]
        elif post["blobs"] is not None and key in post["blobs"].dtype.names:
            values = post["blobs"][key]
        else:
            raise InputFileError(str(self.sources.chain), f"the chain has no parameter or "
                                 f"derived quantity '{key}' (it varies "
                                 f"{', '.join(post['names'])}); give a chain over the grid's axes")
        values = np.asarray(values, float)
        return np.log10(values) if log else values
