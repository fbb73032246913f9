"""Reading an exclusion-grid file (``zetascan grid`` → ``<output_dir>/<name>/grid.h5``).

Layout read here: root attributes (provenance) and dataset ``config``; group ``grid``
with attributes ``x_key, y_key, x_label, y_label, x_scale, y_scale, source, profile`` and
datasets ``x`` (nx,), ``y`` (ny,), ``done``, ``valid``, ``P_peak`` (ny, nx) and more; one
group ``grid/terms/<name>`` per constraint with attributes ``kind`` and ``label`` and
dataset ``status`` (ny, nx) int8: −1 not evaluated (invalid model), 0 allowed,
1 excluded or disfavoured, 2 detectable, 3 not detectable (``snr`` for sensitivities,
optional attribute ``snr_threshold``).  The ``units`` of ``x`` and ``y`` complete axis
labels that carry none.
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import h5py
import numpy as np

from scan.errors import InputFileError

#: Status codes of ``grid/terms/<name>/status``.
NOT_EVALUATED, ALLOWED, EXCLUDED, DETECTABLE, NOT_DETECTABLE = -1, 0, 1, 2, 3
#: Term kinds whose status 1 is a region ruled out or disfavoured.
EXCLUDING_KINDS: tuple[str, ...] = ("upper_limit", "pbh", "neff", "prior", "detection")
TERM_KINDS: tuple[str, ...] = EXCLUDING_KINDS + ("sensitivity",)
_AXIS_ATTRS = ("x_key", "y_key", "x_label", "y_label", "x_scale", "y_scale")


@dataclasses.dataclass(frozen=True)
class GridTerm:
    """One constraint's verdict over the grid."""

    name: str
    kind: str
    label: str
    status: np.ndarray
    snr: np.ndarray | None = None
    snr_threshold: float | None = None


@dataclasses.dataclass(frozen=True)
class GridData:
    """What the exclusion map needs from a grid file (arrays are (ny, nx))."""

    path: str
    x: np.ndarray
    y: np.ndarray
    x_key: str
    y_key: str
    x_label: str
    y_label: str
    x_scale: str
    y_scale: str
    done: np.ndarray
    valid: np.ndarray
    P_peak: np.ndarray
    terms: tuple[GridTerm, ...]
    source: str = ""
    x_units: str = ""
    y_units: str = ""


def is_grid_file(handle: h5py.File) -> bool:
    """True if the open file has a ``grid`` group."""
    return "grid" in handle and isinstance(handle["grid"], h5py.Group)


def read_grid(path: str | Path) -> GridData:
    """Read a grid file.

    Raises
    ------
    InputFileError
        The file is not a grid file or lacks a field of the layout above.
    """
    try:
        with h5py.File(path, "r") as handle:
            if not is_grid_file(handle):
                raise InputFileError(str(path), "no 'grid' group: not a zetascan grid file "
                                     "(make one with zetascan grid CONFIG)")
            return _read(str(path), handle["grid"])
    except KeyError as err:
        raise InputFileError(str(path), f"incomplete grid file: missing {err}; was it "
                             "written by an older or unfinished zetascan grid?") from None
    except OSError as err:
        raise InputFileError(str(path), f"cannot open as HDF5 ({err})") from None


def _read(path: str, group: h5py.Group) -> GridData:
    attrs = {name: str(group.attrs[name]) for name in _AXIS_ATTRS}
    x, y = group["x"][()].astype(float), group["y"][()].astype(float)
    shape = (len(y), len(x))
    for name in ("done", "valid", "P_peak"):
        if group[name].shape != shape:
            raise InputFileError(path, f"grid/{name} has shape {group[name].shape}, "
                                 f"expected (ny, nx) = {shape}")
    if min(shape) < 2:
        raise InputFileError(path, f"the grid has {shape[1]} x {shape[0]} points; the "
                             "exclusion map needs at least 2 along each axis")
    for axis in ("x_scale", "y_scale"):
        if attrs[axis] not in ("linear", "log"):
            raise InputFileError(path, f"grid attribute {axis} = '{attrs[axis]}' is not "
                                 "'linear' or 'log'")
    terms = tuple(_term(path, name, sub, shape) for name, sub in group["terms"].items()) \
        if "terms" in group else ()
    return GridData(path, x, y, **attrs, done=group["done"][()].astype(bool),
                    valid=group["valid"][()].astype(bool),
                    P_peak=group["P_peak"][()].astype(float), terms=terms,
                    source=str(group.attrs.get("source", "")),
                    x_units=str(group["x"].attrs.get("units", "")),
                    y_units=str(group["y"].attrs.get("units", "")))


def _term(path: str, name: str, group: h5py.Group, shape: tuple[int, int]) -> GridTerm:
    kind = str(group.attrs["kind"])
    if kind not in TERM_KINDS:
        raise InputFileError(path, f"grid/terms/{name}: kind '{kind}' is not one of "
                             f"{', '.join(TERM_KINDS)}")
    status = group["status"][()].astype(np.int8)
    if status.shape != shape:
        raise InputFileError(path, f"grid/terms/{name}/status has shape {status.shape}, "
                             f"expected {shape}")
    snr = group["snr"][()].astype(float) if "snr" in group else None
    threshold = float(group.attrs["snr_threshold"]) if "snr_threshold" in group.attrs else None
    return GridTerm(name, kind, str(group.attrs.get("label", name)), status, snr, threshold)
