"""The ``verify`` group of a chain file: the verification's report, weights and blobs.

Written once by ``zetascan verify`` after every exact solve is in (replacing an earlier
group; nothing else in the chain file changes) and read back for reports.  Attributes:
the draw (samples, available, seed, burn-in, thin), ESS, the flags and thresholds, the
exact solver, UTC time; datasets ``index``, ``theta``, ``log_post_surrogate``,
``log_post_exact``, ``weight``, ``exact_reason``, groups ``surrogate`` and ``exact``
(one dataset per blob field) and ``report`` (JSON).
"""
from __future__ import annotations

import datetime as _dt
import json
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan import store
from scan.errors import InputFileError
from scan.sampler import runfile

GROUP = "verify"
#: Units of the blob fields the posterior target writes (others: "unspecified").
BLOB_UNITS: dict[str, str] = {"k_peak": "Mpc^-1", "P_peak": "1", "f_gw_peak": "Hz",
                              "omega_gw_h2_peak": "1", "f_pbh_total": "1",
                              "M_pbh_peak": "M_sun", "n_s": "1", "r": "1",
                              "N_star": "1", "log_like": "1", "reason": "1"}


def blob_units(name: str) -> str:
    """The ``units`` attribute of a blob field."""
    if name in BLOB_UNITS:
        return BLOB_UNITS[name]
    if name.startswith(("snr_", "lnL_")):
        return "1"
    return "unspecified"


def write_group(path: str | Path, result: Any) -> None:
    """Replace the ``verify`` group of the chain file (append mode; nothing else changes);
    ``result`` is a :class:`scan.verify.run.Verification`.

    The free space is checked first (twice the group's data, for HDF5's own records): a
    chain file cut short by a full disk would no longer read back.
    """
    report, ev = result.report, result.evaluated
    data = (ev.blobs_surrogate.nbytes + ev.blobs_exact.nbytes + len(json.dumps(report))
            + np.asarray(result.weights).nbytes + np.asarray(result.index).nbytes)
    store.require_space(path, 2 * data, "the chain file is unchanged and every solved sample "
                        "stays in the partial file; free some space and rerun with --resume")
    try:
        with h5py.File(path, "a") as handle:
            if GROUP in handle:
                del handle[GROUP]
            group = handle.create_group(GROUP)
            store.write_attrs(group, {
                "samples": report["samples"], "available": report["available"],
                "seed": report["seed"], "burn_in": report["burn_in"], "thin": report["thin"],
                "ess": report["ess"], "ess_fraction": report["ess_fraction"],
                "biased": report["biased"], "flags": list(report["flags"]) or ["none"],
                "ess_threshold": report["thresholds"]["ess_fraction"],
                "shift_threshold": report["thresholds"]["shift"],
                "exact_solver": report["exact_solver"],
                "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(
                    timespec="seconds")})
            _write_arrays(group, result)
            for side, blobs in (("surrogate", ev.blobs_surrogate), ("exact", ev.blobs_exact)):
                sub = group.create_group(side)
                for name in blobs.dtype.names:
                    store.write_dataset(sub, name, blobs[name], blob_units(name),
                                        f"{side} blob field '{name}' at the drawn samples")
            dset = group.create_dataset("report", data=json.dumps(report),
                                        dtype=h5py.string_dtype())
            dset.attrs["units"] = "1"
            dset.attrs["format"] = "JSON"
    except OSError as err:
        raise InputFileError(str(path), f"cannot write the verify group ({err}); is the "
                             "run still being sampled?") from None


def _write_arrays(group: h5py.Group, result: Any) -> None:
    ev = result.evaluated
    store.write_dataset(group, "index", result.index.astype(np.int64), "1",
                        "indices into the flattened samples after burn-in and thinning")
    store.write_dataset(group, "theta", ev.thetas, "1",
                        "drawn samples (parameter units)")
    store.write_dataset(group, "log_post_surrogate", ev.log_p_surrogate, "1",
                        "surrogate log posterior (unnormalised, natural log)")
    store.write_dataset(group, "log_post_exact", ev.log_p_exact, "1",
                        "exact log posterior (unnormalised, natural log)")
    store.write_dataset(group, "weight", result.weights, "1",
                        "normalised importance weights exact/surrogate")
    store.write_dataset(group, "exact_reason",
                        np.array(list(ev.exact_reason), dtype=h5py.string_dtype()), "1",
                        "why the exact model is invalid ('' when valid)")


def read_report(path: str | Path) -> dict[str, Any] | None:
    """The stored ``verify`` report of a chain file, or None when there is none."""
    with h5py.File(runfile.chain_path(path), "r") as handle:
        if GROUP not in handle:
            return None
        raw = handle[GROUP]["report"][()]
    return json.loads(raw.decode() if isinstance(raw, bytes) else raw)
