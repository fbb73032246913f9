"""zeta = F(zeta_G) from the model: non-perturbative delta-N on the exact background.

delta-N (Sasaki & Stewart 1996, astro-ph/9507001; Lyth, Malik & Sasaki 2005,
astro-ph/0411220): on super-horizon scales the curvature perturbation on a uniform-density
slice equals the perturbation of the e-folds from an initial flat slice,
zeta = N(chi + dchi, pi) - N(chi, pi).  Here N is counted by the exact background solver
(:func:`scan.background.solve_background`, same equations as the spectrum) from a flat
slice at e-fold ``N_s`` (before the non-attractor phase: the exit of the peak scale) to the
field value ``phi_f`` the reference trajectory reaches ``N_f`` (after the phase, back on the
slow-roll attractor, where all trajectories coincide and a fixed field value is a
uniform-density slice).  The displacement is in the canonical field chi at fixed canonical
velocity pi = dchi/dN (the field fluctuation of a mode exiting the horizon; its velocity
perturbation decays).  zeta_G = N_chi dchi is the linear (Gaussian) part, so
F(zeta_G) = Delta N(zeta_G / N_chi): the whole non-linear map, not its expansion.

Units: fields [M_p], e-folds [1]; zeta, zeta_G [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from scan.background import Background, solve_background
from scan.background.pivot import exit_efold
from scan.models import Model
from scan.observables.pbh.zeta_map import ZetaMap

#: Solver tolerance of each trajectory: the e-fold count is good to ~1e-9.
RTOL: float = 1e-11


@dataclass(frozen=True)
class DeltaNResult:
    """The delta-N map of one model at one scale.

    Attributes
    ----------
    zeta_map : ZetaMap
        ``model`` map: zeta_G and zeta = F(zeta_G) on the computed points.
    n_chi : float [1/M_p]
        dN/dchi at the start (zeta_G = n_chi dchi).
    f_nl : float [1]
        (5/6) N_chichi / N_chi^2 from a polynomial fit of the central points.
    notes : tuple of str
        Trajectories that never reach the end slice (the field stops: zeta unbounded).
    """

    zeta_map: ZetaMap
    n_chi: float
    f_nl: float
    notes: tuple[str, ...] = ()


def efolds_to_field(model: Model, phi0: float, pi0: float, phi_f: float, n_guess: float,
                    rtol: float = RTOL) -> float:
    """E-folds [1] from (phi0, pi0 = dchi/dN) to the first crossing of ``phi_f``.

    inf if the field stops before ``phi_f``; NaN if inflation ends first.
    """
    n_max = max(2.0 * n_guess, 1.0)
    for _ in range(6):
        bg = solve_background(model, phi_start=phi0,
                              velocity_start=pi0 / math.sqrt(float(model.K(phi0))),
                              n_max=n_max, rtol=rtol, allow_no_end=True)
        n = _crossing(bg, phi0, phi_f)
        if n is not None:
            return n
        if not bg.valid and "stops" in bg.reason:
            return math.inf
        if math.isfinite(bg.N_end):
            return math.nan
        n_max *= 2.0
    return math.inf


def _crossing(bg: Background, phi0: float, phi_f: float) -> float | None:
    """The first e-fold where phi passes ``phi_f`` (None if it does not)."""
    if not bg.segments:
        return None
    side = np.sign(bg.phi - phi_f) != np.sign(phi0 - phi_f)
    hits = np.flatnonzero(side)
    if not hits.size:
        return None
    i = int(hits[0])
    lo, hi = float(bg.N[max(i - 1, 0)]), float(bg.N[i])
    if bg.phi[i] == phi_f or lo == hi:
        return hi
    return brentq(lambda n: float(bg.evaluate(n).phi[0]) - phi_f, lo, hi, xtol=1e-14,
                  rtol=1e-15)


def _phi_at(model: Model, phi_s: float, dchi: float) -> float:
    """phi with chi(phi) - chi(phi_s) = dchi (no pole between: K finite).

    The root is bracketed from phi_s outwards in steps that double from dchi/sqrt(K(phi_s))
    (halved where chi is not finite: past a pole), so a K that grows or falls by any factor
    between phi_s and the root is bracketed."""
    if dchi == 0.0:
        return phi_s
    sign = math.copysign(1.0, dchi)

    def excess(p: float) -> float:
        return float(model.canonical_field(p, phi_s)) - dchi

    step = dchi / math.sqrt(float(model.K(phi_s)))
    a, b = phi_s, phi_s + step
    for _ in range(200):
        gb = excess(b)
        if math.isfinite(gb) and gb * sign >= 0:
            break
        if math.isfinite(gb):
            a, step = b, 2.0 * step
        else:
            step *= 0.5
        b = a + step
    return brentq(excess, min(a, b), max(a, b), xtol=1e-15, rtol=1e-15)


def delta_n_map(model: Model, phi_s: float, pi_s: float, phi_f: float, n_f: float,
                sigma: float, *, span: float = 6.0, n_points: int = 41,
                rtol: float = RTOL) -> DeltaNResult:
    """zeta = F(zeta_G) on |zeta_G| <= ``span`` ``sigma`` by delta-N.

    Parameters
    ----------
    model : Model
    phi_s, pi_s : float [M_p]
        Field and canonical velocity dchi/dN on the initial flat slice.
    phi_f : float [M_p]
        The end slice (a field value on the attractor after the non-attractor phase).
    n_f : float [1]
        E-folds of the reference trajectory to ``phi_f`` (a guess for the solver span).
    sigma : float [1]
        Standard deviation of zeta_G the grid is scaled to (e.g. sqrt(P_peak)).
    span, n_points : float, int
        Grid half-width in units of ``sigma`` and number of points (odd: 0 included).

    Returns
    -------
    DeltaNResult
    """
    def n_of(dchi: float) -> float:
        return efolds_to_field(model, _phi_at(model, phi_s, dchi), pi_s, phi_f, n_f, rtol)

    n0 = n_of(0.0)
    h = 1e-3 * sigma * abs(pi_s)                  # N_chi ~ 1/|pi| in slow roll
    n_chi0 = (n_of(h) - n_of(-h)) / (2 * h)
    zg_grid = np.linspace(-span * sigma, span * sigma, n_points | 1)
    dchi = zg_grid / n_chi0
    dn = np.array([n_of(float(d)) - n0 if d != 0 else 0.0 for d in dchi])
    n_chi, n_chichi = _fit_derivatives(dchi, dn, sigma / abs(n_chi0))
    finite = np.isfinite(dn)
    lost = int((~finite).sum())
    note = (f"delta-N: {lost} of {dn.size} trajectories never reach the end slice (the "
            "field stops; zeta unbounded there); the map is continued linearly")
    notes = (note,) if lost else ()
    keep = _contiguous_finite(finite, dn.size // 2)
    f_nl = 5 / 6 * n_chichi / n_chi**2
    zmap = ZetaMap("model", f_nl=f_nl, zeta_g=n_chi * dchi[keep], zeta=dn[keep])
    return DeltaNResult(zmap, n_chi, f_nl, notes)


def _fit_derivatives(x: np.ndarray, y: np.ndarray, scale: float) -> tuple[float, float]:
    """N' and N'' at 0 from a degree-6 polynomial through the points with |x| <= 2 scale."""
    sel = (np.abs(x) <= 2.0 * scale * (1 + 1e-12)) & np.isfinite(y)
    coef = np.polynomial.polynomial.polyfit(x[sel] / scale, y[sel], min(6, sel.sum() - 1))
    return coef[1] / scale, 2 * coef[2] / scale**2


def _contiguous_finite(finite: np.ndarray, centre: int) -> slice:
    """The longest run of finite values around ``centre``."""
    lo = centre
    while lo > 0 and finite[lo - 1]:
        lo -= 1
    hi = centre
    while hi < finite.size - 1 and finite[hi + 1]:
        hi += 1
    return slice(lo, hi + 1)


#: E-folds after the last ultra-slow-roll window where the end slice is put (the
#: non-attractor velocity has decayed by e^{-3 x 5} ~ 3e-7 by then).
SETTLE_EFOLDS: float = 5.0


def peak_map(bg: Background, k_peak: float, P_peak: float, N_star: float,
             k_star: float, n_points: int = 41) -> DeltaNResult:
    """The delta-N map at the peak scale of a solved model.

    Initial flat slice: the exit of ``k_peak`` [Mpc^-1] (located from the pivot ``k_star``
    [Mpc^-1], which exits ``N_star`` e-folds before the end); end slice: the field value
    the reference trajectory reaches :data:`SETTLE_EFOLDS` after the last ultra-slow-roll
    window (or half an e-fold before the end of inflation, if earlier).  The grid spans
    6 sqrt(``P_peak``) either side with ``n_points`` trajectories.
    """
    N_pivot = bg.N_end - N_star
    N_s = exit_efold(bg, math.log(k_peak / k_star), N_pivot)
    after = max([c.N_usr_end for c in bg.crossings] + [N_s])
    N_f = min(after + SETTLE_EFOLDS, bg.N_end - 0.5)
    start, end = bg.evaluate(N_s), bg.evaluate(N_f)
    return delta_n_map(bg.model, float(start.phi[0]), float(start.dchi_dN[0]),
                       float(end.phi[0]), N_f - N_s, math.sqrt(P_peak), n_points=n_points)
