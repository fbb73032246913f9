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
from typing import Any

import numpy as np

from scan.errors import InputFileError
from scan.grid.store import read_grid

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


def exclusion_data(path: str | Path) -> GridData:
    """Read a grid file (:func:`scan.grid.store.read_grid`) for the exclusion map.

    Raises
    ------
    InputFileError
        The file is not a grid file or lacks a field of the layout above.
    """
    data = read_grid(path)
    try:
        return _record(str(path), data)
    except KeyError as err:
        raise InputFileError(str(path), f"incomplete grid file: missing {err}; was it "
                             "written by an older or unfinished zetascan grid?") from None


def _record(path: str, data: dict[str, Any]) -> GridData:
    attrs = {name: str(data["grid_attrs"][name]) for name in _AXIS_ATTRS}
    x, y = np.asarray(data["x"], float), np.asarray(data["y"], float)
    shape = (len(y), len(x))
    for name in ("done", "valid", "P_peak"):
        if data[name].shape != shape:
            raise InputFileError(path, f"grid/{name} has shape {data[name].shape}, "
                                 f"expected (ny, nx) = {shape}")
    if min(shape) < 2:
        raise InputFileError(path, f"the grid has {shape[1]} x {shape[0]} points; the "
                             "exclusion map needs at least 2 along each axis")
    for axis in ("x_scale", "y_scale"):
        if attrs[axis] not in ("linear", "log"):
            raise InputFileError(path, f"grid attribute {axis} = '{attrs[axis]}' is not "
                                 "'linear' or 'log'")
    terms = tuple(_term(path, name, term, shape) for name, term in data["terms"].items())
    return GridData(path, x, y, **attrs, done=data["done"].astype(bool),
                    valid=data["valid"].astype(bool), P_peak=data["P_peak"].astype(float),
                    terms=terms, source=str(data["grid_attrs"].get("source", "")),
                    x_units=data["units"]["x"], y_units=data["units"]["y"])


def _term(path: str, name: str, term: dict[str, Any], shape: tuple[int, int]) -> GridTerm:
    kind = str(term["attrs"]["kind"])
    if kind not in TERM_KINDS:
        raise InputFileError(path, f"grid/terms/{name}: kind '{kind}' is not one of "
                             f"{', '.join(TERM_KINDS)}")
    status = np.asarray(term["status"]).astype(np.int8)
    if status.shape != shape:
        raise InputFileError(path, f"grid/terms/{name}/status has shape {status.shape}, "
                             f"expected {shape}")
    snr = np.asarray(term["snr"], float) if "snr" in term else None
    threshold = (float(term["attrs"]["snr_threshold"]) if "snr_threshold" in term["attrs"]
                 else None)
    return GridTerm(name, kind, str(term["attrs"].get("label", name)), status, snr, threshold)
