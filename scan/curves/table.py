"""Validate the numeric body of a bound-curve file and convert it to canonical units."""
from __future__ import annotations

import warnings

import numpy as np

from scan.curves import schema as S
from scan.curves.meta import CurveWarning, Meta
from scan.curves.reader import RawFile, numeric_table
from scan.errors import InputFileError

#: Largest |log10| value accepted (beyond it 10**y over- or underflows).
_MAX_LOG10 = 300.0


def check_header(raw: RawFile, kind: str) -> None:
    """The header row must be exactly the columns of ``kind``."""
    want = S.KIND_COLUMNS[kind]
    if raw.columns != want:
        raise InputFileError(raw.path, f"kind '{kind}' needs columns {','.join(want)}; "
                                       f"found {','.join(raw.columns)}", line=raw.header_line)


def read_columns(raw: RawFile, meta: Meta) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Numeric columns by name (x linear in its file unit) and the line numbers."""
    values, lines = numeric_table(raw)
    need = 2
    if len(lines) < need:
        raise InputFileError(raw.path, f"need at least {need} data rows (found {len(lines)})",
                             line=raw.header_line)
    cols = {name: values[:, j] for j, name in enumerate(raw.columns)}
    cols["x"] = _linear_x(raw, meta, cols["x"], lines)
    return cols, lines


def _linear_x(raw: RawFile, meta: Meta, x: np.ndarray, lines: np.ndarray) -> np.ndarray:
    if meta.text.get("x_scale", "linear") == "log10":
        bad = np.flatnonzero(np.abs(x) > _MAX_LOG10)
        if bad.size:
            raise InputFileError(raw.path, f"log10 x = {x[bad[0]]:g} is out of range; is "
                                           "x_scale right?", line=int(lines[bad[0]]), column="x")
        return 10.0**x
    bad = np.flatnonzero(x <= 0)
    if bad.size:
        raise InputFileError(raw.path, f"x must be > 0 for log interpolation (got "
                                       f"{x[bad[0]]:g}); if x is log10, add '#: x_scale = "
                                       "log10'", line=int(lines[bad[0]]), column="x")
    return x


def check_increasing(path: str, x: np.ndarray, lines: np.ndarray) -> None:
    """x strictly increasing, else an error naming both lines."""
    bad = np.flatnonzero(np.diff(x) <= 0)
    if bad.size:
        i = bad[0]
        raise InputFileError(path, f"x = {x[i + 1]:g} not above previous {x[i]:g} (line "
                                   f"{lines[i]}); sort or split the curve",
                             line=int(lines[i + 1]), column="x")


def check_y_scale(path: str, meta: Meta, y: np.ndarray, lines: np.ndarray,
                  column: str = "y") -> None:
    """Catch log10/linear mix-ups and values the declared scale cannot hold."""
    scale = meta.text["y_scale"]
    if scale == "log10":
        if np.all((y > 0) & (y < 1e-3)):
            raise InputFileError(path, "y_scale = log10 but every value is in (0, 1e-3): the "
                                       "values look linear; check y_scale", line=int(lines[0]),
                                 column=column)
        bad = np.flatnonzero(np.abs(y) > _MAX_LOG10)
        if bad.size:
            raise InputFileError(path, f"log10 value {y[bad[0]]:g} is out of range; check "
                                       "y_scale", line=int(lines[bad[0]]), column=column)
        return
    if np.all(y <= 0):
        raise InputFileError(path, "y_scale = linear but every value is <= 0: the values "
                                   "look log10; check y_scale", line=int(lines[0]),
                             column=column)
    bad = np.flatnonzero(y <= 0)
    if bad.size:
        raise InputFileError(path, f"y must be > 0 when y_scale = linear (got {y[bad[0]]:g})",
                             line=int(lines[bad[0]]), column=column)


def to_canonical(meta: Meta, y: np.ndarray, f_hz: np.ndarray) -> np.ndarray:
    """y in the file's quantity and scale -> linear Omega_GW h^2 or f_PBH."""
    lin = 10.0**y if meta.text["y_scale"] == "log10" else y
    t_obs = S.years_to_s(meta.numbers["t_obs_yr"]) if "t_obs_yr" in meta.numbers else None
    with np.errstate(over="ignore", under="ignore"):
        return S.y_to_omega_h2(meta.text["y_quantity"], lin, f_hz,
                               meta.numbers.get("hubble_h"), t_obs)


def check_detection(path: str, meta: Meta, cols: dict[str, np.ndarray],
                    lines: np.ndarray) -> None:
    """y_lo <= y <= y_hi with y_lo < y_hi on every row."""
    lo, y, hi = cols["y_lo"], cols["y"], cols["y_hi"]
    for name in ("y_lo", "y_hi"):
        check_y_scale(path, meta, cols[name], lines, column=name)
    bad = np.flatnonzero(~((lo <= y) & (y <= hi) & (lo < hi)))
    if bad.size:
        i = bad[0]
        raise InputFileError(path, f"need y_lo <= y <= y_hi with y_lo < y_hi (got y = "
                                   f"{y[i]:g}, y_lo = {lo[i]:g}, y_hi = {hi[i]:g}); y_lo/y_hi "
                                   "are the interval bounds, not error bars",
                             line=int(lines[i]))


def warn_suspicious(path: str, meta: Meta, y_canon: np.ndarray, lines: np.ndarray) -> None:
    """Warnings for legal but odd values (f_PBH limit > 1, Omega h^2 > 1)."""
    if meta.text["y_quantity"] == "f_pbh":
        above = np.flatnonzero(y_canon > 1.0)
        if above.size:
            warnings.warn(f"{path}: line {lines[above[0]]}: f_pbh upper limit > 1 means no "
                          "constraint there", CurveWarning, stacklevel=4)
    elif np.any(y_canon > 1.0):
        i = int(np.flatnonzero(y_canon > 1.0)[0])
        warnings.warn(f"{path}: line {lines[i]}: Omega_GW h^2 = {y_canon[i]:.3g} exceeds the "
                      "critical density; check y_scale and units", CurveWarning, stacklevel=4)


def posterior_blocks(path: str, x: np.ndarray, y: np.ndarray, density: np.ndarray,
                     lines: np.ndarray) -> list[slice]:
    """Slices of rows belonging to one frequency bin, with the per-bin rules checked."""
    starts = np.concatenate(([0], np.flatnonzero(np.diff(x) != 0) + 1, [len(x)]))
    blocks = [slice(int(a), int(b)) for a, b in zip(starts[:-1], starts[1:])]
    for k, block in enumerate(blocks):
        first = int(lines[block.start])
        if k and x[block.start] <= x[blocks[k - 1].start]:
            raise InputFileError(path, f"bin x = {x[block.start]:g} not above the previous bin "
                                       f"x = {x[blocks[k - 1].start]:g}; keep the rows of one "
                                       "bin together, bins in increasing x", line=first,
                                 column="x")
        if block.stop - block.start < 2:
            raise InputFileError(path, f"bin x = {x[block.start]:g} has 1 row; a density grid "
                                       "needs at least 2 y values per bin", line=first)
        check_increasing_y(path, y[block], lines[block])
        d = density[block]
        neg = np.flatnonzero(d < 0)
        if neg.size:
            raise InputFileError(path, f"density must be >= 0 (got {d[neg[0]]:g})",
                                 line=int(lines[block][neg[0]]), column="density")
        if not np.any(d > 0):
            raise InputFileError(path, f"bin x = {x[block.start]:g} has zero density "
                                       "everywhere", line=first, column="density")
    return blocks


def check_increasing_y(path: str, y: np.ndarray, lines: np.ndarray) -> None:
    """Grid values strictly increasing within a bin."""
    bad = np.flatnonzero(np.diff(y) <= 0)
    if bad.size:
        i = bad[0]
        raise InputFileError(path, f"y = {y[i + 1]:g} not above previous {y[i]:g} within one "
                                   "bin; sort each bin's grid by y", line=int(lines[i + 1]),
                             column="y")
