"""The config a result file was made with, read in one place.

Every result file keeps the TOML text in the dataset ``config`` (attribute
``overrides``: the ``--set`` strings) and the run name in the root attribute
``run_name`` (:func:`scan.store.hdf5.write_config`).  Reading it never imports anything
the config names (plug-ins are only strings here).
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import h5py

from scan.errors import InputFileError


@dataclasses.dataclass(frozen=True)
class StoredConfig:
    """The config a result file was made with: its text, ``--set`` overrides, run name
    and the folder of the config file it was read from."""

    text: str
    overrides: tuple[str, ...]
    run_name: str
    base_dir: str = ""  # the config file's folder: relative input paths resolve against it


def stored_config_of(handle: h5py.File, default_name: str = "run") -> StoredConfig:
    """The :class:`StoredConfig` of an open result file (KeyError if it has none)."""
    raw = handle["config"][()]
    text = raw.decode("utf-8") if isinstance(raw, bytes) else str(raw)
    overrides = tuple(str(v) for v in handle["config"].attrs.get("overrides", [])
                      if str(v) != "none")
    return StoredConfig(text, overrides, str(handle.attrs.get("run_name", default_name)),
                        str(handle["config"].attrs.get("base_dir", "")))


def read_stored_config(path: str | Path) -> StoredConfig:
    """The config stored in a result file (the run name defaults to the file's stem).

    Raises
    ------
    InputFileError
        Not an HDF5 file, or no ``config`` dataset.
    """
    try:
        with h5py.File(path, "r", libver="latest", swmr=True) as handle:
            if "config" not in handle:
                raise InputFileError(str(path), "no 'config' dataset: not a zetascan result file")
            return stored_config_of(handle, Path(path).stem)
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None


def read_config_text(path: str | Path) -> str:
    """The config text stored in a result file (raises InputFileError if absent)."""
    return read_stored_config(path).text
