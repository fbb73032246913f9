"""The training store ``results/<run>/training.h5``: planned points and finished solves.

Layout (every dataset has a ``units`` attribute):

* root attributes: provenance (:func:`scan.store.provenance`), ``identity_json``
  (:mod:`scan.surrogate.identity`), ``parameter_keys``;
* ``config``: the config text;  ``shape_x``: the shape grid ln(k/k_peak);
* ``plan/u``, ``plan/stage``, ``plan/seq``: every point ever planned (unit cube, stage of
  :mod:`scan.surrogate.design`, number within its stage) — the point's index is its row;
* ``points/*``: one row per finished solve, appended as solves finish: ``index`` (row
  in ``plan``), ``params``, ``valid``, ``reason``, ``scalars`` (see
  :data:`scan.surrogate.record.SCALARS`; stores made before ``ln_wall_width`` have six
  columns), ``shape``.

The file is written in HDF5 single-writer/multiple-reader (SWMR) mode and flushed after
every append, so a killed run leaves a readable file holding every finished point.
``points/index`` is written last and its fill value is -1, so a row whose write was cut
short is ignored on reading.  Only the master process writes; a lock file
(``training.h5.lock``, released by the OS when the writer dies) keeps a second training
run out.  A writer killed mid-run leaves HDF5's "open for writing" flags set: the next
writer (holding the lock, so nobody else is writing) copies the file's objects into a
fresh file with the flags clear (:func:`recover_store`) and continues.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import h5py
import numpy as np

from scan.errors import InputFileError
from scan.store import (KIND_ATTRS, RunLock, SingleWriter, append_bytes, atomic_h5,
                        config_hash, provenance, put_rows, require, require_space,
                        write_config)
from scan.surrogate.identity import differences
from scan.surrogate.record import SCALARS, TrainingRecord

REASON_BYTES = 160
KIND = KIND_ATTRS["training"]


@dataclass(frozen=True)
class StoredPoints:
    """Finished points read back from a store (rows sorted by plan index)."""

    index: np.ndarray
    params: np.ndarray
    valid: np.ndarray
    reason: list[str]
    scalars: np.ndarray
    shape: np.ndarray


def _extendable(group: h5py.Group, name: str, shape: tuple[int, ...], dtype, units: str,
                fill=None) -> None:
    dset = group.create_dataset(name, shape=(0, *shape), maxshape=(None, *shape),
                                dtype=dtype, chunks=(64, *shape), fillvalue=fill)
    dset.attrs["units"] = units


def create_store(path: str | Path, config, space, x: np.ndarray, ident: dict) -> None:
    """Create an empty training store (refuses to overwrite an existing file).

    Written under a temporary name and renamed (:func:`scan.store.atomic_h5`), so a full
    disk never leaves a half-made store that ``--resume`` would refuse.
    """
    path = Path(path)
    if path.exists():
        raise InputFileError(str(path), "a training store already exists; pass --resume to "
                             "continue it, or remove the file to start again")
    d, nx = space.dim, len(x)
    with atomic_h5(path, libver="latest") as handle:
        for key, value in provenance(config.effective_text, config.run.seed).items():
            handle.attrs[key] = value
        handle.attrs["kind"] = KIND
        handle.attrs["identity_json"] = json.dumps(ident, sort_keys=True)
        handle.attrs["parameter_keys"] = list(space.keys)
        handle.attrs["parameter_priors"] = list(space.kinds)
        handle.attrs["parameter_low"] = np.array(space.low)
        handle.attrs["parameter_high"] = np.array(space.high)
        write_config(handle, config.effective_text, config.overrides, config.base_dir)
        handle.create_dataset("shape_x", data=np.asarray(x, float)).attrs["units"] = "1"
        plan = handle.create_group("plan")
        _extendable(plan, "u", (d,), "f8", "1")
        _extendable(plan, "stage", (), "i4", "1")
        _extendable(plan, "seq", (), "i8", "1")
        pts = handle.create_group("points")
        _extendable(pts, "index", (), "i8", "1", fill=-1)
        _extendable(pts, "params", (d,), "f8", "parameter units (see parameter_keys)")
        _extendable(pts, "valid", (), "i1", "1")
        _extendable(pts, "reason", (), f"S{REASON_BYTES}", "1")
        _extendable(pts, "scalars", (len(SCALARS),), "f8", "see attribute columns")
        pts["scalars"].attrs["columns"] = list(SCALARS)
        _extendable(pts, "shape", (nx,), "f8", "dex")


def check_identity(path: str | Path, ident: dict) -> None:
    """Raise InputFileError naming every difference if the store is of another model."""
    require(path, "training")
    try:
        with h5py.File(path, "r", libver="latest", swmr=True) as handle:
            stored = json.loads(handle.attrs["identity_json"])
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None
    diff = differences(stored, ident)
    if diff:
        raise InputFileError(str(path), "made with a different model config; refusing to "
                             "mix training points (" + "; ".join(diff) + "); use another "
                             "run.name or the original config")


def stored_config_hash(path: str | Path) -> str:
    """SHA-256 of the config text the store was made with."""
    with h5py.File(path, "r", libver="latest", swmr=True) as handle:
        raw = handle["config"][()]
    return config_hash(raw.decode() if isinstance(raw, bytes) else str(raw))


#: What to do when another process writes the store (the lock names its PID).
BUSY = "another zetascan train is writing this training store; wait for it or stop it first"


class StoreWriter(SingleWriter):
    """The one writer of a training store (open in SWMR mode; use as a context manager)."""

    def __init__(self, path: str | Path, lock: RunLock | None = None) -> None:
        super().__init__(path, BUSY, lock=lock)

    def _require_space(self, datasets, start: int, rows: int) -> None:
        """Stop before an append the disk cannot take: the store keeps every finished
        point and ``--resume`` continues from them."""
        done = self.handle["points/index"].shape[0]
        require_space(self.path, append_bytes(list(datasets), start, rows),
                      f"it keeps the {done} points solved before; free some space and "
                      "rerun with --resume")

    def add_plan(self, u: np.ndarray, stage: int, seq: np.ndarray) -> np.ndarray:
        """Append planned unit-cube points (``seq`` last); return their plan indices.

        As in :meth:`append`, rows go where ``seq`` ends (torn rows are overwritten).
        """
        plan = self.handle["plan"]
        start = plan["seq"].shape[0]
        self._require_space(plan.values(), start, len(u))
        put_rows(plan["u"], start, np.atleast_2d(u))
        put_rows(plan["stage"], start, np.full(len(u), stage, "i4"))
        plan["u"].flush()
        plan["stage"].flush()
        put_rows(plan["seq"], start, np.asarray(seq, "i8"))
        self.handle.flush()
        return np.arange(start, start + len(u))

    def append(self, indices: list[int], records: list[TrainingRecord]) -> None:
        """Append finished solves (index written last), then flush.

        Rows go where ``index`` ends, not where each dataset ends: a writer killed
        between the values and the index leaves the values longer than the index, and
        those torn rows are overwritten here (appending after them would pair the next
        index with the torn values).
        """
        if not records:
            return
        pts = self.handle["points"]
        row = pts["index"].shape[0]
        self._require_space(pts.values(), row, len(records))
        reasons = [r.reason.encode("utf-8")[:REASON_BYTES] for r in records]
        values = {"params": np.array([r.params for r in records], float),
                  "valid": np.array([r.valid for r in records], "i1"),
                  "reason": np.array(reasons, f"S{REASON_BYTES}"),
                  "scalars": _columns(np.array([r.scalar_targets() for r in records]),
                                      pts["scalars"].shape[1]),
                  "shape": np.array([r.shape for r in records], float)}
        for name, rows in values.items():
            put_rows(pts[name], row, rows)
            pts[name].flush()
        put_rows(pts["index"], row, np.asarray(indices, "i8"))
        self.handle.flush()


def read_plan(path: str | Path) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(u, stage, seq)`` of every planned point (row = plan index)."""
    with h5py.File(path, "r", libver="latest", swmr=True) as handle:
        plan = handle["plan"]
        n = plan["seq"].shape[0]  # seq is written last
        return plan["u"][:n], plan["stage"][:n], plan["seq"][:n]


def read_points(path: str | Path) -> StoredPoints:
    """Every finished point (each plan index once; torn rows dropped)."""
    with h5py.File(path, "r", libver="latest", swmr=True) as handle:
        pts = handle["points"]
        n = min(pts[name].shape[0] for name in pts)
        index = pts["index"][:n]
        keep = np.flatnonzero(index >= 0)
        _, first = np.unique(index[keep], return_index=True)
        rows = keep[first]
        return StoredPoints(index[rows], pts["params"][:n][rows],
                            pts["valid"][:n][rows].astype(bool),
                            [b.decode("utf-8", "replace") for b in pts["reason"][:n][rows]],
                            _columns(pts["scalars"][:n][rows], len(SCALARS)),
                            pts["shape"][:n][rows])


def _columns(scalars: np.ndarray, count: int) -> np.ndarray:
    """``scalars`` with ``count`` columns: a store made before ``ln_wall_width`` existed
    (six columns) reads that column as NaN and keeps six when appended to."""
    if scalars.shape[1] >= count:
        return scalars[:, :count]
    pad = np.full((len(scalars), count - scalars.shape[1]), np.nan)
    return np.hstack([scalars, pad])


def read_shape_x(path: str | Path) -> np.ndarray:
    """The shape grid ln(k/k_peak) of a store."""
    with h5py.File(path, "r", libver="latest", swmr=True) as handle:
        return handle["shape_x"][()]
