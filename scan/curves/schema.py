"""The bound-curve file format (zetascan curve format, "BCF v1"): keys, values, units.

Pure tables and conversions; no file access.  The format is documented for users in
``constraints/README.md``; this module is its single source of truth.
"""
from __future__ import annotations

import math

import numpy as np

from scan.constants import GW_OMEGA_PREFACTOR_S2, H100_S, M_SUN_G, M_SUN_KG, YEAR_S

#: Version written into (and required from) the ``bcf_version`` key.
FORMAT_VERSION: str = "1"

KINDS: tuple[str, ...] = ("upper_limit", "detection", "sensitivity", "posterior_grid")
X_QUANTITIES: tuple[str, ...] = ("frequency", "mass")
Y_QUANTITIES: tuple[str, ...] = ("omega_gw_h2", "omega_gw", "h_c", "S_h", "rho", "f_pbh")
SCALES: tuple[str, ...] = ("linear", "log10")
CURVE_FORMS: tuple[str, ...] = ("noise", "power_law_integrated")
SNR_CONVENTIONS: tuple[str, ...] = ("single", "cross")
LIKELIHOODS: tuple[str, ...] = ("step", "half_normal", "soft_log")
BOOLEANS: dict[str, bool] = {"true": True, "false": False}

#: x unit -> (x quantity, factor to Hz or to M_sun).
X_UNITS: dict[str, tuple[str, float]] = {
    "Hz": ("frequency", 1.0),
    "mHz": ("frequency", 1e-3),
    "nHz": ("frequency", 1e-9),
    "g": ("mass", 1.0 / M_SUN_G),
    "kg": ("mass", 1.0 / M_SUN_KG),
    "Msun": ("mass", 1.0),
}
#: y quantity -> the unit it must be declared with.
Y_UNITS: dict[str, str] = {
    "omega_gw_h2": "1", "omega_gw": "1", "h_c": "1", "S_h": "1/Hz", "rho": "s", "f_pbh": "1",
}
#: y quantity -> the x quantity it needs.
Y_NEEDS_X: dict[str, str] = {q: "frequency" for q in Y_UNITS} | {"f_pbh": "mass"}
#: kind -> y quantities allowed with it.
KIND_Y: dict[str, tuple[str, ...]] = {
    "upper_limit": Y_QUANTITIES,
    "detection": ("omega_gw_h2", "omega_gw", "h_c", "rho"),
    "sensitivity": ("omega_gw_h2", "omega_gw", "h_c", "S_h"),
    "posterior_grid": ("omega_gw_h2", "omega_gw", "h_c", "rho"),
}
#: kind -> the exact header row it needs.
KIND_COLUMNS: dict[str, tuple[str, ...]] = {
    "upper_limit": ("x", "y"),
    "sensitivity": ("x", "y"),
    "detection": ("x", "y", "y_lo", "y_hi"),
    "posterior_grid": ("x", "y", "density"),
}

#: Keys every file needs, with a hint of allowed values for the error message.
REQUIRED: dict[str, str] = {
    "bcf_version": FORMAT_VERSION,
    "name": "a short identifier, e.g. demo_pta_excess",
    "kind": ", ".join(KINDS),
    "x_quantity": ", ".join(X_QUANTITIES),
    "x_unit": ", ".join(X_UNITS),
    "y_quantity": ", ".join(Y_QUANTITIES),
    "y_unit": "1, s, 1/Hz",
    "y_scale": ", ".join(SCALES),
    "synthetic": "true, false",
}
#: Keys allowed in addition (conditional requirements are checked in ``validate``).
OPTIONAL: tuple[str, ...] = (
    "label", "description", "citation", "x_scale", "hubble_h", "confidence", "interval",
    "curve_form", "snr_threshold", "t_obs_yr", "snr_convention", "likelihood",
    "soft_width_dex", "density_floor", "mass_function",
)
KNOWN_KEYS: tuple[str, ...] = tuple(REQUIRED) + OPTIONAL
#: Keys whose value must be one of a fixed list.
CHOICES: dict[str, tuple[str, ...]] = {
    "kind": KINDS, "x_quantity": X_QUANTITIES, "x_unit": tuple(X_UNITS),
    "y_quantity": Y_QUANTITIES, "y_unit": tuple(sorted(set(Y_UNITS.values()))),
    "y_scale": SCALES, "x_scale": SCALES, "curve_form": CURVE_FORMS,
    "snr_convention": SNR_CONVENTIONS, "likelihood": LIKELIHOODS,
    "synthetic": tuple(BOOLEANS), "bcf_version": (FORMAT_VERSION,),
    "mass_function": ("monochromatic",),
}
#: Numeric keys -> (lower, upper) open bounds.
NUMERIC: dict[str, tuple[float, float]] = {
    "hubble_h": (0.2, 2.0), "confidence": (0.0, 1.0), "interval": (0.0, 1.0),
    "snr_threshold": (0.0, math.inf), "t_obs_yr": (0.0, 1e4),
    "soft_width_dex": (0.0, 10.0), "density_floor": (0.0, 1.0),
}


def two_sided_z(probability: float) -> float:
    """Half-width in sigmas of a central interval holding ``probability`` (0.68 -> 0.994)."""
    from scipy.special import erfinv
    return float(math.sqrt(2.0) * erfinv(probability))


def y_to_omega_h2(quantity: str, y_lin: np.ndarray, f_hz: np.ndarray, hubble_h: float | None,
                  t_obs_s: float | None) -> np.ndarray:
    """Convert linear y values of ``quantity`` to Omega_GW h^2 (or pass f_PBH through).

    Parameters
    ----------
    quantity : str
        One of ``Y_QUANTITIES``.
    y_lin : numpy.ndarray
        Linear values in the quantity's unit (``Y_UNITS``).
    f_hz : numpy.ndarray [Hz]
        Frequencies (ignored for ``f_pbh``).
    hubble_h : float or None
        h of a plain ``omega_gw`` curve.
    t_obs_s : float or None [s]
        Observation span of a ``rho`` curve (bin width 1/T).

    Returns
    -------
    numpy.ndarray
        Omega_GW h^2 (dimensionless), or f_PBH for ``f_pbh``.
    """
    if quantity in ("omega_gw_h2", "f_pbh"):
        return y_lin
    if quantity == "omega_gw":
        return y_lin * hubble_h**2
    if quantity == "h_c":
        return GW_OMEGA_PREFACTOR_S2 * f_hz**2 * y_lin**2
    if quantity == "S_h":
        return GW_OMEGA_PREFACTOR_S2 * f_hz**3 * y_lin
    if quantity == "rho":  # Omega h^2 = 8 pi^4 T f^5 rho^2 / H100^2 (constraints.md Sec. 5b)
        return 8.0 * math.pi**4 * t_obs_s * f_hz**5 * y_lin**2 / H100_S**2
    raise ValueError(f"unknown y quantity {quantity!r}")


def log10_slope(quantity: str) -> float:
    """d log10(Omega h^2) / d log10(y) at fixed f (1 or 2); used to rescale densities."""
    return 2.0 if quantity in ("h_c", "rho") else 1.0


def years_to_s(years: float) -> float:
    """Julian years to seconds."""
    return years * YEAR_S
