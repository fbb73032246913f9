"""Whether an artist shows anything inside its axes' view, for legends that name only
what is drawn.

Data-space checks after the axis limits are final: a line shows if one of its finite
points lies inside the limits (or one segment crosses them), a filled collection if its
paths' bounding box overlaps them; a tuple of artists (an overlaid legend key) if any
member does.
"""
from __future__ import annotations

import numpy as np
from matplotlib.collections import Collection
from matplotlib.container import Container
from matplotlib.lines import Line2D


def _limits(ax) -> tuple[float, float, float, float]:
    (x0, x1), (y0, y1) = sorted(ax.get_xlim()), sorted(ax.get_ylim())
    return x0, x1, y0, y1


def _line_in_view(line: Line2D, ax) -> bool:
    x = np.asarray(line.get_xdata(), float)
    y = np.asarray(line.get_ydata(), float)
    x0, x1, y0, y1 = _limits(ax)
    ok = np.isfinite(x) & np.isfinite(y)
    inside = ok & (x >= x0) & (x <= x1) & (y >= y0) & (y <= y1)
    if inside.any():
        return True
    # a segment between two finite points outside the view may still cross it: test the
    # segments' bounding boxes (enough for the near-straight pieces of sampled curves)
    both = ok[:-1] & ok[1:]
    x_lo, x_hi = np.minimum(x[:-1], x[1:]), np.maximum(x[:-1], x[1:])
    y_lo, y_hi = np.minimum(y[:-1], y[1:]), np.maximum(y[:-1], y[1:])
    return bool(np.any(both & (x_lo <= x1) & (x_hi >= x0) & (y_lo <= y1) & (y_hi >= y0)))


def _collection_in_view(collection: Collection, ax) -> bool:
    x0, x1, y0, y1 = _limits(ax)
    for path in collection.get_paths():
        v = path.vertices[np.all(np.isfinite(path.vertices), axis=1)]
        if v.size and v[:, 0].min() <= x1 and v[:, 0].max() >= x0 \
                and v[:, 1].min() <= y1 and v[:, 1].max() >= y0:
            return True
    return False


def in_view(artist, ax) -> bool:
    """True if ``artist`` (drawn on ``ax`` in data coordinates) shows inside the view."""
    if artist is None:
        return False
    if isinstance(artist, tuple):
        return any(in_view(a, ax) for a in artist)
    if isinstance(artist, Container):
        return any(in_view(a, ax) for a in artist.get_children())
    if not artist.get_visible():
        return False
    if isinstance(artist, Line2D):
        return _line_in_view(artist, ax)
    if isinstance(artist, Collection):
        return _collection_in_view(artist, ax)
    return True


def shown_entries(entries, axes) -> list:
    """The ``(handle, text)`` legend entries whose handle shows on one of ``axes``."""
    return [(h, t) for h, t in entries if any(in_view(h, ax) for ax in axes)]
