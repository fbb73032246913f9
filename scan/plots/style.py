"""Shared figure style: journal-column sizes, the colour-blind-safe palette, saving.

The palette and each curve's fixed look live in :mod:`scan.plots.looks` (Okabe & Ito 2008).
"""
from __future__ import annotations

import re
from pathlib import Path

import matplotlib

matplotlib.use("Agg")  # no screen on the machines we run on; figures go to files
import matplotlib.pyplot as plt

from scan.plots.looks import PALETTE

#: Width of one journal column and of a full page width [inches] (common practice: ~3.4, ~7.0).
COLUMN_WIDTH_IN: float = 3.4
PAGE_WIDTH_IN: float = 7.0

_RC = {
    "font.size": 8.0,
    "axes.labelsize": 8.0,
    "axes.titlesize": 8.0,
    "legend.fontsize": 6.5,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "axes.linewidth": 0.6,
    "lines.linewidth": 1.1,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.top": False,
    "ytick.right": True,
    "legend.frameon": False,
    "savefig.bbox": "tight",
    "savefig.pad_inches": 0.02,
    # STIX text and STIX math: one Times-like face for labels, ticks and formulas (LaTeX
    # look) with full Unicode coverage for labels taken from curve metadata.
    "font.family": ["STIXGeneral", "DejaVu Serif"],
    "mathtext.fontset": "stix",
    "axes.prop_cycle": matplotlib.cycler(color=list(PALETTE)),
}


def figure(width: float = COLUMN_WIDTH_IN, aspect: float = 0.75, **subplot_kw):
    """A new ``(fig, ax)`` in our style, ``width`` inches wide, ``aspect`` = height/width."""
    plt.rcParams.update(_RC)  # figures are made at the edge; twin/secondary axes need it too
    fig, ax = plt.subplots(figsize=(width, width * aspect), **subplot_kw)
    fig.set_layout_engine("constrained")
    return fig, ax


#: Height of one legend row below the axes [in] (legend.fontsize 6.5 pt, 1.3 line spacing).
LEGEND_ROW_IN: float = 0.125


def legend_below(fig, handles=None, ncols: int = 1, wrap: int = 72, *,
                 labels=None, title: str | None = None, handler_map=None) -> None:
    """A legend under the axes; the figure grows by its rows so the axes keep their size.

    ``handles`` default to those of the first axes (labelled artists); ``labels`` default
    to the handles' own.  Labels longer than ``wrap`` characters (without mathtext) are
    wrapped onto more lines.  ``title`` heads the legend (e.g. what ``*`` marks).
    """
    if handles is None:
        handles, labels = fig.axes[0].get_legend_handles_labels()
    elif labels is None:
        labels = [h.get_label() for h in handles]
    if not handles:
        return
    labels = [wrap_text(t, wrap) for t in labels]
    lines = sum(t.count("\n") + 1 for t in labels)
    rows = -(-lines // ncols) + (title.count("\n") + 1 if title else 0)
    width, height = fig.get_size_inches()
    fig.set_size_inches(width, height + rows * LEGEND_ROW_IN + 0.1)
    fig.legend(handles, labels, loc="outside lower center", ncols=ncols, title=title,
               title_fontsize=6.5, handler_map=handler_map, alignment="left")


def visible_length(text: str) -> int:
    """Characters a label shows (mathtext commands and braces not counted)."""
    return len(re.sub(r"\\[A-Za-z]+|[${}^_]", "", text))


def wrap_text(text: str, width: int) -> str:
    """Wrap ``text`` at spaces outside mathtext so no line shows more than ``width``
    characters (:func:`visible_length`); continuation lines are indented."""
    words = re.findall(r"(?:\$[^$]*\$|[^\s$])+", text)
    lines: list[str] = []
    for word in words:
        if lines and visible_length(lines[-1]) + 1 + visible_length(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(("  " if lines else "") + word)
    return "\n".join(lines) if lines else text


def style_context():
    """Context manager applying our rc settings (use around any plotting code)."""
    return matplotlib.rc_context(_RC)


def save(fig, path_stem: str | Path, formats: tuple[str, ...] = ("pdf", "png"),
         dpi: int = 200) -> list[Path]:
    """Write ``fig`` as ``<path_stem>.pdf`` and ``.png``; close it; return the paths."""
    stem = Path(path_stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    paths = []
    with style_context():
        for fmt in formats:
            path = stem.with_suffix(f".{fmt}")
            fig.savefig(path, dpi=dpi)
            paths.append(path)
    plt.close(fig)
    return paths
