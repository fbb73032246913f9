"""Read a bound-curve file into a :class:`~scan.curves.model.Curve` (the file edge)."""
from __future__ import annotations

from pathlib import Path
from types import MappingProxyType

import numpy as np

from scan.curves import schema as S
from scan.curves import table as T
from scan.curves.meta import Meta, check_meta
from scan.curves.model import Curve, frozen_array
from scan.curves.reader import RawFile, decode, read_raw
from scan.errors import InputFileError


def load_curve(path: str | Path) -> Curve:
    """Read, validate and convert one bound-curve file.

    Parameters
    ----------
    path : str or Path
        A UTF-8 CSV in the zetascan curve format (``constraints/README.md``).

    Returns
    -------
    Curve
        x in Hz or M_sun, y in Omega_GW h^2 or f_PBH.

    Raises
    ------
    InputFileError
        The file cannot be read or breaks a rule; the message names line, column and fix.
    """
    try:
        data = Path(path).read_bytes()
    except OSError as err:
        raise InputFileError(str(path), f"cannot read the file ({err.strerror})") from None
    return parse_bytes(data, str(path))


def parse_bytes(data: bytes, path: str = "<bytes>") -> Curve:
    """:func:`load_curve` on the file's content."""
    return parse_text(decode(path, data), path)


def parse_text(text: str, path: str = "<text>") -> Curve:
    """:func:`load_curve` on decoded text."""
    raw = read_raw(path, text)
    meta = check_meta(raw)
    T.check_header(raw, meta.text["kind"])
    cols, lines = T.read_columns(raw, meta)
    if meta.text["kind"] == "posterior_grid":
        return _posterior_curve(raw, meta, cols, lines)
    T.check_increasing(path, cols["x"], lines)
    T.check_y_scale(path, meta, cols["y"], lines)
    x = cols["x"] * S.X_UNITS[meta.text["x_unit"]][1]
    extra: dict = {}
    if meta.text["kind"] == "detection":
        T.check_detection(path, meta, cols, lines)
        extra["y_lo"] = frozen_array(_canonical(raw, meta, cols["y_lo"], x, lines, "y_lo"))
        extra["y_hi"] = frozen_array(_canonical(raw, meta, cols["y_hi"], x, lines, "y_hi"))
    y = _canonical(raw, meta, cols["y"], x, lines, "y")
    T.warn_suspicious(path, meta, y, lines)
    return _build(raw, meta, frozen_array(x), frozen_array(y), **extra)


def _canonical(raw: RawFile, meta: Meta, values: np.ndarray, x: np.ndarray,
               lines: np.ndarray, column: str) -> np.ndarray:
    out = T.to_canonical(meta, values, x)
    bad = np.flatnonzero(~(np.isfinite(out) & (out > 0)))
    if bad.size:
        raise InputFileError(raw.path, f"value {values[bad[0]]:g} converts to "
                                       f"{meta.text['y_quantity']} {out[bad[0]]:g}, outside "
                                       "floating-point range; check y_scale and y_unit",
                             line=int(lines[bad[0]]), column=column)
    return out


def _posterior_curve(raw: RawFile, meta: Meta, cols: dict[str, np.ndarray],
                     lines: np.ndarray) -> Curve:
    T.check_y_scale(raw.path, meta, cols["y"], lines)
    blocks = T.posterior_blocks(raw.path, cols["x"], cols["y"], cols["density"], lines)
    factor = S.X_UNITS[meta.text["x_unit"]][1]
    slope = S.log10_slope(meta.text["y_quantity"])
    xs, modes, grids, densities = [], [], [], []
    for block in blocks:
        f = cols["x"][block.start] * factor
        omega = _canonical(raw, meta, cols["y"][block], np.full(block.stop - block.start, f),
                           lines[block], "y")
        grid = np.log10(omega)
        dens = cols["density"][block] / slope
        norm = np.trapezoid(dens, grid)
        xs.append(f)
        modes.append(10.0 ** grid[np.argmax(dens)])
        grids.append(frozen_array(grid))
        densities.append(frozen_array(dens / norm))
    return _build(raw, meta, frozen_array(xs), frozen_array(modes), grid_log10_y=tuple(grids),
                  grid_density=tuple(densities))


def _build(raw: RawFile, meta: Meta, x: np.ndarray, y: np.ndarray, **extra) -> Curve:
    text, num = meta.text, meta.numbers
    t_obs = S.years_to_s(num["t_obs_yr"]) if "t_obs_yr" in num else None
    return Curve(
        path=raw.path, name=text["name"], label=text.get("label") or text["name"],
        kind=text["kind"], x_quantity=text["x_quantity"],
        y_quantity="f_pbh" if text["y_quantity"] == "f_pbh" else "omega_gw_h2",
        x=x, y=y, metadata=MappingProxyType(dict(text)), header=raw.header,
        synthetic=meta.synthetic, citation=meta.citation,
        confidence=num.get("confidence"), interval=num.get("interval"),
        snr_threshold=num.get("snr_threshold"), t_obs_s=t_obs, hubble_h=num.get("hubble_h"),
        soft_width_dex=num.get("soft_width_dex"), density_floor=num.get("density_floor"),
        curve_form=text.get("curve_form"), snr_convention=text.get("snr_convention"),
        likelihood=text.get("likelihood") or ("step" if text["kind"] == "upper_limit" else None),
        **extra)
