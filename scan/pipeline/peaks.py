"""Every peak of P_ζ(k): the table ``spectrum/peaks`` of one solve, one row per peak.

A peak is a local maximum of log10 P_ζ on the solved k grid whose topographic
prominence (the drop to the higher of the two lowest points separating it from any
higher ground; scipy.signal.find_peaks) is at least :data:`PROMINENCE_DEX`.  That keeps
the peaks of separate features and drops the decaying oscillations that follow an
ultra-slow-roll peak and numerical wiggles.

Each row carries the pole that made it (the crossing nearest in e-folds to the peak's
horizon exit, numbered in the config's order), the induced-GW maximum and the PBH mass
function maximum in that peak's share of the frequency or mass axis: the axes are cut at
the geometric midpoints between neighbouring peaks (k ↔ f = ck/2π; k ↔ the horizon mass
M_H(k) at re-entry).
"""
from __future__ import annotations

import math
from dataclasses import astuple, dataclass, fields

import numpy as np
from scipy.signal import find_peaks

from scan.observables import Observables, cosmo

#: Smallest prominence of a peak [dex of P_ζ].  The oscillations after a USR peak are a
#: factor ≲ 3 (≤ 0.5 dex) deep in the solves of this project (measured on the T-model
#: pole, p = 1: 0.3 dex next to the peak), separate features rise by several decades
#: above the slow-roll plateau (P_ζ ≈ 2e-9): 1 dex separates the two (common practice).
PROMINENCE_DEX = 1.0


@dataclass(frozen=True)
class Peak:
    """One local maximum of P_ζ and what it makes.

    Attributes
    ----------
    pole : int
        Config number of the pole whose crossing is nearest (-1: no crossing).
    k : float
        Peak wavenumber [Mpc^-1].
    P_zeta : float
        P_ζ at the peak [1].
    f_gw : float
        Frequency of the Ω_GW h² maximum in this peak's share [Hz] (nan: no observables).
    omega_gw_h2 : float
        That maximum, Ω_GW,0 h² per ln f [1].
    M_pbh : float
        Mass where f_PBH per ln M peaks in this peak's share [M_sun].
    f_pbh : float
        f_PBH per ln M there [1].
    """

    pole: int
    k: float
    P_zeta: float
    f_gw: float = math.nan
    omega_gw_h2: float = math.nan
    M_pbh: float = math.nan
    f_pbh: float = math.nan


#: Units of the columns of ``spectrum/peaks``.
UNITS: dict[str, str] = {"pole": "1", "k": "Mpc^-1", "P_zeta": "1", "f_gw": "Hz",
                         "omega_gw_h2": "1", "M_pbh": "M_sun", "f_pbh": "1"}


def peak_indices(k: np.ndarray, P: np.ndarray,
                 prominence: float = PROMINENCE_DEX) -> np.ndarray:
    """Indices (into k sorted ascending) of the interior peaks of log10 P."""
    logp = np.log10(np.clip(np.asarray(P, float), 1e-300, None))
    found, _ = find_peaks(logp, prominence=prominence)
    return found


def _refined(lnk: np.ndarray, logp: np.ndarray, i: int) -> tuple[float, float]:
    """Vertex of the parabola through the three grid points around a maximum."""
    x, y = lnk[i - 1:i + 2], logp[i - 1:i + 2]
    a, b, c = np.polyfit(x - x[1], y, 2)
    if a >= 0:
        return math.exp(lnk[i]), 10.0 ** logp[i]
    dx = float(np.clip(-b / (2 * a), x[0] - x[1], x[2] - x[1]))
    return math.exp(x[1] + dx), 10.0 ** (c + b * dx + a * dx * dx)


def _cuts(k_peaks: list[float]) -> list[float]:
    """Geometric midpoints between neighbouring peak wavenumbers [Mpc^-1]."""
    return [math.sqrt(a * b) for a, b in zip(k_peaks, k_peaks[1:])]


def _share_max(x: np.ndarray, y: np.ndarray, lo: float, hi: float) -> tuple[float, float]:
    """(x, y) at the largest y with lo <= x < hi (nan if none)."""
    inside = (x >= lo) & (x < hi) & np.isfinite(y)
    if not inside.any():
        return math.nan, math.nan
    j = np.flatnonzero(inside)[np.argmax(y[inside])]
    return float(x[j]), float(y[j])


def peak_table(spectrum, background, observables: Observables | None = None,
               prominence: float = PROMINENCE_DEX) -> tuple[Peak, ...]:
    """All peaks of an exact spectrum, in increasing k.

    Parameters
    ----------
    spectrum : Spectrum
        ``k`` [Mpc^-1], ``P_zeta``, ``N_exit``, and the refined global ``k_peak``,
        ``P_peak`` (used for the highest row).
    background : Background
        Its crossings (config numbers) for the pole column.
    observables : Observables, optional
        Ω_GW h²(f) and f_PBH(M) of the spectrum.
    prominence : float
        Smallest prominence [dex].
    """
    order = np.argsort(spectrum.k)
    k, P, N_exit = (np.asarray(a, float)[order] for a in (spectrum.k, spectrum.P_zeta,
                                                            spectrum.N_exit))
    lnk, logp = np.log(k), np.log10(np.clip(P, 1e-300, None))
    found = peak_indices(k, P, prominence)
    rows = [_refined(lnk, logp, int(i)) for i in found]
    if rows and math.isfinite(spectrum.k_peak):
        top = int(np.argmax([p for _, p in rows]))
        rows[top] = (float(spectrum.k_peak), float(spectrum.P_peak))
    crossings = getattr(background, "crossings", ())
    k_peaks = [kp for kp, _ in rows]
    edges = [0.0] + _cuts(k_peaks) + [math.inf]
    table = []
    for j, (i, (kp, pp)) in enumerate(zip(found, rows)):
        pole = (min(crossings, key=lambda c: abs(c.N_cross - N_exit[i])).index
                if crossings else -1)
        table.append(Peak(pole, kp, pp, *_observables_share(observables, edges[j],
                                                            edges[j + 1])))
    return tuple(table)


def _observables_share(obs: Observables | None, k_lo: float,
                       k_hi: float) -> tuple[float, float, float, float]:
    """GW and PBH maxima between two cut wavenumbers [Mpc^-1]."""
    if obs is None or obs.f_hz is None:
        return math.nan, math.nan, math.nan, math.nan
    f = np.asarray(obs.f_hz, float)
    f_gw, om = _share_max(f, np.asarray(obs.omega_gw_h2, float),
                          float(cosmo.k_to_f(k_lo)) if k_lo > 0 else 0.0,
                          float(cosmo.k_to_f(k_hi)) if math.isfinite(k_hi) else math.inf)
    m = np.asarray(obs.m_msun, float)
    m_lo = float(cosmo.horizon_mass_msun(k_hi)) if math.isfinite(k_hi) else 0.0
    m_hi = float(cosmo.horizon_mass_msun(k_lo)) if k_lo > 0 else math.inf
    f_pbh = np.asarray(obs.f_pbh_per_lnm, float)
    m_pbh, fp = _share_max(m, np.where(f_pbh > 0, f_pbh, np.nan), m_lo, m_hi)
    return f_gw, om, m_pbh, fp


def as_records(peaks: tuple[Peak, ...]) -> np.ndarray:
    """The table as a numpy structured array (the HDF5 compound dataset)."""
    dtype = [(f.name, np.int32 if f.name == "pole" else np.float64) for f in fields(Peak)]
    return np.array([astuple(p) for p in peaks], dtype=dtype)


def describe(peak: Peak, number: int) -> str:
    """One summary line of a peak."""
    line = (f"peak {number}: P_zeta = {peak.P_zeta:.4g} at k = {peak.k:.4g} Mpc^-1"
            + (f" (pole {peak.pole})" if peak.pole >= 0 else ""))
    if math.isfinite(peak.f_gw):
        line += f"; Omega_GW h^2 = {peak.omega_gw_h2:.3e} at f = {peak.f_gw:.3e} Hz"
    if math.isfinite(peak.M_pbh):
        line += f"; f_PBH per ln M peaks at M = {peak.M_pbh:.3e} M_sun ({peak.f_pbh:.3e})"
    return line
