"""The run file ``<output_dir>/<name>/chain.h5``: it is the state of a posterior run.

Layout (every dataset has a ``units`` attribute):

* root attributes — provenance (:func:`scan.store.provenance`: versions, git hash, config
  hash, seed), ``run_name``, and ``curve_files``/``curve_sha256`` (the curve files read,
  :mod:`scan.store.identity`); dataset ``config`` — the TOML text with its overrides;
* group ``mcmc`` — emcee's HDF5 backend: ``chain``, ``log_prob``, ``blobs`` (a compound
  dtype with the named derived quantities and ``reason``), ``accepted``, the iteration and
  the sampler's random state (attributes ``random_state_0..4``);
* group ``sampler`` — ours: parameter names and labels, reason names and
  ``reason_counts`` (every evaluation, accepted or not), the τ history (``tau_steps``,
  ``tau_history``), the latest ``tau``, ``burn_in``, ``thin``, ``status``, ``initial``,
  and, when a ``width_prior`` is mapped onto a wall coordinate, ``width_prior_*``
  attributes saying which prior, which map and that its Jacobian was applied; ``moves``
  (``sampler.moves``) and ``moves_detail`` (the emcee moves and their weights).

:class:`ChainBackend` buffers ``write_every`` steps in memory and writes them, together
with the ``sampler`` group, in one open of the file; a SIGKILL loses at most the steps
since the last write.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import h5py
import numpy as np
from emcee.backends import HDFBackend

from scan import store
from scan.config.priors import width_prior_attributes
from scan.config.schema import RunConfig
from scan.errors import InputFileError
from scan.observables.settings import gw_convention_attrs, pbh_convention_attrs
from scan.sampler.moves import describe as describe_moves

GROUP = "mcmc"
EXTRA = "sampler"
#: Root attribute: the emulator digest of the surrogate the chain samples on.
SURROGATE_ATTR = "surrogate_sha256"


class ChainBackend(HDFBackend):
    """emcee's HDF5 backend, writing ``write_every`` steps at a time.

    Parameters
    ----------
    filename : str or Path
        The run file.
    write_every : int
        Steps kept in memory between writes.
    on_flush : callable, optional
        ``on_flush(handle)`` is called with the open file after each write (to store the
        ``sampler`` group consistently with the chain).
    """

    def __init__(self, filename: str | Path, write_every: int = 1,
                 on_flush: Callable[[h5py.File], None] | None = None) -> None:
        super().__init__(str(filename), name=GROUP)
        self.write_every = max(1, int(write_every))
        self.on_flush = on_flush
        self._pending: list[tuple[Any, ...]] = []
        self._accepted: np.ndarray | None = None

    def accepted_so_far(self) -> np.ndarray:
        """Accepted proposals per walker, including the steps not yet written."""
        if self._accepted is None:
            self._accepted = np.asarray(self.accepted, dtype=np.int64).copy()
        return self._accepted

    @property
    def pending(self) -> int:
        """Steps held in memory, not yet in the file."""
        return len(self._pending)

    def save_step(self, state: Any, accepted: np.ndarray) -> None:
        """Keep one step; write when ``write_every`` steps are held."""
        self.accepted_so_far()  # read the stored count before adding to it
        self._accepted += np.asarray(accepted, dtype=np.int64)
        blobs = None if state.blobs is None else np.array(state.blobs, copy=True)
        self._pending.append((np.array(state.coords, copy=True),
                              np.array(state.log_prob, copy=True), blobs,
                              np.asarray(accepted, dtype=bool).copy(), state.random_state))
        if len(self._pending) >= self.write_every:
            self.flush()

    def flush(self) -> None:
        """Write the held steps, the random state and the ``sampler`` group."""
        if not self._pending and self.on_flush is None:
            return
        with self.open("a") as handle:
            group = handle[self.name]
            self._require_space(group)
            if self._pending:
                self._write_steps(group)
            if self.on_flush is not None:
                self.on_flush(handle)
        self._pending.clear()

    def _require_space(self, group: h5py.Group) -> None:
        """Stop before a write the disk cannot take (nothing is written, the file stays
        as it was: readable, and resumable from its last completed step)."""
        rows = [group[name] for name in ("chain", "log_prob", "blobs") if name in group]
        done = int(group.attrs["iteration"])
        store.require_space(self.filename, store.append_bytes(rows, done, len(self._pending)),
                            f"it keeps the {done} steps written before; free some space "
                            "and run the same command again to resume")

    def _write_steps(self, group: h5py.Group) -> None:
        start = int(group.attrs["iteration"])
        n = len(self._pending)
        stop = start + n
        if group["chain"].shape[0] < stop:
            for name in ("chain", "log_prob") + (("blobs",) if "blobs" in group else ()):
                group[name].resize(stop, axis=0)
        group["chain"][start:stop] = np.stack([p[0] for p in self._pending])
        group["log_prob"][start:stop] = np.stack([p[1] for p in self._pending])
        if self._pending[0][2] is not None:
            group["blobs"][start:stop] = np.stack([p[2] for p in self._pending])
        group["accepted"][:] += np.sum([p[3] for p in self._pending], axis=0)
        for i, value in enumerate(self._pending[-1][4]):
            group.attrs[f"random_state_{i}"] = value
        group.attrs["iteration"] = stop


@dataclasses.dataclass
class Extras:
    """The ``sampler`` group's mutable contents during a run."""

    names: tuple[str, ...]
    labels: tuple[str, ...]
    reasons: tuple[str, ...]
    counts: np.ndarray
    tau_steps: list[int] = dataclasses.field(default_factory=list)
    tau_history: list[np.ndarray] = dataclasses.field(default_factory=list)
    tau: np.ndarray | None = None
    status: str = "running"
    burn_in: int = -1
    thin: int = -1

    def write(self, handle: h5py.File) -> None:
        """Store into ``handle[EXTRA]`` (replacing what was there)."""
        group = handle.require_group(EXTRA)
        dim = len(self.names)
        store.write_attrs(group, {"parameter_names": list(self.names),
                                  "parameter_labels": list(self.labels),
                                  "reason_names": list(self.reasons), "status": self.status,
                                  "burn_in": self.burn_in, "thin": self.thin})
        store.write_dataset(group, "reason_counts", self.counts, "1",
                            "evaluations per reason code (accepted or not)")
        store.write_dataset(group, "tau_steps", np.asarray(self.tau_steps, dtype=np.int64),
                            "steps", "chain length at each autocorrelation check")
        history = np.reshape(np.asarray(self.tau_history, dtype=float), (-1, dim))
        store.write_dataset(group, "tau_history", history, "steps",
                            "integrated autocorrelation time per parameter at each check")
        tau = np.full(dim, np.nan) if self.tau is None else self.tau
        store.write_dataset(group, "tau", tau, "steps", "latest autocorrelation estimate")

    def with_reasons(self, reasons: tuple[str, ...]) -> Extras:
        """These extras with the counts keyed by ``reasons`` (a chain written with another
        reason table resumes: counts follow the names; a new reason starts at 0)."""
        by_name = dict(zip(self.reasons, self.counts))
        counts = np.array([by_name.get(name, 0) for name in reasons], dtype=np.int64)
        return dataclasses.replace(self, reasons=tuple(reasons), counts=counts)

    @classmethod
    def read(cls, handle: h5py.File) -> Extras:
        """Load from ``handle[EXTRA]``."""
        group = handle[EXTRA]
        tau = group["tau"][...]
        return cls(names=tuple(str(v) for v in group.attrs["parameter_names"]),
                   labels=tuple(str(v) for v in group.attrs["parameter_labels"]),
                   reasons=tuple(str(v) for v in group.attrs["reason_names"]),
                   counts=group["reason_counts"][...].astype(np.int64),
                   tau_steps=[int(v) for v in group["tau_steps"][...]],
                   tau_history=list(group["tau_history"][...]),
                   tau=None if np.all(np.isnan(tau)) else tau,
                   status=str(group.attrs["status"]), burn_in=int(group.attrs["burn_in"]),
                   thin=int(group.attrs["thin"]))


def chain_path(run: str | Path) -> Path:
    """The chain file of a run folder (or the file itself); InputFileError if absent."""
    path = store.RunFolder(run).chain if Path(run).is_dir() else Path(run)
    if not path.is_file():
        raise InputFileError(str(path), "no such chain file (give a run folder made by "
                             "'zetascan sample CONFIG', or its chain.h5)")
    return path


#: Root attributes of a chain recording the PBH non-Gaussianity and QCD-era conventions.
CONVENTION_ATTRS: tuple[str, ...] = ("non_gaussianity", "f_nl", "g_nl", "log_lambda",
                                     "model_map", "qcd_threshold", "qcd_collapse", "qcd_notes")


def pbh_convention(path: str | Path) -> dict[str, Any]:
    """The chain's recorded non-Gaussianity and QCD-era conventions (those written
    before they were recorded are absent)."""
    with h5py.File(path, "r") as handle:
        return {key: (str(v) if isinstance(v, (str, bytes)) else float(v))
                for key in CONVENTION_ATTRS if (v := handle.attrs.get(key)) is not None}


def gw_convention(path: str | Path) -> dict[str, str]:
    """The chain's recorded induced-GW kernel (``sigw_kernel``; chains written before it
    was recorded used the radiation kernel)."""
    with h5py.File(path, "r") as handle:
        return {"sigw_kernel": str(handle.attrs.get("sigw_kernel", "radiation"))}


def create(path: Path, config: RunConfig, extras: Extras, initial: np.ndarray,
           curves: Mapping[str, str] | None = None, surrogate: str | None = None) -> None:
    """Write a new run file (atomically): provenance, config, the digests of the curve
    files read (:mod:`scan.store.identity`) and of the surrogate's emulator
    (``surrogate_sha256``, :func:`scan.surrogate.emulator_digest`), the ``sampler``
    group."""
    with store.atomic_h5(path) as handle:
        store.write_attrs(handle, store.provenance(config.effective_text, config.run.seed))
        store.write_attrs(handle, store.curve_attrs(curves or {}))
        handle.attrs["run_name"] = config.run.name
        if surrogate is not None:
            handle.attrs[SURROGATE_ATTR] = surrogate
        store.write_attrs(handle, pbh_convention_attrs(config.observables))
        store.write_attrs(handle, gw_convention_attrs(config.observables))
        store.write_config(handle, config.effective_text, config.overrides, config.base_dir)
        extras.write(handle)
        store.write_dataset(handle[EXTRA], "initial", initial, "1",
                            "initial walker positions (parameter units)")
        store.write_attrs(handle[EXTRA], width_prior_attributes(config))
        store.write_attrs(handle[EXTRA], {"moves": config.sampler.moves,
                                          "moves_detail": describe_moves(config.sampler.moves)})


@dataclasses.dataclass(frozen=True)
class Stored:
    """What a run file says about its run."""

    config_text: str
    config_sha256: str
    overrides: tuple[str, ...]
    run_name: str
    iteration: int
    extras: Extras
    curves: dict[str, str] | None = None
    base_dir: str = ""
    surrogate: str | None = None


def read(path: str | Path) -> Stored:
    """Read a run file's config, progress and ``sampler`` group.

    Raises
    ------
    InputFileError
        If the file is not a readable zetascan chain file (e.g. damaged by a kill
        during a write).
    """
    try:
        with h5py.File(path, "r") as handle:
            kind = store.kind_of(handle)
            if kind != "chain" or "config" not in handle or EXTRA not in handle:
                what = f"a {kind} file" if kind not in (None, "chain") else \
                    "no 'config' or 'sampler' group"
                raise InputFileError(str(path), f"not a zetascan chain file ({what}); use "
                                     "--restart to overwrite it")
            config = store.stored_config_of(handle)
            iteration = int(handle[GROUP].attrs["iteration"]) if GROUP in handle else 0
            return Stored(config.text, str(handle.attrs["config_sha256"]), config.overrides,
                          config.run_name, iteration, Extras.read(handle),
                          store.stored_digests(handle.attrs), config.base_dir,
                          _optional_str(handle.attrs.get(SURROGATE_ATTR)))
    except (OSError, KeyError) as err:
        raise InputFileError(str(path), f"cannot read the chain file ({err}); it may have "
                             "been damaged during a write: use --restart") from None


def _optional_str(value) -> str | None:
    return None if value is None else str(value)


def update_config(path: Path, config: RunConfig, previous_sha256: str) -> None:
    """Store a changed-but-compatible config (resume with new max_steps etc.)."""
    with h5py.File(path, "a") as handle:
        store.write_config(handle, config.effective_text, config.overrides, config.base_dir)
        history = [str(v) for v in handle.attrs.get("previous_config_sha256", [])]
        handle.attrs["previous_config_sha256"] = history + [previous_sha256]
        handle.attrs["config_sha256"] = store.config_hash(config.effective_text)


def load_chain(path: str | Path) -> dict[str, Any]:
    """The stored chain (steps, walkers, dim), log_prob, blobs and acceptance counts.

    Raises
    ------
    InputFileError
        The file is not a readable chain file (not HDF5, damaged, or missing the
        ``mcmc`` group or one of its arrays).
    """
    try:
        backend = HDFBackend(str(path), name=GROUP, read_only=True)
        out = {"chain": backend.get_chain(), "log_prob": backend.get_log_prob(),
               "iteration": backend.iteration, "accepted": backend.accepted}
        out["blobs"] = backend.get_blobs() if backend.has_blobs() else None
    except (OSError, KeyError, AttributeError, ValueError, TypeError, IndexError) as err:
        raise InputFileError(str(path), f"not a readable zetascan chain file ({err}); "
                             "give the chain.h5 of a sample run") from None
    if out["chain"].ndim != 3 or out["log_prob"].shape != out["chain"].shape[:2]:
        raise InputFileError(str(path), f"mcmc/chain has shape {out['chain'].shape} and "
                             f"mcmc/log_prob {out['log_prob'].shape}: not a chain file")
    return out
