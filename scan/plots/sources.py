"""What ``zetascan plot RESULT`` was given: a solve result, a chain, a grid, or a run folder.

A solve result (``zetascan solve``) has a ``background`` group; a chain file
(``zetascan sample``) the ``mcmc``/``sampler`` groups; a grid file (``zetascan grid``) a
``grid`` group.  A run folder ``<output_dir>/<name>/`` stands for its ``chain.h5`` and
``grid.h5`` (whichever exist).  ``--chain`` adds a chain to a solve or grid result.
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import h5py

from scan.config import load_config_text
from scan.errors import InputFileError
from scan.sampler import runfile

#: Figure kinds, in the order ``all`` makes them.
KINDS: tuple[str, ...] = ("spectrum", "model", "gw", "pbh", "corner", "trace", "bands",
                          "exclusion")


@dataclasses.dataclass(frozen=True)
class Sources:
    """The files one ``zetascan plot`` reads.

    Attributes
    ----------
    name : str
        Prefix of the figure files (the solve file's stem or the run folder's name).
    folder : Path
        Default output folder (where the result lives).
    solve, chain, grid : Path or None
    """

    name: str
    folder: Path
    solve: Path | None = None
    chain: Path | None = None
    grid: Path | None = None


def classify(path: Path) -> str:
    """``"solve"``, ``"chain"`` or ``"grid"`` from the file's groups.

    Raises
    ------
    InputFileError
        Not an HDF5 file, or none of the three layouts.
    """
    try:
        with h5py.File(path, "r") as handle:
            groups = sorted(handle.keys())
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err}); give a result file "
                             "from zetascan solve, sample or grid, or a run folder") from None
    if "grid" in groups:
        return "grid"
    if "sampler" in groups or "mcmc" in groups:
        return "chain"
    if "background" in groups:
        return "solve"
    raise InputFileError(str(path), f"not a zetascan solve, chain or grid file (groups: "
                         f"{', '.join(groups) or 'none'})")


def _existing(path: Path) -> Path:
    if not path.exists():
        raise InputFileError(str(path), "no such file or folder (give a result file from "
                             "zetascan solve, sample or grid, or a run folder)")
    return path


def resolve(result: str | Path, chain: str | Path | None = None) -> Sources:
    """The :class:`Sources` of a RESULT argument and an optional ``--chain``.

    Raises
    ------
    InputFileError
        Missing files, an empty run folder, or ``--chain`` that is not a chain.
    """
    path = _existing(Path(result))
    found: dict[str, Path] = {}
    if path.is_dir():
        for kind in ("chain", "grid"):
            if (path / f"{kind}.h5").is_file():
                found[kind] = path / f"{kind}.h5"
        if not found:
            raise InputFileError(str(path), "the folder holds neither chain.h5 nor grid.h5 "
                                 "(run zetascan sample or zetascan grid first)")
        name, folder = path.name, path
    else:
        found[classify(path)] = path
        name = path.parent.name if path.stem in ("chain", "grid") else path.stem
        folder = path.parent
    if chain is not None:
        extra = Path(chain)
        extra = extra / "chain.h5" if extra.is_dir() else _existing(extra)
        if classify(_existing(extra)) != "chain":
            raise InputFileError(str(extra), "--chain needs a chain file from zetascan sample "
                                 "(or its run folder)")
        if "chain" in found and found["chain"].resolve() != extra.resolve():
            raise InputFileError(str(path), "RESULT already is a chain; --chain adds a chain "
                                 "to a solve or grid result")
        found["chain"] = extra
    return Sources(name=name, folder=folder, **found)


def chain_has_observables(path: Path) -> bool:
    """True if the chain sampled the physics posterior (surrogate observables)."""

    stored = runfile.read(path)
    config = load_config_text(stored.config_text, f"{path} (stored config)",
                              stored.overrides, stored.run_name, stored.base_dir)
    return config.sampler.target == "posterior"


def supported_kinds(sources: Sources) -> tuple[str, ...]:
    """The figure kinds these files can make, in :data:`KINDS` order."""
    kinds: set[str] = set()
    if sources.solve is not None:
        with h5py.File(sources.solve, "r") as handle:
            kinds.add("model")
            if "spectrum" in handle and handle["spectrum/k"].size:
                kinds.add("spectrum")
            kinds.update(k for k, g in (("gw", "gw"), ("pbh", "pbh")) if g in handle)
    if sources.chain is not None:
        kinds.update(("corner", "trace"))
        if chain_has_observables(sources.chain):
            kinds.update(("gw", "pbh", "bands"))
    if sources.grid is not None:
        kinds.add("exclusion")
    return tuple(k for k in KINDS if k in kinds)
