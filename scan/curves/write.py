"""Write a curve in the zetascan curve format (used by ``zetascan curves sensitivity``)."""
from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from scan.curves import schema as S


def format_curve(meta: Mapping[str, object], columns: Sequence[np.ndarray],
                 comments: Sequence[str] = ()) -> str:
    """The text of a curve file.

    Parameters
    ----------
    meta : Mapping
        Metadata keys and values (``bcf_version`` is added first when absent).
    columns : sequence of numpy.ndarray
        Data columns in the order of ``schema.KIND_COLUMNS[meta["kind"]]``.
    comments : sequence of str
        Free comment lines written after the metadata.

    Returns
    -------
    str
        UTF-8-ready text ending in a newline.
    """
    items = {"bcf_version": S.FORMAT_VERSION} | dict(meta)
    width = max(len(k) for k in items)
    lines = [f"#: {k:<{width}} = {v}" for k, v in items.items()]
    lines += [f"# {c}" for c in comments]
    lines.append(",".join(S.KIND_COLUMNS[str(items["kind"])]))
    for row in zip(*columns):
        lines.append(",".join(f"{float(v):.6e}" for v in row))
    return "\n".join(lines) + "\n"


def write_curve(path: str | Path, text: str) -> Path:
    """Write ``text`` to ``path`` atomically (temporary name, then rename)."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(f".{target.name}.tmp{os.getpid()}")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, target)
    return target
