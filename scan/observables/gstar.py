"""Effective relativistic degrees of freedom g_*(T) (energy) and g_*s(T) (entropy).

Two built-in tables, chosen by name (``[observables] gstar``, :data:`TABLES`):

* ``saikawa-shirai-2018`` (the default since issue 15): the published tabulation of
  Saikawa & Shirai 2018 (arXiv:1803.01038), lattice-QCD equation of state across the
  crossover, 2e-5 - 1e4 GeV, shipped as ``scan/observables/data/gstar_saikawa_shirai_2018.csv``
  (source and licence in its header); :func:`saikawa_shirai_2018`;
* ``ideal-gas``: our own ideal-gas computation of the Standard Model from 1 keV to
  10 TeV (:func:`standard_model`), the default before issue 15 (kept by name):

* every species is a free Bose or Fermi gas with its physical mass (exact one-particle
  integrals, no Boltzmann approximation); W, Z, H and t keep their masses at all T, so
  g_* reaches 106.75 only for T >> 173 GeV (106.74 at 10 TeV);
* QCD crossover: the pressure-free *effective* numbers of a free quark-gluon gas
  (u, d, s, c, b, t quarks + gluons) and of a light-hadron gas (pi, K, eta, rho, omega,
  K*, eta', phi, nucleons) are blended with a weight ``(1 + tanh(ln(T/T_c)/width))/2``,
  T_c = 0.17 GeV, width = 0.15 (so the switch spans roughly 0.13-0.22 GeV).  This is a
  documented convention, not a fit to lattice QCD: between ~0.1 and ~1 GeV it is only
  indicative (tens of per cent; locally up to a factor ~1.5 near T_c, since an ideal
  gluon-quark gas overestimates the lattice pressure there).  We could not compare to
  the lattice tables (e.g. Saikawa & Shirai 2018, arXiv:1803.01038; Borsanyi et al.
  2016, arXiv:1606.07494) here: users who need that accuracy load such a table with
  :func:`load_table`;
* neutrinos decouple while e+- are fully relativistic (instantaneous decoupling):
  (T_nu/T)^3 = g_s,(gamma+e)(T) / (11/2), which gives T_nu/T = (4/11)^{1/3} today and
  the N_eff = 3 plateaus 3.363 (g_*) and 3.909 (g_*s).  Non-instantaneous decoupling
  (N_eff = 3.044) is not part of g_*(T).

Plateaus reproduced (counting, common practice): 106.75 (all SM), 10.75 (gamma, e+-, 3 nu),
3.363 / 3.909 today.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import integrate

from scan.errors import InputFileError

#: The packaged Saikawa & Shirai 2018 table.
SAIKAWA_SHIRAI_FILE: Path = Path(__file__).with_name("data") / "gstar_saikawa_shirai_2018.csv"

#: Range of the built-in table [GeV].
T_MIN_GEV: float = 1e-6
T_MAX_GEV: float = 1e4
#: QCD switch temperature [GeV] and width (in ln T) of the built-in blend.
T_QCD_GEV: float = 0.17
QCD_WIDTH: float = 0.15

# (name, mass [GeV], internal dof incl. antiparticles, +1 boson / -1 fermion); PDG values.
_EW_AND_LEPTONS = (
    ("photon", 0.0, 2, +1), ("W", 80.37, 6, +1), ("Z", 91.19, 3, +1), ("H", 125.25, 1, +1),
    ("e", 0.000511, 4, -1), ("mu", 0.10566, 4, -1), ("tau", 1.777, 4, -1),
)
_QUARK_GLUON = (
    ("gluon", 0.0, 16, +1), ("u", 0.0022, 12, -1), ("d", 0.0047, 12, -1),
    ("s", 0.095, 12, -1), ("c", 1.27, 12, -1), ("b", 4.18, 12, -1), ("t", 172.7, 12, -1),
)
_HADRONS = (
    ("pi+-", 0.13957, 2, +1), ("pi0", 0.13498, 1, +1), ("K", 0.4957, 4, +1),
    ("eta", 0.5479, 1, +1), ("rho", 0.7753, 9, +1), ("omega", 0.7827, 3, +1),
    ("K*", 0.8955, 12, +1), ("eta'", 0.9578, 1, +1), ("phi", 1.0195, 3, +1),
    ("N", 0.9389, 8, -1),
)
_N_NU_DOF = 6  # 3 flavours x (nu + anti-nu), one helicity each


def _one_particle(x: float, stat: int) -> tuple[float, float]:
    """(g_rho, g_s) per internal dof of a free gas with m/T = x (boson +1, fermion -1)."""
    if x > 60.0:
        return 0.0, 0.0

    def occ(e: float) -> float:
        return 1.0 / (math.exp(e) - stat) if e < 700 else 0.0

    rho = integrate.quad(lambda e: e * e * math.sqrt(max(e * e - x * x, 0.0)) * occ(e),
                         x, x + 80.0, limit=200)[0] / (2 * math.pi**2)
    p = integrate.quad(lambda e: max(e * e - x * x, 0.0)**1.5 * occ(e),
                       x, x + 80.0, limit=200)[0] / (6 * math.pi**2)
    return rho * 30 / math.pi**2, (rho + p) * 45 / (2 * math.pi**2)


@functools.lru_cache(maxsize=1)
def _one_particle_tables() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """ln x grid and (g_rho, g_s) per dof for bosons and fermions on it."""
    lnx = np.linspace(math.log(1e-5), math.log(60.0), 500)
    vals = np.array([[*_one_particle(math.exp(v), +1), *_one_particle(math.exp(v), -1)]
                     for v in lnx])
    return lnx, vals[:, 0], vals[:, 1], vals[:, 2], vals[:, 3]


def _species_sum(T: np.ndarray, species) -> tuple[np.ndarray, np.ndarray]:
    """Sum of (g_rho, g_s) over ``species`` at photon temperature T [GeV]."""
    lnx, br, bs, fr, fs = _one_particle_tables()
    g_rho, g_s = np.zeros_like(T), np.zeros_like(T)
    for _name, mass, dof, stat in species:
        if mass == 0.0:
            r, s = (1.0, 1.0) if stat > 0 else (7 / 8, 7 / 8)
            g_rho, g_s = g_rho + dof * r, g_s + dof * s
            continue
        lx = np.log(mass / T)
        tab_r, tab_s = (br, bs) if stat > 0 else (fr, fs)
        r = np.interp(lx, lnx, tab_r, right=0.0)
        s = np.interp(lx, lnx, tab_s, right=0.0)
        g_rho, g_s = g_rho + dof * r, g_s + dof * s
    return g_rho, g_s


def ideal_gas_sm(T_GeV: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """g_*(T) and g_*s(T) of our ideal-gas Standard Model (see module docstring).

    Parameters
    ----------
    T_GeV : array_like [GeV]
        Photon temperature.

    Returns
    -------
    g_rho, g_s : ndarray [1]
    """
    T = np.atleast_1d(np.asarray(T_GeV, dtype=float))
    gr_ew, gs_ew = _species_sum(T, _EW_AND_LEPTONS)
    gr_q, gs_q = _species_sum(T, _QUARK_GLUON)
    gr_h, gs_h = _species_sum(T, _HADRONS)
    w = 0.5 * (1.0 + np.tanh(np.log(T / T_QCD_GEV) / QCD_WIDTH))
    gr = gr_ew + w * gr_q + (1 - w) * gr_h
    gs = gs_ew + w * gs_q + (1 - w) * gs_h
    gr_ge, gs_ge = _species_sum(T, _EW_AND_LEPTONS[:1] + _EW_AND_LEPTONS[4:5])
    ratio3 = np.minimum(gs_ge / 5.5, 1.0)          # (T_nu / T)^3
    gr = gr + (7 / 8) * _N_NU_DOF * ratio3**(4 / 3)
    gs = gs + (7 / 8) * _N_NU_DOF * ratio3
    return gr, gs


@dataclass(frozen=True)
class DofTable:
    """A tabulated g_*(T), g_*s(T), interpolated linearly in ln T (clamped at the ends).

    Attributes
    ----------
    T_GeV : ndarray [GeV]
        Increasing temperatures.
    g_rho, g_s : ndarray [1]
        Energy and entropy degrees of freedom.
    source : str
        Where the numbers come from.
    """

    T_GeV: np.ndarray
    g_rho: np.ndarray
    g_s: np.ndarray
    source: str

    def rho(self, T_GeV) -> np.ndarray:
        """g_*(T) [1] at temperatures ``T_GeV`` [GeV]; end values outside the table."""
        return np.interp(np.log(T_GeV), np.log(self.T_GeV), self.g_rho)

    def s(self, T_GeV) -> np.ndarray:
        """g_*s(T) [1] at temperatures ``T_GeV`` [GeV]; end values outside the table."""
        return np.interp(np.log(T_GeV), np.log(self.T_GeV), self.g_s)


@functools.lru_cache(maxsize=1)
def standard_model() -> DofTable:
    """The built-in ideal-gas SM table on 1 keV - 10 TeV (computed once, ~0.5 s)."""
    T = np.geomspace(T_MIN_GEV, T_MAX_GEV, 700)
    gr, gs = ideal_gas_sm(T)
    return DofTable(T, gr, gs, "zetascan ideal-gas SM, tanh QCD blend at 0.17 GeV")


@functools.lru_cache(maxsize=1)
def saikawa_shirai_2018() -> DofTable:
    """The Saikawa & Shirai 2018 table (arXiv:1803.01038), read once from the package."""
    table = load_table(SAIKAWA_SHIRAI_FILE)
    return DofTable(table.T_GeV, table.g_rho, table.g_s,
                    "Saikawa & Shirai 2018 (arXiv:1803.01038) published table")


#: The built-in tables by name; the first is the default.
TABLES = {"saikawa-shirai-2018": saikawa_shirai_2018, "ideal-gas": standard_model}
DEFAULT_TABLE: str = "saikawa-shirai-2018"


def default_table() -> DofTable:
    """The default g_*(T) table (:data:`DEFAULT_TABLE`)."""
    return TABLES[DEFAULT_TABLE]()


def load_table(path: str | Path) -> DofTable:
    """Read a user g_* table: CSV columns temperature [GeV], g_rho, g_s.

    Lines starting with ``#`` and a header line (first non-comment line that is not
    numeric) are skipped.  Temperatures must be positive and strictly increasing,
    g values positive and finite; at least two rows.

    Raises
    ------
    scan.errors.InputFileError
        Naming the offending line.
    """
    path = str(path)
    try:
        lines = Path(path).read_text().splitlines()
    except OSError as err:
        raise InputFileError(path, f"cannot read ({err.strerror})") from None
    rows, seen_data = [], False
    for number, line in enumerate(lines, start=1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        fields = [f.strip() for f in text.replace(",", " ").split()]
        try:
            values = [float(f) for f in fields]
        except ValueError:
            if not seen_data:
                seen_data = True  # header
                continue
            raise InputFileError(path, f"not a number in '{text}'", line=number) from None
        seen_data = True
        _check_dof_row(path, number, values)
        if rows and values[0] <= rows[-1][1][0]:
            raise InputFileError(path, "temperatures must increase strictly", line=number,
                                 column="temperature")
        rows.append((number, values))
    if len(rows) < 2:
        raise InputFileError(path, "need at least two rows (temperature [GeV], g_rho, g_s)")
    data = np.array([v for _, v in rows])
    return DofTable(data[:, 0], data[:, 1], data[:, 2], f"user table {path}")


def _check_dof_row(path: str, number: int, values: list[float]) -> None:
    """Validate one g_* table row (3 finite numbers, all positive)."""
    if len(values) != 3:
        raise InputFileError(path, f"expected 3 columns (temperature [GeV], g_rho, g_s), "
                             f"found {len(values)}", line=number)
    for name, value in zip(("temperature", "g_rho", "g_s"), values):
        if not math.isfinite(value) or value <= 0:
            raise InputFileError(path, f"{name} must be positive and finite, got {value}",
                                 line=number, column=name)
