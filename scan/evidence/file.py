"""The result file ``results/<run>/evidence.h5``: evidences, Bayes factor, nested samples.

Layout (every dataset has a ``units`` attribute):

* root attributes — provenance (:func:`scan.store.provenance`: versions, git hash, config
  hash, seed) and ``run_name``; dataset ``config`` — the TOML text with its overrides;
* group ``evidence`` — attributes ``ln_Z``, ``ln_Z_err`` (the model), ``ln_Z_foreground``,
  ``ln_Z_foreground_err``, ``ln_B_vs_foreground``, ``ln_B_vs_foreground_err`` (NaN
  when the run has no foreground hypothesis), ``scale_note`` (Kass & Raftery 1995),
  ``foreground_note`` (what the foreground hypothesis keeps), ``engine``, the
  settings (``live_points``, ``dlogz``, ``frac_remain``, ``seed``), ``parameter_names``
  (and ``width_prior_*`` when a width prior is mapped onto a wall coordinate);
  one subgroup per hypothesis (``model``, ``foreground``) with attributes ``ln_Z``,
  ``ln_Z_err``, ``ncall``, ``iterations``, ``ess`` and datasets ``points`` (every dead
  point), ``weights`` (sum 1), ``log_like`` and ``samples`` (equal-weight posterior draws).
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan import store
from scan.config.priors import width_prior_attributes
from scan.config.schema import RunConfig
from scan.errors import InputFileError
from scan.evidence.nested import ENGINE, NestedResult, NestedSettings
from scan.evidence.scale import kass_raftery

GROUP = "evidence"
FILE_NAME = "evidence.h5"

#: What the foreground-only hypothesis is, stored and printed with its Bayes factor.
FOREGROUND_NOTE = ("foreground = the same likelihood with the model's Omega_GW h^2 set to "
                   "zero (SMBH-binary amplitude free); the PBH and CMB-pivot terms still see "
                   "the model, so ln B measures what the GW data say given those bounds")


def evidence_path(config: RunConfig) -> Path:
    """``<output_dir>/<name>/evidence.h5``."""
    return Path(config.run.output_dir) / config.run.name / FILE_NAME


@dataclasses.dataclass(frozen=True)
class BayesFactor:
    """ln B = ln Z_a - ln Z_b with its error (independent runs: errors in quadrature)."""

    ln_B: float
    ln_B_err: float

    @classmethod
    def of(cls, ln_z_a: float, err_a: float, ln_z_b: float, err_b: float) -> BayesFactor:
        """From two evidences and their one-sigma errors."""
        return cls(ln_z_a - ln_z_b, math.hypot(err_a, err_b))


def write_evidence(path: Path, config: RunConfig, names: tuple[str, ...],
                   settings: NestedSettings, results: dict[str, NestedResult]) -> BayesFactor:
    """Write the file (atomically) and return the model-vs-foreground Bayes factor."""
    model = results["model"]
    fg = results.get("foreground")
    factor = BayesFactor(math.nan, math.nan) if fg is None else BayesFactor.of(
        model.ln_Z, model.ln_Z_err, fg.ln_Z, fg.ln_Z_err)
    with store.atomic_h5(path) as handle:
        store.write_attrs(handle, store.provenance(config.effective_text, settings.seed))
        handle.attrs["run_name"] = config.run.name
        store.write_config(handle, config.effective_text, config.overrides)
        group = handle.create_group(GROUP)
        store.write_attrs(group, {
            "ln_Z": model.ln_Z, "ln_Z_err": model.ln_Z_err,
            "ln_Z_foreground": math.nan if fg is None else fg.ln_Z,
            "ln_Z_foreground_err": math.nan if fg is None else fg.ln_Z_err,
            "ln_B_vs_foreground": factor.ln_B, "ln_B_vs_foreground_err": factor.ln_B_err,
            "scale_note": "none" if fg is None else kass_raftery(factor.ln_B),
            "foreground_note": "no foreground hypothesis" if fg is None else FOREGROUND_NOTE,
            "engine": ENGINE, "live_points": settings.live_points, "dlogz": settings.dlogz,
            "frac_remain": settings.frac_remain, "seed": settings.seed,
            "parameter_names": list(names), **width_prior_attributes(config)})
        for name, result in results.items():
            _write_hypothesis(group.create_group(name), result)
    return factor


def _write_hypothesis(group: h5py.Group, result: NestedResult) -> None:
    store.write_attrs(group, {"ln_Z": result.ln_Z, "ln_Z_err": result.ln_Z_err,
                              "ncall": result.ncall, "iterations": result.iterations,
                              "ess": result.ess})
    store.write_dataset(group, "points", result.points, "1",
                        "dead points of the nested run (parameter units)")
    store.write_dataset(group, "weights", result.weights, "1",
                        "posterior weights of the points (sum 1)")
    store.write_dataset(group, "log_like", result.log_like, "1",
                        "natural log-likelihood of the points")
    store.write_dataset(group, "samples", result.samples, "1",
                        "equal-weight posterior samples (parameter units)")


def read_evidence(path: str | Path) -> dict[str, Any]:
    """The ``evidence`` group's attributes, the stored config and the model's samples.

    Parameters
    ----------
    path : path
        A run folder (containing evidence.h5) or the file.

    Raises
    ------
    InputFileError
        No such file, or not an evidence file.
    """
    path = Path(path)
    if path.is_dir():
        path = path / FILE_NAME
    try:
        with h5py.File(path, "r") as handle:
            group = handle[GROUP]
            attrs = {k: _plain(v) for k, v in group.attrs.items()}
            model = group["model"]
            raw = handle["config"][()]
            return {"file": str(path), **attrs,
                    "config_text": raw.decode() if isinstance(raw, bytes) else str(raw),
                    "overrides": tuple(str(v) for v in handle["config"].attrs["overrides"]
                                       if str(v) != "none"),
                    "run_name": str(handle.attrs["run_name"]),
                    "points": model["points"][...], "weights": model["weights"][...],
                    "samples": model["samples"][...]}
    except (OSError, KeyError) as err:
        raise InputFileError(str(path), f"not a readable evidence file ({err}); run "
                             "'zetascan evidence CONFIG' to make it") from None


def _plain(value: Any) -> Any:
    """HDF5 attribute values as plain Python values."""
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, bytes):
        return value.decode()
    return value.item() if isinstance(value, np.generic) else value


def write_shift(path: str | Path, shift: dict[str, Any]) -> None:
    """Add the correction to the ``evidence`` group (attributes; nothing else changes)."""
    with h5py.File(path, "a") as handle:
        group = handle[GROUP]
        ln_z = float(group.attrs["ln_Z"])
        store.write_attrs(group, {"delta_ln_Z_exact": shift["delta_ln_Z"],
                                  "delta_ln_Z_exact_err": shift["delta_ln_Z_err"],
                                  "ln_Z_exact": ln_z + shift["delta_ln_Z"],
                                  "delta_ln_Z_ess": shift["ess"],
                                  "delta_ln_Z_samples": shift["samples"]})
