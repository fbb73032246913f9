"""The spectrum table ``zetascan observe`` reads: a user's P_zeta(k) as CSV or HDF5.

CSV: columns ``k`` [Mpc^-1] and ``P_zeta``; ``#`` comments and one header line naming
``k`` and ``P_zeta`` allowed; without a header the first two columns are k, P_zeta.
HDF5: a zetascan result with group ``spectrum`` (datasets ``k``, ``P_zeta``).  The kind
is chosen by content, not by extension; every error names the file and the line.
"""
from __future__ import annotations

from pathlib import Path

import h5py
import numpy as np

from scan.errors import InputFileError

#: Fewest table points accepted.
MIN_POINTS: int = 8


def _parse_row(path: str, number: int, text: str) -> list[float] | None:
    """Numbers of one CSV line, or None if it is not numeric (a header)."""
    fields = [f for f in text.replace(",", " ").split()]
    try:
        return [float(f) for f in fields]
    except ValueError:
        return None


def load_spectrum_csv(path: str) -> tuple[np.ndarray, np.ndarray]:
    """Read and validate a (k [Mpc^-1], P_zeta) CSV table; errors name the line."""
    try:
        lines = Path(path).read_text(encoding="utf-8-sig").splitlines()  # a BOM is no error
    except (OSError, UnicodeDecodeError) as err:
        raise InputFileError(path, f"cannot read ({err})") from None
    cols, rows, lines_of = (0, 1), [], []
    header_seen = False
    for number, line in enumerate(lines, start=1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        values = _parse_row(path, number, text)
        if values is None:
            if header_seen or rows:
                raise InputFileError(path, f"not a number in '{text}'", line=number)
            cols = _header_columns(path, number, text)
            header_seen = True
            continue
        need = max(cols) + 1
        if len(values) < need:
            raise InputFileError(path, f"expected at least {need} columns, found "
                                 f"{len(values)}", line=number)
        rows.append((values[cols[0]], values[cols[1]]))
        lines_of.append(number)
    data = np.array(rows, dtype=float).reshape(-1, 2)
    validate_spectrum(path, data[:, 0], data[:, 1], lines_of)
    return data[:, 0], data[:, 1]


def _header_columns(path: str, number: int, text: str) -> tuple[int, int]:
    """Column indices of ``k`` and ``P_zeta`` in a header line."""
    names = [f.strip().lower() for f in text.replace(",", " ").split()]
    try:
        return names.index("k"), names.index("p_zeta")
    except ValueError:
        raise InputFileError(path, f"header must name columns 'k' and 'P_zeta', "
                             f"found {names}", line=number) from None


def validate_spectrum(path: str, k: np.ndarray, P: np.ndarray,
                      lines: list[int] | None = None) -> None:
    """Finite, positive, strictly increasing k; finite P >= 0; at least MIN_POINTS rows."""
    def where(i: int) -> dict:
        return {"line": lines[i]} if lines else {}

    def entry(i: int) -> str:
        return "" if lines else f" (entry {i})"
    if k.size < MIN_POINTS:
        raise InputFileError(path, f"only {k.size} data points; need at least {MIN_POINTS}")
    for name, arr in (("k", k), ("P_zeta", P)):
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise InputFileError(path, f"{name} is not finite{entry(bad[0])}",
                                 column=name, **where(bad[0]))
    if k[0] <= 0:
        raise InputFileError(path, "k must be positive [Mpc^-1]", column="k", **where(0))
    bad = np.flatnonzero(np.diff(k) <= 0)
    if bad.size:
        raise InputFileError(path, f"k must increase strictly{entry(bad[0] + 1)}",
                             column="k", **where(bad[0] + 1))
    bad = np.flatnonzero(P < 0)
    if bad.size:
        raise InputFileError(path, f"P_zeta is negative{entry(bad[0])}", column="P_zeta",
                             **where(bad[0]))


def load_spectrum_h5(path: str) -> tuple[np.ndarray, np.ndarray]:
    """Read group ``spectrum`` (datasets ``k``, ``P_zeta``) of a zetascan result."""
    try:
        with h5py.File(path, "r") as handle:
            if "spectrum" not in handle:
                raise InputFileError(path, "no group 'spectrum' (with datasets k, P_zeta)")
            group = handle["spectrum"]
            for name in ("k", "P_zeta"):
                if name not in group:
                    raise InputFileError(path, f"group 'spectrum' has no dataset '{name}'",
                                         column=name)
            k, P = np.asarray(group["k"], float).ravel(), np.asarray(group["P_zeta"], float).ravel()
    except OSError as err:
        raise InputFileError(path, f"cannot open as HDF5 ({err})") from None
    if k.shape != P.shape:
        raise InputFileError(path, f"k and P_zeta lengths differ ({k.size} vs {P.size})")
    validate_spectrum(path, k, P)
    return k, P


def load_spectrum(path: str) -> tuple[np.ndarray, np.ndarray]:
    """A spectrum table from CSV or zetascan HDF5 (chosen by content, not extension)."""
    if not Path(path).is_file():
        raise InputFileError(path, "no such file")
    return load_spectrum_h5(path) if h5py.is_hdf5(path) else load_spectrum_csv(path)
