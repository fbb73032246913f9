"""Partial results of ``zetascan verify``: every exact solve kept on disk as it finishes.

Where
-----
A side file next to the chain, ``<chain stem>.verify_partial.h5`` (``chain.h5`` ->
``chain.verify_partial.h5``), group ``verify_partial``; it is deleted once the final
``verify`` group of the chain file is written.  Not a group of the chain file, because:

* the chain file holds the whole sampling run and is written by emcee's backend without
  SWMR; appending a point every few seconds to it would expose the chain itself to a
  SIGKILL in the middle of an HDF5 write, while a damaged side file loses at most the
  partial results;
* appending crash-safely needs SWMR mode (``libver="latest"``, "open for writing" flags
  that :func:`scan.store.recover_store` clears by copying the whole file): that would
  change the chain file's format and make a recovery rewrite the chain;
* HDF5 does not give back the space of a deleted group, so a partial group would grow
  the chain file with every verification; a side file is simply removed.

Layout (every dataset has a ``units`` attribute)
------------------------------------------------
Root attributes: provenance (:func:`scan.store.provenance`) and ``kind``.  Group
``verify_partial``: the draw as attributes (:class:`Draw`: ``samples``, ``seed``,
``burn_in``, ``thin``, ``available``, ``indices``, ``config_sha256``, ``chain_sha256``
and ``exact_solver``), and one row per finished solve, in the order they finished:

* ``index`` — the key: the sample's index into the flattened samples after burn-in and
  thinning (written last; fill value -1);
* ``theta`` (rows, dim), ``valid`` (int8), ``scalars`` (rows, 7; columns :data:`SCALARS`);
* ``array_start``, ``array_length`` (rows, 4; columns :data:`ARRAYS`) into ``arrays``: the
  four arrays of each outcome's observables, concatenated into one growing float64 set;
* ``text_start``, ``text_length`` into ``text`` (uint8): each outcome's reason and notes
  as UTF-8 JSON (``{"reason": ..., "notes": [...]}``), never truncated.

Crash safety is that of the training store (:mod:`scan.surrogate.store`): fixed-size
types only, every dataset created before the file is put in SWMR mode, a flush after the
row's values and another after its ``index``, so a SIGKILL loses at most the solves in
flight and a torn row (``index`` still -1, or rows beyond it) is ignored and overwritten.
Only the master process writes; the lock file and the recovery of a file left flagged by
a killed writer are :func:`scan.store.open_single_writer`'s.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan.errors import InputFileError
from scan.observables import Observables
from scan.posterior.exact import ExactOutcome
from scan.store import (KIND_ATTRS, SingleWriter, append_bytes, config_hash, provenance,
                        put_rows, require_space, write_attrs)

GROUP = "verify_partial"
KIND = KIND_ATTRS["verify_partial"]
#: Scalar fields of :class:`~scan.observables.Observables` (columns of ``scalars``).
SCALARS: tuple[str, ...] = ("f_pbh_total", "n_s", "r", "N_star", "ln_1e10_as", "k_peak",
                            "P_peak", "f_gw_peak", "omega_gw_h2_peak")
#: Array fields (columns of ``array_length``) and their units.
ARRAYS: dict[str, str] = {"f_hz": "Hz", "omega_gw_h2": "1", "m_msun": "M_sun",
                          "f_pbh_per_lnm": "1"}
#: Fields not stored: the PBH conventions follow from the run's stored config, the notes
#: are kept in the text column, and an exact solve's masses are never shifted; the
#: non-Gaussian map and the Gaussian comparison total are not (yet) part of the
#: verification (issue 15 step 4); the QCD-era conventions follow from the stored config
#: (both sides compute with them: the exact side per spectrum, the surrogate side with the
#: threshold plan's per-epoch thresholds and exponents); the GW kernel likewise (verify takes the
#: radiation kernel only: the tabulated QCD-era kernel is refused on the sampler path).
NOT_STORED: tuple[str, ...] = ("conventions", "notes", "ln_mass_shift", "zeta_map",
                               "f_pbh_total_gaussian", "qcd", "sigw_kernel")
BUSY = ("another 'zetascan verify' of this chain is running (it holds these partial "
        "results); wait for it or stop it first")
Log = Callable[[str], None]


@dataclasses.dataclass(frozen=True)
class Draw:
    """What the partial results are of: resuming requires every field to be equal.

    Attributes
    ----------
    samples, seed, burn_in, thin, available : int
        M, ``run.seed``, the chain's burn-in and thinning [steps], the samples after them.
    indices : tuple of int
        The drawn indices (:func:`scan.verify.compare.draw_indices`).
    config_sha256 : str
        Of the run's stored config (what every exact solve used).
    chain_sha256 : str
        Of the samples after burn-in and thinning (changes when the chain is extended).
    exact_solver : str
        The exact side's ``describe()`` (outcomes of two solvers are not mixed).
    """

    samples: int
    seed: int
    burn_in: int
    thin: int
    available: int
    indices: tuple[int, ...]
    config_sha256: str
    chain_sha256: str
    exact_solver: str

    @classmethod
    def from_attrs(cls, attrs: Any) -> "Draw":
        """Read back from the group's attributes."""
        return cls(*(int(attrs[k]) for k in ("samples", "seed", "burn_in", "thin",
                                             "available")),
                   tuple(int(i) for i in np.atleast_1d(attrs["indices"])),
                   *(str(attrs[k]) for k in ("config_sha256", "chain_sha256",
                                             "exact_solver")))

    def differences(self, requested: "Draw") -> list[str]:
        """What differs, as ``"name: stored -> requested"`` lines (empty: resumable)."""
        out = [f"{name}: {getattr(self, key)} -> {getattr(requested, key)}"
               for key, name in (("samples", "samples"), ("seed", "seed (run.seed)"),
                                 ("burn_in", "burn-in"), ("thin", "thin"),
                                 ("available", "samples after burn-in and thinning"))
               if getattr(self, key) != getattr(requested, key)]
        if self.chain_sha256 != requested.chain_sha256:
            out.append("the chain's samples changed since (was it sampled further?)")
        if self.config_sha256 != requested.config_sha256:
            out.append("the run's stored config changed since")
        if self.exact_solver != requested.exact_solver:
            out.append(f"exact solver: '{self.exact_solver}' -> '{requested.exact_solver}'")
        if not out and self.indices != requested.indices:
            out.append("the drawn indices differ (another numpy random generator?)")
        return out


def draw_of(run: Any, index: np.ndarray, exact_solver: str) -> Draw:
    """The :class:`Draw` of ``index`` from a :class:`scan.verify.run.Run`."""
    samples = np.ascontiguousarray(run.samples, dtype=np.float64)
    return Draw(len(index), int(run.config.run.seed), int(run.burn_in), int(run.thin),
                len(samples), tuple(int(i) for i in index),
                config_hash(run.config.effective_text),
                hashlib.sha256(samples.tobytes()).hexdigest(), exact_solver)


def partial_path(chain: str | Path) -> Path:
    """``<folder>/<chain stem>.verify_partial.h5`` next to the chain file."""
    chain = Path(chain)
    return chain.with_name(f"{chain.stem}.verify_partial.h5")


# ----------------------------------------------------------------------- encoding
def _check_fields(cls: type) -> None:
    names = {f.name for f in dataclasses.fields(cls)}
    if names != set(SCALARS) | set(ARRAYS) | set(NOT_STORED):
        raise RuntimeError(f"{cls.__name__} fields {sorted(names)} are not the stored "
                           f"{sorted(SCALARS + tuple(ARRAYS))} and the derived "
                           f"{sorted(NOT_STORED)}: update scan.verify.partial")


def _encode(outcome: ExactOutcome) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, bytes]:
    """``(valid, scalars, array lengths, concatenated arrays, text)`` of one outcome."""
    text = json.dumps({"reason": str(outcome.reason), "notes": list(outcome.notes)},
                      ensure_ascii=False).encode("utf-8")
    obs = outcome.observables
    if obs is None:
        return 0, np.full(len(SCALARS), np.nan), np.zeros(len(ARRAYS), np.int64), \
            np.zeros(0), text
    _check_fields(type(obs))
    arrays = [np.asarray(getattr(obs, name), np.float64).ravel() for name in ARRAYS]
    return 1, np.array([getattr(obs, name) for name in SCALARS], np.float64), \
        np.array([len(a) for a in arrays], np.int64), np.concatenate(arrays), text


def _decode(rows: dict[str, np.ndarray], arrays: np.ndarray, text: np.ndarray,
            row: int) -> ExactOutcome:
    t0 = int(rows["text_start"][row])
    meta = json.loads(text[t0:t0 + int(rows["text_length"][row])].tobytes().decode("utf-8"))
    reason, notes = meta["reason"], tuple(meta["notes"])
    if not rows["valid"][row]:
        return ExactOutcome(None, reason, notes)
    _check_fields(Observables)
    bounds = int(rows["array_start"][row]) + np.concatenate(
        [[0], np.cumsum(rows["array_length"][row])])
    fields: dict[str, Any] = {name: arrays[bounds[k]:bounds[k + 1]].copy()
                              for k, name in enumerate(ARRAYS)}
    fields.update({name: float(v) for name, v in zip(SCALARS, rows["scalars"][row])})
    return ExactOutcome(Observables(**fields, notes=notes), reason, notes)


# ----------------------------------------------------------------------- the file
def _growing(group: h5py.Group, name: str, shape: tuple[int, ...], dtype: Any, units: str,
             description: str, fill: Any = None, chunk: int = 64) -> h5py.Dataset:
    dset = group.create_dataset(name, shape=(0, *shape), maxshape=(None, *shape),
                                dtype=dtype, chunks=(chunk, *shape), fillvalue=fill)
    write_attrs(dset, {"units": units, "description": description})
    return dset


def create_partial(path: Path, draw: Draw, dim: int, config: Any) -> None:
    """Write empty partial results under a temporary name and rename them into place."""
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        with h5py.File(tmp, "w", libver="latest") as handle:  # SWMR needs "latest"
            write_attrs(handle, provenance(config.effective_text, config.run.seed))
            handle.attrs["kind"] = KIND
            g = handle.create_group(GROUP)
            write_attrs(g, {**dataclasses.asdict(draw),
                            "indices": np.asarray(draw.indices, np.int64)})
            _growing(g, "index", (), "i8", "1", "drawn sample (index into the samples "
                     "after burn-in and thinning); -1: row not complete", fill=-1)
            _growing(g, "theta", (dim,), "f8", "1", "the sample (parameter units)")
            _growing(g, "valid", (), "i1", "1", "the exact model is valid")
            _growing(g, "scalars", (len(SCALARS),), "f8", "see attribute columns",
                     "scalar observables (NaN when invalid)").attrs["columns"] = list(SCALARS)
            _growing(g, "array_start", (), "i8", "1", "first element in 'arrays'")
            _growing(g, "array_length", (len(ARRAYS),), "i8", "1",
                     "elements in 'arrays'").attrs["columns"] = list(ARRAYS)
            _growing(g, "arrays", (), "f8", ", ".join(f"{k} [{u}]" for k, u in ARRAYS.items()),
                     "the observables' arrays, concatenated in the order of the columns",
                     chunk=4096)
            _growing(g, "text_start", (), "i8", "1", "first byte in 'text'")
            _growing(g, "text_length", (), "i8", "1", "bytes in 'text'")
            _growing(g, "text", (), "u1", "1", "UTF-8 JSON {reason, notes} of each outcome",
                     chunk=4096)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


ROWS = ("theta", "valid", "scalars", "array_start", "array_length", "text_start",
        "text_length")


class PartialWriter(SingleWriter):
    """The one writer of a partial-results file (SWMR; use as a context manager).

    Attributes
    ----------
    draw : Draw
        The draw the stored outcomes are of.
    """

    def __init__(self, path: str | Path) -> None:
        super().__init__(path, BUSY, hdf5_locking=False)
        try:
            self.group = self.handle[GROUP]
            self.draw = Draw.from_attrs(self.group.attrs)
        except KeyError:
            self.close()
            raise

    def remove(self) -> None:
        """Close and delete the file and its lock file (after the final ``verify`` group)."""
        if self.handle.id.valid:
            self.handle.close()
        self.path.unlink(missing_ok=True)
        self._lock.release(remove=True)  # still held: nobody else got it

    def rows(self) -> dict[int, int]:
        """Sample index -> row of every complete row (the first, should one repeat)."""
        index = self.group["index"][()]
        keep = np.flatnonzero(index >= 0)
        _, first = np.unique(index[keep], return_index=True)
        return {int(index[r]): int(r) for r in keep[first]}

    def append(self, index: int, theta: np.ndarray, outcome: ExactOutcome) -> None:
        """Store one finished solve: heaps and row values, flush, then ``index``, flush."""
        g = self.group
        row = g["index"].shape[0]  # rows beyond it are torn: overwritten
        valid, scalars, lengths, flat, text = _encode(outcome)
        need = (append_bytes([g[name] for name in (*ROWS, "index")], row, 1)
                + append_bytes([g["arrays"]], g["arrays"].shape[0], len(flat))
                + append_bytes([g["text"]], g["text"].shape[0], len(text)))
        require_space(self.path, need, f"it keeps the {len(self.rows())} samples solved "
                      "before; free some space and rerun with --resume")
        values = {"theta": np.asarray(theta, np.float64), "valid": valid, "scalars": scalars,
                  "array_start": _extend(g["arrays"], flat), "array_length": lengths,
                  "text_start": _extend(g["text"], np.frombuffer(text, np.uint8)),
                  "text_length": len(text)}
        for name in ROWS:
            put_rows(g[name], row, [values[name]])
        self.handle.flush()
        put_rows(g["index"], row, [index])
        self.handle.flush()

    def outcomes(self, indices: Iterable[int]) -> list[ExactOutcome]:
        """The stored outcomes of ``indices``, in that order."""
        g, where = self.group, self.rows()
        rows = {name: g[name][()] for name in ROWS}
        arrays, text = g["arrays"][()], g["text"][()]
        missing = [i for i in indices if int(i) not in where]
        if missing:
            raise RuntimeError(f"{self.path}: no stored outcome of samples {missing[:5]}")
        return [_decode(rows, arrays, text, where[int(i)]) for i in indices]


def _extend(dset: h5py.Dataset, values: np.ndarray) -> int:
    """Append ``values`` to a 1-D growing dataset; return where they start."""
    start = dset.shape[0]
    if len(values):
        put_rows(dset, start, values)
    return start


# ----------------------------------------------------------------------- start / resume
def open_partial(chain: str | Path, draw: Draw, dim: int, config: Any, resume: bool,
                 log: Log | None = None) -> PartialWriter:
    """The writer of the chain's partial results: continued (``resume``) or fresh.

    Parameters
    ----------
    chain : str or Path
        The chain file.
    draw : Draw
        The requested draw.
    dim : int
        Parameters per sample.
    config : RunConfig
        The run's config (provenance of a new file).
    resume : bool
        Continue existing partial results of the same draw; otherwise they are discarded
        (one log line says so).
    log : callable, optional
        ``log(line)`` for what happened to earlier partial results.

    Raises
    ------
    InputFileError
        ``resume`` of partial results of another draw (the message lists what differs),
        unreadable partial results, or another verification holding them.
    """
    path, say = partial_path(chain), log or (lambda _line: None)
    if path.exists() and resume:
        writer = _open_existing(path)
        try:
            _check_draw(path, writer.draw, draw)
        except BaseException:
            writer.close()
            raise
        say(f"resuming {path}: {len(writer.rows())} of {draw.samples} samples already "
            "solved")
        return writer
    if path.exists():
        say(f"discarded {path} ({discard(path)}); pass --resume to continue partial "
            "results instead")
    elif resume:
        say(f"nothing to resume ({path} does not exist): starting a fresh verification")
    create_partial(path, draw, dim, config)
    return PartialWriter(path)


def _open_existing(path: Path) -> PartialWriter:
    try:
        return PartialWriter(path)
    except (OSError, KeyError) as err:
        raise InputFileError(str(path), f"cannot read the partial verification ({err}); "
                             "run without --resume to discard it and start over") from None


def _check_draw(path: Path, stored: Draw, requested: Draw) -> None:
    diff = stored.differences(requested)
    if not diff:
        return
    hint = ""
    if len(diff) == 1 and stored.samples != requested.samples:
        hint = f", or pass --samples {stored.samples} to continue them"
    raise InputFileError(str(path), "these partial results are of another draw (stored -> "
                         f"requested: {'; '.join(diff)}); run without --resume to discard "
                         f"them and start over{hint}")


def discard(path: Path) -> str:
    """Delete earlier partial results (under their lock); say how much they held."""
    try:
        writer = PartialWriter(path)
    except (OSError, KeyError) as err:
        path.unlink(missing_ok=True)
        return f"unreadable: {err}"
    held = f"{len(writer.rows())} of {writer.draw.samples} samples solved"
    writer.remove()
    return held
