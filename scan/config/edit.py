"""Edit a run config's TOML text in place: set keys of one ``[[model.poles]]`` table.

Only the lines that change are touched: comments, order and every other table stay as
the user wrote them (``zetascan tune`` writes its result this way).
"""
from __future__ import annotations

import re

from scan.errors import ConfigError

_POLE_HEADER = re.compile(r"^\s*\[\[\s*model\.poles\s*\]\]\s*(#.*)?$")
_ANY_HEADER = re.compile(r"^\s*\[")


def _key_line(key: str) -> re.Pattern:
    return re.compile(rf"^(\s*){re.escape(key)}\s*=\s*[^#\n]*?(\s*#.*)?$")


def pole_block(lines: list[str], pole: int, source: str) -> tuple[int, int]:
    """Line range [start, stop) of the ``pole``-th ``[[model.poles]]`` table (after its
    header).

    Raises
    ------
    ConfigError
        If the text has no such table (e.g. poles written as an inline array).
    """
    headers = [i for i, line in enumerate(lines) if _POLE_HEADER.match(line)]
    if pole >= len(headers):
        raise ConfigError(source, f"model.poles[{pole}]", f"found {len(headers)} "
                          "[[model.poles]] table(s) in the file",
                          "write each pole as its own [[model.poles]] table")
    start = headers[pole] + 1
    stop = next((i for i in range(start, len(lines)) if _ANY_HEADER.match(lines[i])),
                len(lines))
    return start, stop


def set_pole_keys(text: str, pole: int, values: dict[str, float], *, drop: tuple[str, ...] = (),
                  note: str = "", source: str = "<config>") -> str:
    """``text`` with keys of ``[[model.poles]]`` table ``pole`` set (or added) and ``drop``
    keys removed; ``note`` becomes the changed lines' comment.

    Parameters
    ----------
    text : str
        The TOML text.
    pole : int
        Which ``[[model.poles]]`` table, counted from 0 in file order.
    values : dict of str to float
        Keys and values to write (``repr`` of the float: round-trips exactly).
    drop : tuple of str
        Keys to delete from the table (e.g. ``sharpness`` when a width is written).
    """
    lines = text.splitlines()
    start, stop = pole_block(lines, pole, source)
    comment = f"  # {note}" if note else ""
    block = [line for line in lines[start:stop]
             if not any(_key_line(k).match(line) for k in drop)]
    for key, value in values.items():
        pattern = _key_line(key)
        hit = next((i for i, line in enumerate(block) if pattern.match(line)), None)
        new = f"{key} = {float(value)!r}{comment}"
        if hit is None:
            block.insert(0, new)
        else:
            block[hit] = pattern.match(block[hit]).group(1) + new
    out = lines[:start] + block + lines[stop:]
    return "\n".join(out) + ("\n" if text.endswith("\n") else "")
