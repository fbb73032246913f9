"""The one table of zetascan file kinds: what a file is, asked in one place.

Each kind has one reader/writer module (named in :data:`KINDS`) and a marker here: the
root ``kind`` attribute its writer sets, else the group its layout is known by (files
written before the attribute existed).  ``plot``, ``summary`` and every resume call
:func:`identify` or :func:`require` instead of guessing from a file's groups.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable
from pathlib import Path

import h5py

from scan.errors import InputFileError


@dataclasses.dataclass(frozen=True)
class FileKind:
    """One kind of zetascan HDF5 file.

    Attributes
    ----------
    name : str
        Short name (``"chain"``).
    made_by : str
        The command that writes it.
    module : str
        Its one reader/writer module.
    marker : callable
        ``marker(handle) -> bool``: True if an open file is of this kind.
    """

    name: str
    made_by: str
    module: str
    marker: Callable[[h5py.File], bool]


#: The root ``kind`` attribute each writer sets (the files that have one).
KIND_ATTRS: dict[str, str] = {"grid": "zetascan grid", "training": "zetascan training store",
                              "surrogate": "zetascan surrogate",
                              "verify_partial": "zetascan verify partial results"}


def _attr_or_group(kind: str, group: str | None) -> Callable[[h5py.File], bool]:
    def marker(handle: h5py.File) -> bool:
        stated = handle.attrs.get("kind")
        if stated is not None:
            return str(stated) == kind
        return group is not None and isinstance(handle.get(group), h5py.Group)
    return marker


def _chain(handle: h5py.File) -> bool:
    return "kind" not in handle.attrs and ("sampler" in handle or "mcmc" in handle)


def _solve(handle: h5py.File) -> bool:
    return "kind" not in handle.attrs and "background" in handle


def _observables(handle: h5py.File) -> bool:
    return "kind" not in handle.attrs and "input_spectrum" in handle.attrs


#: Every kind, in the order :func:`identify` tries them.
KINDS: tuple[FileKind, ...] = (
    FileKind("grid", "zetascan grid", "scan.grid.store",
             _attr_or_group(KIND_ATTRS["grid"], "grid")),
    FileKind("training", "zetascan train", "scan.surrogate.store",
             _attr_or_group(KIND_ATTRS["training"], None)),
    FileKind("surrogate", "zetascan train", "scan.surrogate.surrogate_file",
             _attr_or_group(KIND_ATTRS["surrogate"], None)),
    FileKind("verify_partial", "zetascan verify", "scan.verify.partial",
             _attr_or_group(KIND_ATTRS["verify_partial"], "verify_partial")),
    FileKind("chain", "zetascan sample", "scan.sampler.runfile", _chain),
    FileKind("solve", "zetascan solve", "scan.pipeline.result_file", _solve),
    FileKind("observables", "zetascan observe", "scan.pipeline.result_file", _observables),
)
BY_NAME: dict[str, FileKind] = {kind.name: kind for kind in KINDS}


def kind_of(handle: h5py.File) -> str | None:
    """The kind of an open file (a name of :data:`KINDS`), or None."""
    return next((kind.name for kind in KINDS if kind.marker(handle)), None)


def _inspect(path: str | Path) -> tuple[str | None, str]:
    """(the kind or None, the file's top-level groups as text)."""
    try:
        with h5py.File(path, "r", libver="latest", swmr=True) as handle:
            return kind_of(handle), ", ".join(sorted(handle)) or "none"
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err}); give a file made "
                             "by zetascan") from None


def _listed(names: tuple[str, ...]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " or " + names[-1]


def identify(path: str | Path) -> str:
    """The kind of a zetascan file (a name of :data:`KINDS`).

    Raises
    ------
    InputFileError
        Not an HDF5 file, or none of the kinds.
    """
    return require(path, *BY_NAME)


def require(path: str | Path, *names: str) -> str:
    """The kind of ``path``, refused unless it is one of ``names``.

    Raises
    ------
    InputFileError
        Not an HDF5 file, no zetascan file, or another kind (the message says what it
        is and which command makes the kinds wanted).
    """
    found, groups = _inspect(path)
    if found is None:
        raise InputFileError(str(path), f"not a zetascan {_listed(names)} file (groups: "
                             f"{groups})")
    if found not in names:
        made = _listed(tuple(dict.fromkeys(BY_NAME[n].made_by for n in names)))
        raise InputFileError(str(path), f"this is a {found} file (made by "
                             f"{BY_NAME[found].made_by}), not a {_listed(names)} file "
                             f"(made by {made})")
    return found
