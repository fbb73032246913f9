"""The API's result objects: small frozen records whose arrays are astropy Quantities.

Built from the library's own records (:class:`scan.pipeline.SolveResult`,
:class:`scan.observables.Observables`) or read back from a result file; units come from
the library's boundaries (k [Mpc⁻¹], f [Hz], M [M_sun]) or from the file's ``units``
attributes, parsed by astropy.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from typing import Any

import astropy.units as u
import h5py
import numpy as np

from scan.constants import M_PLANCK_REDUCED_GEV
from scan.observables import Observables
from scan.observables.pbh import PBHConventions
from scan.pipeline import SolveResult

#: The reduced Planck mass (8πG)^-1/2 as an astropy unit (V0 and H of the solver).
REDUCED_PLANCK_MASS = u.def_unit("M_Pl_red", M_PLANCK_REDUCED_GEV * u.GeV,
                                 doc="reduced Planck mass (8 pi G)^-1/2")
PER_MPC = u.Mpc ** -1


@dataclasses.dataclass(frozen=True)
class Observed:
    """What detectors and black-hole bounds see of one curvature spectrum.

    Attributes
    ----------
    f : Quantity [Hz]
        GW frequencies today.
    omega_gw_h2 : Quantity [dimensionless]
        Ω_GW,0 h² per ln f.
    M : Quantity [solMass]
        PBH masses.
    f_pbh : Quantity [dimensionless]
        d f_PBH / d ln M, the fraction of the dark matter per ln M.
    f_pbh_total : Quantity [dimensionless]
        ∫ f_PBH d ln M.
    conventions : Mapping[str, Any]
        Every PBH convention used (window, criterion, threshold, critical collapse, Ω_DM h²).
    notes : tuple of str
        Warnings of the computation (truncated or under-resolved spectra).
    """

    f: u.Quantity
    omega_gw_h2: u.Quantity
    M: u.Quantity
    f_pbh: u.Quantity
    f_pbh_total: u.Quantity
    conventions: Mapping[str, Any]
    notes: tuple[str, ...] = ()

    @classmethod
    def from_record(cls, obs: Observables) -> Observed:
        """From the library's :class:`~scan.observables.Observables` of one spectrum."""
        conv = obs.conventions.as_attrs() if obs.conventions is not None else {}
        return cls(f=obs.f_hz * u.Hz, omega_gw_h2=obs.omega_gw_h2 * u.one,
                   M=obs.m_msun * u.M_sun, f_pbh=obs.f_pbh_per_lnm * u.one,
                   f_pbh_total=float(obs.f_pbh_total) * u.one, conventions=dict(conv),
                   notes=tuple(obs.notes))


@dataclasses.dataclass(frozen=True)
class Solution:
    """One model solved exactly (:func:`scan.solve`) or read back (:func:`scan.load_result`).

    Attributes
    ----------
    valid : bool
    reason : str
        Why the model is invalid ("" when valid); see docs/troubleshooting.md.
    k : Quantity [1/Mpc] or None
        Wavenumbers of the exact spectrum (None without one).
    P_zeta, P_tensor : Quantity [dimensionless] or None
        Curvature and tensor power spectra at ``k``.
    scalars : Mapping[str, Quantity]
        CMB pivot and peak numbers: n_s, r, alpha_s, A_s, N_star, V0 [GeV⁴], k_star and
        k_peak [1/Mpc], P_peak (those the solve reached).
    observed : Observed or None
        Ω_GW h²(f) and f_PBH(M) of the spectrum.
    source : str
        The config or file this came from.
    record : SolveResult or None
        The library's full record (background, pivot, spectrum) of a fresh solve.
    """

    valid: bool
    reason: str
    k: u.Quantity | None = None
    P_zeta: u.Quantity | None = None
    P_tensor: u.Quantity | None = None
    scalars: Mapping[str, u.Quantity] = dataclasses.field(default_factory=dict)
    observed: Observed | None = None
    source: str = ""
    record: SolveResult | None = dataclasses.field(default=None, repr=False)

    # the observables, one attribute away
    @property
    def f(self) -> u.Quantity | None:
        """GW frequencies today [Hz] (None without observables)."""
        return None if self.observed is None else self.observed.f

    @property
    def omega_gw_h2(self) -> u.Quantity | None:
        """Ω_GW,0 h² per ln f (None without observables)."""
        return None if self.observed is None else self.observed.omega_gw_h2

    @property
    def M(self) -> u.Quantity | None:
        """PBH masses [solMass] (None without observables)."""
        return None if self.observed is None else self.observed.M

    @property
    def f_pbh(self) -> u.Quantity | None:
        """f_PBH per ln M (None without observables)."""
        return None if self.observed is None else self.observed.f_pbh

    @classmethod
    def from_record(cls, result: SolveResult, source: str = "") -> Solution:
        """From the library's :class:`~scan.pipeline.SolveResult`."""
        s = result.spectrum
        spectrum: dict[str, Any] = {}
        scalars: dict[str, u.Quantity] = {}
        if result.pivot is not None and result.pivot.valid:
            p = result.pivot
            scalars.update(n_s=p.n_s * u.one, r=p.r * u.one, N_star=p.N_star * u.one,
                           k_star=p.k_star * PER_MPC, V0=_v0(p.V0))
        if s is not None and s.valid:
            spectrum = {"k": s.k * PER_MPC, "P_zeta": s.P_zeta * u.one,
                            "P_tensor": s.P_tensor * u.one}
            scalars.update(n_s=s.n_s * u.one, r=s.r * u.one, alpha_s=s.alpha_s * u.one,
                           A_s=s.A_s * u.one, N_star=s.N_star * u.one, V0=_v0(s.V0),
                           k_peak=s.k_peak * PER_MPC, P_peak=s.P_peak * u.one)
        observed = (Observed.from_record(result.observables)
                    if result.observables is not None else None)
        return cls(valid=result.valid, reason=result.reason, scalars=scalars,
                   observed=observed, source=source, record=result, **spectrum)


def _v0(value: float) -> u.Quantity:
    """V0 [M_p⁴] of the solver as GeV⁴."""
    return (value * REDUCED_PLANCK_MASS ** 4).to(u.GeV ** 4)


# --------------------------------------------------------------------------- files
def quantity(dset: h5py.Dataset) -> u.Quantity:
    """A dataset with its ``units`` attribute, parsed by astropy."""
    return np.asarray(dset[()], dtype=float) * u.Unit(str(dset.attrs.get("units", "1")))


def _scalar_attrs(group: h5py.Group, units: Mapping[str, u.UnitBase]) -> dict[str, u.Quantity]:
    out = {}
    for name, unit in units.items():
        value = group.attrs.get(name)
        if value is not None and np.ndim(value) == 0 and math.isfinite(float(value)):
            out[name] = float(value) * unit
    return out


#: Scalars of a solve result and their units (V0 in the solver's M_p⁴, converted below).
SCALAR_UNITS: dict[str, u.UnitBase] = {
    "n_s": u.one, "r": u.one, "alpha_s": u.one, "A_s": u.one, "N_star": u.one,
    "k_star": PER_MPC, "k_peak": PER_MPC, "P_peak": u.one}


def observed_from_file(handle: h5py.File) -> Observed | None:
    """The ``gw`` and ``pbh`` groups of a result file as :class:`Observed`."""
    if "gw" not in handle or "pbh" not in handle:
        return None
    gw, pbh = handle["gw"], handle["pbh"]
    conv_keys = {f.name for f in dataclasses.fields(PBHConventions)}
    conventions = {k: (v.item() if hasattr(v, "item") else v) for k, v in pbh.attrs.items()
                   if k in conv_keys}
    notes = tuple(str(n) for n in gw.attrs.get("notes", []) if str(n) != "none")
    return Observed(f=quantity(gw["f"]).to(u.Hz), omega_gw_h2=quantity(gw["omega_gw_h2"]),
                    M=quantity(pbh["M"]).to(u.M_sun), f_pbh=quantity(pbh["f_pbh"]),
                    f_pbh_total=float(pbh.attrs["f_pbh_total"]) * u.one,
                    conventions=conventions, notes=notes)


def solution_from_file(handle: h5py.File, source: str) -> Solution:
    """A solve result (or an observe output, which has no spectrum) as :class:`Solution`."""
    spectrum: dict[str, u.Quantity] = {}
    scalars: dict[str, u.Quantity] = {}
    for name in ("cmb", "spectrum"):
        if name in handle:
            scalars.update(_scalar_attrs(handle[name], SCALAR_UNITS))
            v0 = handle[name].attrs.get("V0")
            if v0 is not None and math.isfinite(float(v0)):
                scalars["V0"] = _v0(float(v0))
    if "spectrum" in handle:
        s = handle["spectrum"]
        spectrum = {"k": quantity(s["k"]).to(PER_MPC), "P_zeta": quantity(s["P_zeta"]),
                        "P_tensor": quantity(s["P_tensor"])}
    valid = bool(handle.attrs.get("valid", True))
    reason = str(handle.attrs.get("reason", ""))
    return Solution(valid=valid, reason=reason, scalars=scalars,
                    observed=observed_from_file(handle), source=source, **spectrum)
