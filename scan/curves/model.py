"""The parsed, validated bound curve: a frozen value in canonical units."""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Curve:
    """One bound curve in canonical units.

    Attributes
    ----------
    path : str
        File it was read from.
    name : str
        Identifier (``name`` key); ``label`` is the legend text.
    label : str
        Human-readable legend text (``label`` key, else ``name``).
    kind : str
        ``upper_limit``, ``detection``, ``sensitivity`` or ``posterior_grid``.
    x_quantity : str
        ``frequency`` (x in Hz) or ``mass`` (x in M_sun).
    y_quantity : str
        ``omega_gw_h2`` or ``f_pbh``: what ``y`` holds after conversion.
    x : numpy.ndarray [Hz or M_sun]
        Strictly increasing abscissae (for ``posterior_grid``: the bin frequencies).
    y : numpy.ndarray [1]
        Omega_GW h^2 or f_PBH, linear (``posterior_grid``: the density's mode per bin).
    y_lo, y_hi : numpy.ndarray or None [1]
        Interval bounds of a ``detection`` (probability ``interval``), linear.
    grid_log10_y : tuple of numpy.ndarray or None
        ``posterior_grid``: per bin, the grid of log10 Omega_GW h^2.
    grid_density : tuple of numpy.ndarray or None
        ``posterior_grid``: per bin, the density per unit log10 Omega_GW h^2 (normalised
        to unit integral over the grid).
    metadata : Mapping[str, str]
        All ``#:`` key/value pairs as written.
    header : tuple of str
        The original lines up to and including the header row.
    synthetic : bool
        True for invented data.
    citation : str
        Where the curve comes from.
    confidence, interval, snr_threshold, t_obs_s, hubble_h, soft_width_dex, density_floor
        Typed metadata (None when absent); ``t_obs_s`` in seconds.
    curve_form, snr_convention, likelihood : str or None
        Typed metadata (None when absent).
    """

    path: str
    name: str
    label: str
    kind: str
    x_quantity: str
    y_quantity: str
    x: np.ndarray
    y: np.ndarray
    metadata: Mapping[str, str]
    header: tuple[str, ...]
    synthetic: bool
    citation: str
    y_lo: np.ndarray | None = None
    y_hi: np.ndarray | None = None
    grid_log10_y: tuple[np.ndarray, ...] | None = None
    grid_density: tuple[np.ndarray, ...] | None = None
    confidence: float | None = None
    interval: float | None = None
    snr_threshold: float | None = None
    t_obs_s: float | None = None
    hubble_h: float | None = None
    soft_width_dex: float | None = None
    density_floor: float | None = None
    curve_form: str | None = None
    snr_convention: str | None = None
    likelihood: str | None = None

    @property
    def x_unit(self) -> str:
        """Canonical unit of ``x``: ``"Hz"`` or ``"Msun"``."""
        return "Hz" if self.x_quantity == "frequency" else "Msun"

    def summary(self) -> str:
        """One line: name, kind, range, points, provenance."""
        what = {"upper_limit": f"{self.confidence:g} CL upper limit" if self.confidence
                else "upper limit", "detection": "detection", "sensitivity":
                f"sensitivity ({self.curve_form})", "posterior_grid": "posterior grid"}
        source = "synthetic" if self.synthetic else (self.citation or "no citation")
        return (f"{self.name}: {what[self.kind]} on {self.y_quantity}, "
                f"{self.x_quantity} {self.x[0]:.3g}-{self.x[-1]:.3g} {self.x_unit}, "
                f"{len(self.x)} {'bins' if self.kind == 'posterior_grid' else 'points'}, "
                f"y {np.min(self.y):.3g}-{np.max(self.y):.3g} [{source}]")


def frozen_array(values) -> np.ndarray:
    """A read-only float copy."""
    out = np.array(values, dtype=float)
    out.setflags(write=False)
    return out
