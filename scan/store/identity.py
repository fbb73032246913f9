"""The run identity: the config and the contents of every curve file a run reads.

A resumed run must compute the same likelihood as the run that started the file, so a
run file keeps, beside its config hash, the SHA-256 of each bound-curve and scalar-bound
file it read (root attributes ``curve_files`` and ``curve_sha256``, in the config's
order).  Where the run folder sits is not part of the identity: ``run.output_dir`` and
``run.name`` (:data:`LOCATION_KEYS`) may differ when a moved folder is resumed.
"""
from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from scan.errors import InputFileError

#: Config keys that say where the run folder is, not what it computes.
LOCATION_KEYS: frozenset[str] = frozenset({"run.output_dir", "run.name"})
#: Root attributes of a run file holding the curve identity.
FILES_ATTR, DIGESTS_ATTR = "curve_files", "curve_sha256"


def file_sha256(path: str | Path) -> str:
    """SHA-256 hex digest of a file's bytes.

    Raises
    ------
    InputFileError
        The file cannot be read.
    """
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError as err:
        raise InputFileError(str(path), f"cannot read the file to hash it ({err.strerror})"
                             ) from None


def curve_digests(paths: Sequence[str | Path]) -> dict[str, str]:
    """Curve file (as the config names it) -> SHA-256 of its contents."""
    return {str(path): file_sha256(path) for path in paths}


def curve_attrs(digests: Mapping[str, str]) -> dict[str, Any]:
    """The root attributes that store ``digests`` ("none" for a run without curves)."""
    return {FILES_ATTR: list(digests) or ["none"],
            DIGESTS_ATTR: list(digests.values()) or ["none"]}


def stored_digests(attrs: Mapping[str, Any]) -> dict[str, str] | None:
    """The curve digests of a run file's root attributes (None: a file from before the
    curves were hashed)."""
    if FILES_ATTR not in attrs or DIGESTS_ATTR not in attrs:
        return None
    files = [str(v) for v in attrs[FILES_ATTR]]
    digests = [str(v) for v in attrs[DIGESTS_ATTR]]
    return {} if files == ["none"] else dict(zip(files, digests))


def check_curves(run_file: str | Path, stored: Mapping[str, str] | None,
                 current: Mapping[str, str]) -> None:
    """Refuse to resume a run whose curve files changed since it started.

    Raises
    ------
    InputFileError
        A curve file's contents changed, or one was added or removed (the message names
        it and says how to go on).
    """
    if stored is None or dict(stored) == dict(current):
        return
    fix = ("restore it to continue this run, or pass --restart (or change run.name) to "
           "start a new one")
    for name, digest in current.items():
        if name not in stored:
            raise InputFileError(str(run_file), f"the bound-curve file {name} is read now "
                                 f"but was not when this run started; {fix}")
        if stored[name] != digest:
            raise InputFileError(str(run_file), f"the bound-curve file {name} changed since "
                                 f"this run started (sha256 {stored[name][:12]}... -> "
                                 f"{digest[:12]}...); {fix}")
    gone = next(name for name in stored if name not in current)
    raise InputFileError(str(run_file), f"the bound-curve file {gone} was read when this "
                         f"run started and is not read now; {fix}")
