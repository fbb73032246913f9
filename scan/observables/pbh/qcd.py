"""The collapse threshold across the QCD crossover: C_th follows the equation of state.

The softer equation of state w(T) < 1/3 of the QCD crossover lowers the pressure that
resists collapse, so the threshold dips for horizon masses around a solar mass (Musco,
Jedamzik & Young 2024, PRD 109, 083506, arXiv:2303.07980: PBH abundances on the QCD scale
enhanced by ~1e3 for nearly scale-invariant spectra, mass function peaked at 1.9 M_sun;
Franciolini, Musco, Pani & Urbano 2022, arXiv:2209.05959).  Our opt-in convention
``harada-scaled`` (``[observables] qcd_threshold``) is a simplified stand-in for their
simulations: the configured radiation-era threshold scaled by the Harada, Yoo & Kohri 2013
(arXiv:1309.4201) threshold at the equation of state of each formation epoch,

    C_th(M_H) = C_th * delta_c(w(T(M_H))) / delta_c(1/3),

with w from the run's g_* table through the thermodynamic identity (zero chemical
potential) rho = (pi^2/30) g_rho T^4, s = (rho + p)/T = (2 pi^2/45) g_s T^3, i.e.
w = p/rho = (4/3) g_s/g_rho - 1.  Below T = 3 MeV (neutrino decoupling: species at
different temperatures, where the identity does not hold) w = 1/3 is used.

The critical-collapse exponent also depends on the equation of state: for a perfect fluid
p = w rho the critical (Evans-Coleman) solution and its one growing mode give gamma_c(w)
(Koike, Hara & Adachi 1995, gr-qc/9503007; Maison 1996, Phys. Lett. B 366, 82, "non-
universality of critical behaviour", arXiv id gr-qc/9504008 from memory).
The opt-in ``gamma-of-w`` (``[observables] qcd_collapse``) scales the configured gamma_c per
formation epoch by gamma(w)/gamma(1/3), with gamma(w) piecewise linear in w through the
published exponents we could confirm:

* w -> 0: 0.10567, the Newtonian isothermal critical exponent (the one unstable mode of
  Hunter's (A) solution, Maeda & Harada 2001, gr-qc/0109095, abstract; measured as 0.11
  by Harada, Maeda & Semelin 2003, PRD 67, 084003, gr-qc/0210027, abstract); that the
  relativistic family tends to it as w -> 0 is from memory;
* w = 1/3: 0.3558 (Koike, Hara & Adachi 1995, digits from memory; 0.36 measured by Evans
  & Coleman 1994, gr-qc/9402041; 0.356-0.357 in cosmological PBH simulations, Musco &
  Miller 2013, arXiv:1201.2379, and Musco, Miller & Polnarev 2009, arXiv:0811.1452);
* w = 1: 0.94 (stiff fluid, Brady et al. 2002, CQG 19, 6359, gr-qc/0207096, abstract).

Between them the straight line is our interpolation, not a published table (Maison 1996
computed gamma(w) for many w up to 0.89, Gundlach & Martin-Garcia 2007, Living Rev. Rel.
10, 5, but we could not read his values).  K is kept at the
configured value: we found no published K(w).  Both limitations are printed with results.
The crossover only reaches w ~ 0.23 (the softest g_* table row), inside 1/9 < w < 0.49
where the spherical critical solution has one growing mode and no non-spherical ones
(Gundlach 1999, gr-qc/9906124, abstract); the w -> 0 anchor only shapes the line.

Units: masses [M_sun], T [GeV], w and thresholds [1].
"""
from __future__ import annotations

import numpy as np

from scan.errors import ConfigError
from scan.observables import cosmo
from scan.observables.pbh.conventions import PBHConventions

QCD_THRESHOLDS: tuple[str, ...] = ("off", "harada-scaled")
QCD_COLLAPSES: tuple[str, ...] = ("off", "gamma-of-w")
#: Equations of state [1] and perfect-fluid critical exponents [1] (sources above).
GAMMA_ANCHOR_W: tuple[float, ...] = (0.0, 1 / 3, 1.0)
GAMMA_ANCHOR: tuple[float, ...] = (0.10567, 0.3558, 0.94)
#: Below this temperature [GeV] w = 1/3 (neutrinos decouple: g_s/g_rho no longer gives w).
T_DECOUPLING_GEV: float = 3e-3


def equation_of_state(T_GeV, dof: cosmo.Dof = None) -> np.ndarray:
    """w(T) = (4/3) g_s/g_rho - 1 [1] of the g_* table (1/3 below 3 MeV)."""
    T = np.asarray(T_GeV, dtype=float)
    g, gs = cosmo._dof_at(dof, T)
    return np.where(T > T_DECOUPLING_GEV, 4 / 3 * gs / g - 1, 1 / 3)


def delta_c_of_w(w) -> np.ndarray:
    """Harada, Yoo & Kohri 2013 threshold [3(1+w)/(5+3w)] sin^2(pi sqrt(w)/(1+3w)) [1]."""
    w = np.asarray(w, dtype=float)
    return 3 * (1 + w) / (5 + 3 * w) * np.sin(np.pi * np.sqrt(w) / (1 + 3 * w))**2


def epoch_thresholds(M_H_msun, threshold: float, dof: cosmo.Dof = None) -> np.ndarray:
    """C_th(M_H) [1] of ``harada-scaled`` for horizon masses ``M_H_msun`` [M_sun]."""
    T = cosmo.temperature_of_horizon_mass(np.asarray(M_H_msun, dtype=float), dof)
    return threshold * delta_c_of_w(equation_of_state(T, dof)) / delta_c_of_w(1 / 3)


def critical_exponent_of_w(w) -> np.ndarray:
    """Perfect-fluid critical exponent gamma(w) [1], piecewise linear through the anchors."""
    return np.interp(np.asarray(w, dtype=float), GAMMA_ANCHOR_W, GAMMA_ANCHOR)


def epoch_exponents(M_H_msun, gamma_c: float, dof: cosmo.Dof = None) -> np.ndarray:
    """gamma_c(M_H) [1] of ``gamma-of-w`` for horizon masses ``M_H_msun`` [M_sun]."""
    T = cosmo.temperature_of_horizon_mass(np.asarray(M_H_msun, dtype=float), dof)
    return gamma_c * critical_exponent_of_w(equation_of_state(T, dof)) \
        / critical_exponent_of_w(1 / 3)


def check_collapse(conv: PBHConventions, qcd_collapse: str) -> None:
    """Refuse an unknown ``qcd_collapse`` or one the conventions cannot use (ConfigError)."""
    if qcd_collapse not in QCD_COLLAPSES:
        raise ConfigError("[observables]", "qcd_collapse", f"'{qcd_collapse}' is not one of "
                          f"{QCD_COLLAPSES}")
    if qcd_collapse != "off" and (conv.criterion, conv.mass_function) != ("compaction",
                                                                          "critical"):
        raise ConfigError("[observables]", "qcd_collapse", f"'{qcd_collapse}' needs "
                          "criterion = 'compaction' and mass_function = 'critical' (got "
                          f"'{conv.criterion}', '{conv.mass_function}')",
                          "the exponent enters through critical collapse")


def collapse_note(M_H: np.ndarray, exponents: np.ndarray, conv: PBHConventions) -> str:
    """One line on the QCD-era critical exponent (printed with the result)."""
    i = int(np.argmin(exponents))
    return (f"QCD-era critical collapse (gamma-of-w): gamma_c falls from {conv.gamma_c:g} to "
            f"{exponents[i]:.4g} at M_H = {M_H[i]:.3g} M_sun; gamma(w) is interpolated "
            "linearly between published perfect-fluid exponents (w -> 0 and w = 1/3), not "
            f"a published table, and K stays {conv.K:g} (no published K(w) found)")


def qcd_note(M_H: np.ndarray, thresholds: np.ndarray, threshold: float) -> str:
    """One line on the QCD-era threshold (printed with the result)."""
    i = int(np.argmin(thresholds))
    return (f"QCD-era threshold (harada-scaled): C_th falls from {threshold:g} to "
            f"{thresholds[i]:.4g} at M_H = {M_H[i]:.3g} M_sun (w from the g_* table); "
            f"a lower threshold raises f_PBH there by orders of magnitude")


#: Horizon masses [M_sun] on which a run's QCD-era notes are evaluated (0.01 dex; the
#: crossover's w < 1/3 lies at 0.1-1 GeV, M_H ~ 0.1-30 M_sun).
NOTE_MASSES: np.ndarray = np.geomspace(1e-4, 1e4, 801)


def qcd_notes(conv: PBHConventions, qcd_threshold: str, qcd_collapse: str,
              dof: cosmo.Dof = None) -> tuple[str, ...]:
    """The lines :func:`qcd_note` and :func:`collapse_note` print for a single spectrum,
    over the horizon masses ``NOTE_MASSES`` (for runs: sample, grid, verify)."""
    notes = ()
    if qcd_threshold != "off":
        notes += (qcd_note(NOTE_MASSES, epoch_thresholds(NOTE_MASSES, conv.threshold, dof),
                           conv.threshold),)
    if qcd_collapse != "off":
        notes += (collapse_note(NOTE_MASSES, epoch_exponents(NOTE_MASSES, conv.gamma_c, dof),
                                conv),)
    return notes


def qcd_lines(attrs: dict) -> list[str]:
    """The QCD-era conventions recorded in a run file's attributes (``qcd_threshold``,
    ``qcd_collapse``, ``qcd_notes``), with their notes, as summary lines (none when both
    are 'off' or not recorded)."""
    on = {k: str(attrs[k]) for k in ("qcd_threshold", "qcd_collapse")
          if str(attrs.get(k, "off")) != "off"}
    if not on:
        return []
    sampled = ("; a sampled pbh.threshold is the radiation-era C_th the epochs scale"
               if "qcd_threshold" in on else "")
    lines = ["PBH abundance across the QCD crossover: " + ", ".join(
        f"{k} = '{v}'" for k, v in on.items()) + f" (per formation epoch{sampled})"]
    return lines + [f"  {note}" for note in str(attrs.get("qcd_notes", "")).splitlines()]
