"""HDF5 result files: layout helpers, provenance, config hash, atomic writes.

One file per run.  Root attributes hold provenance (package and dependency versions,
git hash, UTC time, config hash, seed); the dataset ``config`` holds the TOML text;
each pipeline stage writes its own group.  Every dataset carries a ``units`` attribute
("1" for dimensionless numbers).

New files are written under a temporary name in the same folder and renamed into place,
so a crash never leaves a half-written result under the final name.  Files that grow
during a run (chain, training store, grid) check the free space before each write
(:func:`require_space`): HDF5 cut short by a full disk leaves a file it cannot read back,
so the run stops cleanly before that, keeping everything written so far readable.
"""
from __future__ import annotations

import contextlib
import datetime as _dt
import errno
import hashlib
import math
import os
import subprocess
from collections.abc import Iterable, Iterator, Mapping
from importlib import metadata
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan.constants import M_PLANCK_REDUCED_GEV, ZETASCAN_VERSION as __version__  # noqa: I001
from scan.errors import OutputError
from scan.store.lock import RunLock

#: ``units`` in reduced Planck units as a scaled GeV unit astropy reads ("M_p" would read
#: as the proton mass); e-folds are dimensionless.
UNITS_M_P, UNITS_M_P4 = f"{M_PLANCK_REDUCED_GEV:.6e} GeV", f"{M_PLANCK_REDUCED_GEV**4:.6e} GeV4"
UNITS_EFOLDS: str = "1"

#: Distributions whose versions go into every result file.
DEPENDENCIES: tuple[str, ...] = ("numpy", "scipy", "h5py", "astropy", "emcee", "matplotlib",
                                 "ultranest")

#: Bytes kept free beyond what a write allocates [B]: HDF5 metadata written with it
#: (object headers, chunk-index nodes, attributes, the free-space and EOF updates).
SPACE_MARGIN = 256 * 1024

#: What a failed write means to the user, by errno.
_WRITE_PROBLEMS = {errno.ENOSPC: "no space left on device", errno.EDQUOT: "disk quota exceeded",
                   errno.EROFS: "read-only file system", errno.EACCES: "permission denied",
                   errno.EPERM: "permission denied", errno.EISDIR: "is a directory",
                   errno.ENOTDIR: "a parent is not a directory"}


def config_hash(text: str) -> str:
    """SHA-256 hex digest of a config text (with its overrides applied)."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def git_hash(path: str | Path | None = None) -> str:
    """The git commit of the source tree the package runs from, or ``"none"``."""
    where = Path(path) if path is not None else Path(__file__).resolve().parent
    try:
        out = subprocess.run(["git", "-C", str(where), "rev-parse", "HEAD"],
                             capture_output=True, text=True, timeout=5, check=False)
    except (OSError, subprocess.SubprocessError):
        return "none"
    return out.stdout.strip() if out.returncode == 0 and out.stdout.strip() else "none"


def provenance(config_text: str = "", seed: int | None = None) -> dict[str, Any]:
    """Root attributes recording how a result was made."""
    attrs: dict[str, Any] = {
        "zetascan_version": __version__,
        "git_hash": git_hash(),
        "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "config_sha256": config_hash(config_text),
        "seed": -1 if seed is None else int(seed),
    }
    for name in DEPENDENCIES:
        try:
            attrs[f"version_{name}"] = metadata.version(name)
        except metadata.PackageNotFoundError:
            attrs[f"version_{name}"] = "absent"
    return attrs


def write_dataset(group: h5py.Group, name: str, data: Any, units: str,
                  description: str = "") -> h5py.Dataset:
    """Create ``group[name]`` with a ``units`` attribute (and an optional description).

    A dataset of the same shape and type is overwritten in place: deleting and creating
    it again would leave its old bytes unused in the file at every rewrite.
    """
    data = np.asarray(data)
    old = group.get(name)
    if isinstance(old, h5py.Dataset) and old.shape == data.shape and old.dtype == data.dtype \
            and old.dtype.kind not in "OSU":
        old[...] = data
        old.attrs["units"] = units
        if description:
            old.attrs["description"] = description
        return old
    if name in group:
        del group[name]
    dset = group.create_dataset(name, data=data)
    dset.attrs["units"] = units
    if description:
        dset.attrs["description"] = description
    return dset


def attach_scale(group: h5py.Group, scale: str, *names: str) -> None:
    """Make ``group[scale]`` the dimension scale (xarray's coordinate) of ``names``."""
    axis = group[scale]
    axis.make_scale(scale)
    for name in names:
        if name in group and group[name].shape[:1] == axis.shape:
            group[name].dims[0].attach_scale(axis)


def write_attrs(obj: h5py.Group | h5py.Dataset, attrs: Mapping[str, Any]) -> None:
    """Set attributes, turning None into "none" and tuples of strings into lists."""
    for key, value in attrs.items():
        if value is None:
            value = "none"
        elif isinstance(value, (tuple, list)) and value and isinstance(value[0], str):
            value = [str(v) for v in value]
        obj.attrs[key] = value


def write_config(handle: h5py.File, config_text: str, overrides: tuple[str, ...] = (),
                 base_dir: str = "") -> None:
    """Store the config text (dataset ``config``), its overrides and ``base_dir``."""
    if "config" in handle:
        del handle["config"]
    dset = handle.create_dataset("config", data=config_text, dtype=h5py.string_dtype())
    dset.attrs["units"] = "1"
    dset.attrs["format"] = "TOML"
    dset.attrs["overrides"] = list(overrides) if overrides else ["none"]
    dset.attrs["base_dir"] = str(base_dir)


def stored_base_dir(handle: h5py.File) -> str:
    """The stored config's ``base_dir`` ("" before it was recorded)."""
    return str(handle["config"].attrs.get("base_dir", ""))


@contextlib.contextmanager
def atomic_h5(path: str | Path, **file_options: Any) -> Iterator[h5py.File]:
    """Open a new HDF5 file for writing under a temporary name; rename on success.

    On an exception (a full disk included) the temporary file is removed and any
    existing file at ``path`` is left untouched.  ``file_options`` go to ``h5py.File``
    (e.g. ``libver="latest"`` for a file later opened in SWMR mode).
    """
    final = Path(path)
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = final.with_name(f".{final.name}.tmp-{os.getpid()}")
    try:
        with h5py.File(tmp, "w", **file_options) as handle:
            yield handle
        os.replace(tmp, final)
    finally:
        if tmp.exists():
            tmp.unlink()


def open_single_writer(path: str | Path, busy: str, hdf5_locking: bool | None = None,
                       lock: RunLock | None = None) -> tuple[RunLock, h5py.File]:
    """Become the one writer of an append-only HDF5 file: lock file, then SWMR mode.

    Parameters
    ----------
    path : str or Path
        An existing HDF5 file.
    busy : str
        The message when another process holds the lock (what is writing, what to do).
    hdf5_locking : bool, optional
        HDF5's own file locking (h5py's ``locking``; default: the library's).
    lock : RunLock, optional
        The file's lock, already held by the caller (a command that holds it for its
        whole run); default: take it here.

    Returns
    -------
    lock, handle
        The held :class:`~scan.store.lock.RunLock` (release it when done) and the file
        open "r+" in SWMR mode;
        a file left flagged by a killed writer is first rewritten (:func:`recover_store`).

    Raises
    ------
    InputFileError
        Another writer holds the lock (the message names its PID).
    """
    own = lock is None
    lock = RunLock(path, busy) if own else lock
    try:
        try:
            handle = h5py.File(path, "r+", libver="latest", locking=hdf5_locking)
        except OSError as err:
            if "h5clear" not in str(err):
                raise
            recover_store(path)
            handle = h5py.File(path, "r+", libver="latest", locking=hdf5_locking)
    except BaseException:
        if own:
            lock.release()
        raise
    handle.swmr_mode = True
    return lock, handle


def put_rows(dset: h5py.Dataset, start: int, rows: Any) -> None:
    """Write ``rows`` (along axis 0) into a growing dataset from row ``start`` on; the
    dataset then ends after them (rows beyond ``start`` that a killed writer left are
    overwritten)."""
    rows = np.asarray(rows)
    dset.resize(start + len(rows), axis=0)
    dset[start:] = rows


class SingleWriter:
    """The one writer of an append-only HDF5 file (:func:`open_single_writer`), as a
    context manager: :meth:`close` flushes and closes the file and releases the lock it
    took (a lock handed in stays with the caller).

    Attributes
    ----------
    path : Path
    handle : h5py.File
        Open "r+" in SWMR mode.
    """

    def __init__(self, path: str | Path, busy: str, hdf5_locking: bool | None = None,
                 lock: RunLock | None = None) -> None:
        self.path = Path(path)
        self._own_lock = lock is None
        self._lock, self.handle = open_single_writer(self.path, busy, hdf5_locking, lock)

    def __enter__(self) -> "SingleWriter":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Flush and close (and release the lock, unless the caller handed it in)."""
        if self.handle.id.valid:
            self.handle.flush()
            self.handle.close()
        if self._own_lock:
            self._lock.release()


def recover_store(path: str | Path) -> None:
    """Rewrite a store left by a killed writer (read in SWMR mode) with clean flags.

    Every object and attribute is copied (dataset layouts, fill values and contents as
    the reader sees them); the copy replaces the original atomically.  Call it only
    while holding the store's lock.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.name}.recover-{os.getpid()}")
    try:
        with h5py.File(path, "r", libver="latest", swmr=True) as src, \
                h5py.File(tmp, "w", libver="latest") as dst:
            for key, value in src.attrs.items():
                dst.attrs[key] = value
            for name in src:
                src.copy(src[name], dst, name=name)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def write_problem(err: OSError) -> str | None:
    """The user-side cause of a failed write (full, read-only, not permitted), else None."""
    return _WRITE_PROBLEMS.get(getattr(err, "errno", None))


def _existing(path: Path) -> Path:
    """``path`` or its nearest existing ancestor (for statvfs of a not-yet-made file)."""
    path = path.absolute()
    while not path.exists() and path != path.parent:
        path = path.parent
    return path


def free_bytes(path: str | Path) -> int:
    """Bytes an unprivileged process may still write on the file system holding ``path``."""
    st = os.statvfs(_existing(Path(path)))
    return int(st.f_bavail) * int(st.f_frsize)


def require_space(path: str | Path, nbytes: int, kept: str) -> None:
    """Refuse a write of about ``nbytes`` [B] to ``path`` that the disk cannot take.

    Raises
    ------
    OutputError
        Fewer than ``nbytes`` + :data:`SPACE_MARGIN` bytes are free; ``kept`` (what is
        on disk and how to go on) ends the message.
    """
    free = free_bytes(path)
    if free < nbytes + SPACE_MARGIN:
        raise OutputError(str(path), f"no space left on device for the next write ({free} "
                          f"bytes free, {nbytes + SPACE_MARGIN} needed)", kept)


def append_bytes(datasets: Iterable[h5py.Dataset], start: int, rows: int) -> int:
    """Bytes [B] that writing rows ``start`` to ``start + rows`` of each chunked dataset
    allocates (rows before ``start`` are written; later rows are not).

    HDF5 allocates a whole chunk when a write first touches it: the new chunk rows are
    those from ceil(start / c) to floor((start + rows - 1) / c), each as wide as the row
    padded to whole chunks.
    """
    total = 0
    for dset in datasets:
        if dset.chunks is None or rows <= 0:
            continue
        c = dset.chunks[0]
        new = (start + rows - 1) // c - math.ceil(start / c) + 1
        padded = math.prod(math.ceil(n / k) * k for n, k in zip(dset.shape[1:], dset.chunks[1:]))
        total += max(new, 0) * c * padded * dset.dtype.itemsize
    return total


def check_writable(folder: str | Path, what: str = "results") -> Path:
    """Make ``folder`` and prove it writable (a probe file written and removed), so that
    a long computation does not end on a full or read-only disk.

    Raises
    ------
    OutputError
        The folder cannot be made or written, or has less than :data:`SPACE_MARGIN` free.
    """
    folder = Path(folder)
    fix = f"choose a writable folder with free space for the {what} (run.output_dir or --out)"
    probe = folder / f".zetascan-probe-{os.getpid()}"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with open(probe, "wb") as handle:
            handle.write(b"\0" * 4096)
            handle.flush()
            os.fsync(handle.fileno())
    except ValueError as err:  # e.g. a NUL character in the name
        raise OutputError(repr(str(folder)), f"not a usable folder name ({err})", fix) from None
    except OSError as err:
        problem = write_problem(err)
        if problem is None:
            raise
        raise OutputError(str(folder), f"cannot write here: {problem}", fix) from None
    finally:
        with contextlib.suppress(OSError, ValueError):
            probe.unlink()
    require_space(folder, 0, fix)
    return folder


def check_output_file(path: str | Path, what: str = "results") -> Path:
    """Check, before a long computation, that ``path`` can be written as a file: not a
    folder, in a writable folder with free space (:func:`check_writable`).

    Raises
    ------
    OutputError
        ``path`` is a folder, or its folder cannot be written.
    """
    path = Path(path)
    if path.is_dir():
        raise OutputError(str(path), "is a folder, not a file",
                          "give a file name, e.g. --out " + str(path / "result.h5"))
    check_writable(path.parent, what)
    return path
