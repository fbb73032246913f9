"""Split a bound-curve file into metadata, header row and data cells (no meaning yet).

Every problem raises :class:`scan.errors.InputFileError` with the 1-based line number.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from scan.errors import InputFileError

_KEY_RE = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_INLINE_COMMENT_RE = re.compile(r"\s+#\s.*$")
#: Largest file we read [bytes]: bound curves are small; anything bigger is a mistake.
MAX_BYTES: int = 20_000_000


@dataclass(frozen=True)
class RawFile:
    """A file cut into pieces.

    Attributes
    ----------
    path : str
        The file name used in messages.
    meta : dict
        key -> (value, line) for every ``#: key = value`` line.
    header : tuple of str
        The original lines up to and including the header row (kept for provenance).
    columns : tuple of str
        Names in the header row.
    header_line : int
        Line number of the header row.
    rows : list of (int, list of str)
        Data rows with their line numbers.
    """

    path: str
    meta: dict[str, tuple[str, int]]
    header: tuple[str, ...]
    columns: tuple[str, ...]
    header_line: int
    rows: list[tuple[int, list[str]]] = field(default_factory=list)


def decode(path: str, data: bytes) -> str:
    """UTF-8 text of ``data`` (a leading byte-order mark is dropped)."""
    if len(data) > MAX_BYTES:
        raise InputFileError(path, f"file is {len(data)} bytes; a bound curve should be far "
                                   f"smaller than {MAX_BYTES} (is this the right file?)")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        line = data[:err.start].count(b"\n") + 1
        raise InputFileError(path, f"byte {data[err.start]:#04x} is not UTF-8 text; save the "
                                   "file as UTF-8", line=line) from None
    if "\x00" in text:
        line = text[:text.index("\x00")].count("\n") + 1
        raise InputFileError(path, "NUL character: this is not a text file", line=line)
    return text.removeprefix("\ufeff")


def _meta_line(path: str, body: str, lineno: int) -> tuple[str, str]:
    """Key and value of the text after ``#:``."""
    if "=" not in body:
        raise InputFileError(path, f"metadata line {body.strip()!r} has no '='; write "
                                   "'#: key = value'", line=lineno)
    key, value = body.split("=", 1)
    key, value = key.strip(), _INLINE_COMMENT_RE.sub("", value).strip()
    if not _KEY_RE.match(key):
        raise InputFileError(path, f"metadata key {key!r} is not a name (letters, digits, "
                                   "'_'); write '#: key = value'", line=lineno)
    return key, value


def split_cells(line: str) -> list[str]:
    """Comma-separated cells, stripped of blanks and of surrounding double quotes."""
    return [c.strip().strip('"').strip() for c in line.split(",")]


def read_raw(path: str, text: str) -> RawFile:
    """Cut ``text`` into metadata, header row and data rows.

    Raises
    ------
    InputFileError
        Malformed metadata lines, duplicate keys, metadata after the header, no header.
    """
    meta: dict[str, tuple[str, int]] = {}
    header: list[str] = []
    columns: tuple[str, ...] | None = None
    header_line = 0
    rows: list[tuple[int, list[str]]] = []
    for lineno, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if stripped.startswith("#:"):
            if columns is not None:
                raise InputFileError(path, "metadata line after the header row; move all "
                                           "'#:' lines to the top", line=lineno)
            key, value = _meta_line(path, stripped[2:], lineno)
            if key in meta:
                raise InputFileError(path, f"key '{key}' given twice (first on line "
                                           f"{meta[key][1]}); keep one", line=lineno)
            meta[key] = (value, lineno)
            header.append(line)
        elif not stripped or stripped.startswith("#"):
            if columns is None:
                header.append(line)
        elif columns is None:
            columns, header_line = tuple(split_cells(stripped)), lineno
            header.append(line)
        else:
            rows.append((lineno, split_cells(stripped)))
    if columns is None:
        raise InputFileError(path, "no header row: after the '#:' metadata lines write the "
                                   "column names, e.g. 'x,y'")
    return RawFile(path, meta, tuple(header), columns, header_line, rows)


def numeric_table(raw: RawFile) -> tuple[np.ndarray, np.ndarray]:
    """The data rows as floats, shape (n_rows, n_columns), and their line numbers.

    Raises
    ------
    InputFileError
        A row with the wrong number of cells, or a cell that is not a finite number.
    """
    ncol = len(raw.columns)
    values = np.empty((len(raw.rows), ncol))
    lines = np.empty(len(raw.rows), dtype=int)
    for i, (lineno, cells) in enumerate(raw.rows):
        if len(cells) != ncol:
            raise InputFileError(raw.path, f"row has {len(cells)} cells but the header "
                                           f"{','.join(raw.columns)} has {ncol}", line=lineno)
        for j, cell in enumerate(cells):
            values[i, j] = _number(raw.path, cell, lineno, raw.columns[j])
        lines[i] = lineno
    return values, lines


def _number(path: str, cell: str, lineno: int, column: str) -> float:
    """A finite float from one cell."""
    try:
        value = float(cell)
    except ValueError:
        raise InputFileError(path, f"cannot read {cell!r} as a number", line=lineno,
                             column=column) from None
    if not np.isfinite(value):
        raise InputFileError(path, f"{cell!r} is not a finite number; drop the row or give "
                                   "a value", line=lineno, column=column)
    return value
