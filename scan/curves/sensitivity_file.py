"""A LISA sensitivity as a bound-curve file (``zetascan curves sensitivity``).

The noise model is :mod:`scan.curves.noise` (Robson, Cornish & Liu 2019); the file is
written in the zetascan curve format (:mod:`scan.curves.write`) and read back through
the same checks as every other curve before the path is returned.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from scan.constants import YEAR_S
from scan.curves.load import load_curve
from scan.curves.noise import LISA_CONFUSION_TABLE, lisa_sensitivity
from scan.curves.write import format_curve, write_curve
from scan.errors import InputFileError


def sensitivity_text(snr: float, years: float, confusion: bool, form: str,
                     points: int) -> str:
    """The curve file text of a LISA sensitivity (Robson, Cornish & Liu 2019)."""
    if confusion and years not in LISA_CONFUSION_TABLE:
        raise InputFileError("--years", f"galactic confusion noise is tabulated for "
                                        f"{sorted(LISA_CONFUSION_TABLE)} years, not {years:g}")
    if snr <= 0 or years <= 0 or points < 2:
        raise InputFileError("--snr/--years/--points", "need snr > 0, years > 0, points >= 2")
    grid = np.geomspace(1e-5, 1.0, 4001)
    f_out = np.geomspace(1e-5, 1.0, points)
    kind = "power_law_integrated" if form == "pli" else "noise"
    omega = lisa_sensitivity(grid, snr, years, confusion, kind, f_out=f_out)
    conf = f"with {years:g}-yr galactic confusion noise" if confusion else "instrument only"
    meta = {
        "name": f"lisa_{form}_snr{snr:g}_{years:g}yr" + ("_confusion" if confusion else ""),
        "label": f"LISA {'PLI' if form == 'pli' else 'noise'} ({conf})",
        "kind": "sensitivity", "curve_form": kind, "x_quantity": "frequency", "x_unit": "Hz",
        "y_quantity": "omega_gw_h2", "y_unit": "1", "y_scale": "linear",
        "snr_threshold": f"{snr:g}", "t_obs_yr": f"{years:g}", "snr_convention": "single",
        "synthetic": "false",
        "citation": "Robson, Cornish & Liu 2019, CQG 36, 105011, arXiv:1803.01944 (noise); "
                    "Thrane & Romano 2013, PRD 88, 124032, arXiv:1310.5300 (PLI)",
        "description": f"computed by zetascan curves sensitivity; {conf}; "
                       f"T = {years * YEAR_S:.6e} s",
    }
    return format_curve(meta, (f_out, omega), comments=(
        f"zetascan curves sensitivity --snr {snr:g} --years {years:g}"
        + (" --confusion" if confusion else "") + f" --form {form} --points {points}",))


def write_sensitivity(out: str | Path, snr: float, years: float, confusion: bool,
                      form: str, points: int) -> Path:
    """Write the LISA sensitivity curve file ``out`` and check it loads; return its path."""
    path = write_curve(out, sensitivity_text(snr, years, confusion, form, points))
    load_curve(path)  # what we write must pass our own checks
    return path
