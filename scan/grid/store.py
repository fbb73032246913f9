"""The grid file ``<output_dir>/<name>/grid.h5``: layout, the one writer, readers.

Layout (every dataset has a ``units`` attribute; arrays are (ny, nx), row j = y[j]):

* root attributes: provenance (:func:`scan.store.provenance`), ``kind``, ``run_name``,
  ``surrogate_sha256`` and ``curves_sha256`` (what the grid was computed from), and
  ``curve_files``/``curve_sha256`` per curve file (:mod:`scan.store.identity`); dataset
  ``config`` (the TOML text and its overrides);
* group ``grid``, attributes ``x_key, y_key, x_label, y_label, x_scale, y_scale`` (linear
  or log), ``source``, ``profile``, ``parameter_keys``, ``nuisance_names``,
  ``nuisance_values``; datasets ``x`` (nx,), ``y`` (ny,), ``done``, ``valid`` (bool),
  ``reason`` (int16, attribute ``reason_names``; -1 not evaluated yet), the derived
  ``k_peak, P_peak, f_pbh_total, f_gw_peak, omega_gw_h2_peak``, the total ``log_like``
  and ``params`` (ny, nx, n_model: the model parameters used, profiled or fixed);
* ``grid/terms/<term name>`` per constraint, attributes ``kind``, ``label``, ``rule``,
  ``status_names``; datasets ``status`` (int8: -1 not evaluated, 0 allowed, 1 excluded or
  disfavoured, 2 detectable, 3 not detectable), ``log_like``, ``snr`` (sensitivity terms)
  and ``reference_log_like`` (detections: the grid's best ln L of the term).

Every dataset is written in full when the file is created (NaN, -1, False), so the run
only overwrites values in place.  A block's values are written and flushed before its
``done`` flags, so a killed run leaves every point either complete or not done; the file
is written in SWMR mode (readable while it grows) and a lock file keeps out a second
writer.  A writer killed mid-run leaves HDF5's "open for writing" flags set: the next
writer copies the file into a clean one (:func:`scan.store.recover_store`).
"""
from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan.errors import InputFileError
from scan.grid.evaluate import DERIVED, BlockResult
from scan.posterior.reasons import REASONS
from scan.grid.plan import GridPlan
from scan.observables.settings import gw_convention_attrs, pbh_convention_attrs
from scan.grid.verdict import NOT_EVALUATED, STATUS_NAMES, TermInfo, is_relative, relative_status
from scan.store import (KIND_ATTRS, RunLock, SingleWriter, provenance, require,
                        stored_config_of, write_attrs, write_config)

KIND = KIND_ATTRS["grid"]


def file_digest(paths: list[str] | tuple[str, ...]) -> str:
    """SHA-256 over the contents of ``paths`` (in order); "none" for no paths."""
    if not paths:
        return "none"
    digest = hashlib.sha256()
    for path in paths:
        digest.update(Path(path).read_bytes())
    return digest.hexdigest()


def _full(group: h5py.Group, name: str, shape: tuple[int, ...], fill: Any, dtype: Any,
          units: str, description: str = "") -> None:
    dset = group.create_dataset(name, data=np.full(shape, fill, dtype=dtype))
    dset.attrs["units"] = units
    if description:
        dset.attrs["description"] = description


def create_grid_file(path: str | Path, config: Any, plan: GridPlan, infos: list[TermInfo],
                     digests: dict[str, Any]) -> None:
    """Write an empty grid file under a temporary name and rename it into place."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    shape = plan.shape
    try:
        with h5py.File(tmp, "w", libver="latest") as handle:
            write_attrs(handle, provenance(config.effective_text, config.run.seed))
            write_attrs(handle, {"kind": KIND, "run_name": config.run.name, **digests,
                                 **pbh_convention_attrs(config.observables),
                                 **gw_convention_attrs(config.observables)})
            write_config(handle, config.effective_text, config.overrides, config.base_dir)
            g = handle.create_group("grid")
            names = plan.priors.names
            write_attrs(g, {"x_key": plan.x.key, "y_key": plan.y.key, "x_label": plan.x.label,
                            "y_label": plan.y.label, "x_scale": plan.x.scale,
                            "y_scale": plan.y.scale, "source": plan.source,
                            "profile": bool(plan.profile),
                            "parameter_keys": list(names[:plan.n_model]),
                            "nuisance_names": list(names[plan.n_model:]) or ["none"],
                            "nuisance_values": np.asarray(plan.base[plan.n_model:], float)})
            for axis in (plan.x, plan.y):
                name = "x" if axis is plan.x else "y"
                g.create_dataset(name, data=axis.values).attrs["units"] = axis.units
            _full(g, "done", shape, False, bool, "1", "the point has been evaluated")
            _full(g, "valid", shape, False, bool, "1", "the model is valid (reason ok)")
            _full(g, "reason", shape, -1, np.int16, "1", "index into reason_names; -1 not "
                  "evaluated yet")
            g["reason"].attrs["reason_names"] = list(REASONS)
            for name, units in DERIVED.items():
                _full(g, name, shape, np.nan, float, units)
            _full(g, "log_like", shape, np.nan, float, "1", "total ln L (-inf: excluded by a "
                  "hard bound; NaN: not evaluated)")
            _full(g, "params", (*shape, plan.n_model), np.nan, float,
                  "parameter units (see attribute keys)", "model parameters used")
            g["params"].attrs["keys"] = list(names[:plan.n_model])
            terms = g.create_group("terms")
            for info in infos:
                t = terms.create_group(info.name)
                write_attrs(t, {"kind": info.kind, "label": info.label, **info.attrs,
                                "status_names": [f"{k}: {v}" for k, v in STATUS_NAMES.items()]})
                _full(t, "status", shape, NOT_EVALUATED, np.int8, "1", "see status_names")
                _full(t, "log_like", shape, np.nan, float, "1", "ln L of this term")
                if info.kind == "sensitivity":
                    _full(t, "snr", shape, np.nan, float, "1",
                          "signal-to-noise ratio (NaN for a power-law-integrated curve)")
                if is_relative(info.kind):
                    _full(t, "reference_log_like", (), np.nan, float, "1",
                          "largest ln L of this term on the evaluated grid")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def _spans(points: np.ndarray, nx: int):
    """``(j, i0, i1, a, b)``: runs of consecutive points within one row."""
    points = np.asarray(points, dtype=np.int64)
    start = 0
    for k in range(1, len(points) + 1):
        if k == len(points) or points[k] != points[k - 1] + 1 or points[k] % nx == 0:
            j, i0 = divmod(int(points[start]), nx)
            yield j, i0, i0 + (k - start), start, k
            start = k


class GridWriter(SingleWriter):
    """The one writer of a grid file (SWMR; use as a context manager).

    Parameters
    ----------
    path : str or Path
    infos : list of TermInfo
        The constraints, in the order of the workers' term arrays.
    lock : RunLock, optional
        The file's lock when the caller holds it (:func:`scan.grid.run.run_grid`).
    """

    def __init__(self, path: str | Path, infos: list[TermInfo],
                 lock: RunLock | None = None) -> None:
        self.infos = list(infos)
        # HDF5's own file lock is off for the writer: the lock file keeps writers out,
        # and a reader that opened the file a moment earlier must not block it
        super().__init__(path, "another zetascan grid is writing this file; wait for it to "
                         "finish or stop it first", hdf5_locking=False, lock=lock)
        g = self.handle["grid"]
        self.nx = g["x"].shape[0]
        self.done, self.valid = g["done"][()], g["valid"][()]
        self.relative = {m: g[f"terms/{info.name}/log_like"][()]
                         for m, info in enumerate(self.infos) if is_relative(info.kind)}
        self.refresh()

    @property
    def pending(self) -> np.ndarray:
        """Flat indices of the points not done."""
        return np.flatnonzero(~self.done.ravel())

    def write(self, result: BlockResult) -> None:
        """Store one block: values first (flushed), then its ``done`` flags."""
        g = self.handle["grid"]
        valid = result.reason == 0
        columns: list[tuple[str, np.ndarray]] = [
            ("reason", result.reason), ("valid", valid), ("log_like", result.log_like),
            ("params", result.params)]
        columns += [(name, result.derived[:, k]) for k, name in enumerate(DERIVED)]
        for m, info in enumerate(self.infos):
            base = f"terms/{info.name}/"
            columns += [(base + "status", result.status[:, m]),
                        (base + "log_like", result.term_log_like[:, m])]
            if info.kind == "sensitivity":
                columns.append((base + "snr", result.snr[:, m]))
        for j, i0, i1, a, b in _spans(result.points, self.nx):
            for name, values in columns:
                g[name][j, i0:i1] = values[a:b]
        self.handle.flush()
        for j, i0, i1, a, b in _spans(result.points, self.nx):
            g["done"][j, i0:i1] = True
        self.handle.flush()
        rows, cols = np.divmod(result.points, self.nx)
        self.done[rows, cols], self.valid[rows, cols] = True, valid
        for m, values in self.relative.items():
            values[rows, cols] = result.term_log_like[:, m]
        self.refresh()

    def refresh(self) -> None:
        """Recompute the statuses of the relative (detection) terms over the grid."""
        if not self.relative:
            return
        g = self.handle["grid"]
        for m, values in self.relative.items():
            status, best = relative_status(values, self.done & self.valid)
            g[f"terms/{self.infos[m].name}/status"][...] = status
            g[f"terms/{self.infos[m].name}/reference_log_like"][()] = best
        self.handle.flush()


def read_grid(path: str | Path) -> dict[str, Any]:
    """Everything in a grid file as plain values.

    Returns
    -------
    dict
        ``attrs`` (root), ``grid_attrs``, every ``grid`` dataset by name (``units``: their
        units attributes), and ``terms``:
        name -> {``attrs``, ``status``, ``log_like``, optional ``snr``,
        ``reference_log_like``}.

    Raises
    ------
    InputFileError
        Not a zetascan grid file.
    """
    require(path, "grid")
    try:
        with h5py.File(path, "r", libver="latest", swmr=True) as handle:
            g = handle["grid"]
            out: dict[str, Any] = {"attrs": dict(handle.attrs), "grid_attrs": dict(g.attrs)}
            out["units"] = {}
            for name, item in g.items():
                if isinstance(item, h5py.Dataset):
                    out[name] = item[()]
                    out["units"][name] = str(item.attrs.get("units", ""))
            out["reason_names"] = [str(v) for v in g["reason"].attrs["reason_names"]]
            out["terms"] = {name: {"attrs": dict(t.attrs),
                                   **{k: v[()] for k, v in t.items()}}
                            for name, t in g["terms"].items()}
            stored = stored_config_of(handle, str(handle.attrs.get("run_name", "run")))
            out["config_text"], out["overrides"] = stored.text, stored.overrides
            out["base_dir"] = stored.base_dir
    except KeyError as err:
        raise InputFileError(str(path), f"incomplete grid file: missing {err}; was it "
                             "written by an older or unfinished zetascan grid?") from None
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None
    return out
