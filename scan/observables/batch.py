"""Omega_GW h^2 and f_PBH of many emulated spectra at once, on grids shared by all of them.

Used by the posterior (every walker in one call) and by the surrogate's validation
report (:class:`PeakObservables`), so both see the same numbers.  Each emulated
spectrum is log10 P on ``x = ln(k/k_peak)`` around its own peak (0 outside it: compare
like with like, the validation feeds the exact hold-out spectra through the same grid);
everything is put on grids common to all spectra:

* Omega_GW: the radiation-era integral depends on k only through P(ku) P(kv), so one
  plan on the relative table ``e^x`` serves every walker (output at ``e^x_out``): the
  quadratic form of :mod:`scan.observables.quadratic` (one matrix product for all walkers;
  within 2 % of :func:`scan.observables.sigw.plan_sigw` at the peak, 6 % in the wings, ~10x faster).
  With the QCD-era kernel (``sigw_kernel = "qcd-fluid"``) each walker's outputs combine
  the forms of the kernel table's rows at their re-entry temperatures
  (:mod:`scan.observables.quadratic_qcd`).
  ln Omega is then interpolated (linear in ln k, exact at the nodes) onto one absolute
  ln k grid of the same spacing, and the transfer to today is applied there; outside a
  walker's window Omega is 0 (below any curve).
* f_PBH: the abundance depends on the absolute horizon mass (g_*), so log10 P is
  interpolated onto one absolute ln k table (only the ~span/step points of each walker's
  window are evaluated, :func:`spectra_on_table`; the rest is 0) and one
  :func:`scan.observables.pbh.plan_pbh` evaluates the stack (with the tabulated mass-weighted beta of
  :mod:`scan.observables.pbh.tables`; an optional per-walker threshold goes through a threshold plan).

All functions are pure; :class:`BatchPlan` holds the precomputed plans.
"""
from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from scan.observables import cosmo
from scan.observables.pbh import plan_pbh
from scan.observables.quadratic import plan_quadratic
from scan.observables.quadratic_qcd import RowQuadraticPlan, plan_quadratic_qcd
from scan.observables.record import Observables
from scan.observables.window import spectra_on_table

#: Spacing of the absolute ln k table of the f_PBH plan [e-folds of k].
LNK_STEP = 0.05
_FLOOR = 1e-300


def with_collapse_coefficient(batch: Observables, ratio: np.ndarray) -> Observables:
    """The PBHs of ``batch`` for critical-collapse coefficients K = ratio * K_0.

    With M = K M_H (C - C_th)^gamma_c (Niemeyer & Jedamzik 1998, astro-ph/9709072) K
    enters only through M/K, and the mass-weighted abundance is proportional to K, so
    exactly f_K(M) = (K/K_0) f_K0(M K_0/K) (d f / d ln M) and f_total,K = (K/K_0)
    f_total,K0: each walker's f scales by ``ratio`` on masses shifted by ln ``ratio``.

    Parameters
    ----------
    batch : Observables
        Computed with K_0 (critical collapse), masses unshifted.
    ratio : ndarray, shape (m,) [1]
        K / K_0 per walker (positive).

    Returns
    -------
    Observables
    """
    ratio = np.asarray(ratio, dtype=float)
    if batch.ln_mass_shift is not None:
        raise ValueError("the batch's masses are shifted already")
    gaussian = batch.f_pbh_total_gaussian
    return batch.replace(f_pbh_per_lnm=batch.f_pbh_per_lnm * ratio[:, None],
                         f_pbh_total=batch.f_pbh_total * ratio, ln_mass_shift=np.log(ratio),
                         f_pbh_total_gaussian=None if gaussian is None else gaussian * ratio)


@dataclasses.dataclass(frozen=True, eq=False)
class BatchPlan:
    """Plans shared by every call (built once per process by :func:`plan_batch`)."""

    x: np.ndarray
    x_out: np.ndarray
    sigw: Any
    lnk_gw: np.ndarray
    f_gw: np.ndarray
    transfer_gw: np.ndarray
    lnk_table: np.ndarray
    pbh: Any
    peak_range: tuple[float, float]


def plan_batch(x: np.ndarray, peak_range: tuple[float, float], conventions, *,
               n_out: int = 64, n_mass: int = 64, dof=None, n_eff: float | None = None,
               pbh_plan=None, sigw_kernel: str = "radiation") -> BatchPlan:
    """Plan Omega_GW and f_PBH for spectra on ``x`` with ln k_peak in ``peak_range``.

    Parameters
    ----------
    x : ndarray
        Shape grid ln(k/k_peak) of the emulator.
    peak_range : (float, float)
        Range of ln k_peak [ln(Mpc^-1)] the absolute grids must cover.
    conventions : PBHConventions
    n_out : int
        Output wavenumbers of Omega_GW on the relative grid (``x[0] .. x[-1] + ln 2``).
    n_mass : int
        Masses of d f_PBH / d ln M.
    dof, n_eff
        g_*(T) table and N_eff (see :mod:`scan.observables.cosmo`).
    pbh_plan : callable, optional
        ``pbh_plan(k_table, masses) -> plan`` with ``evaluate(P_stack[, thresholds])``
        (default: :func:`scan.observables.pbh.plan_pbh` with ``conventions``).
    sigw_kernel : str
        ``"radiation"`` (one scale-free quadratic form) or ``"qcd-fluid"`` (the tabulated
        QCD-era kernel at each walker's re-entry temperatures: one form per table row,
        :mod:`scan.observables.quadratic_qcd`).

    Returns
    -------
    BatchPlan
    """

    n_eff = cosmo.N_EFF_DEFAULT if n_eff is None else n_eff
    x = np.asarray(x, float)
    x_out = np.linspace(x[0], x[-1] + math.log(2.0), n_out)
    if sigw_kernel == "qcd-fluid":
        sigw = plan_quadratic_qcd(np.exp(x), np.exp(x_out), dof=dof)
    elif sigw_kernel == "radiation":
        sigw = plan_quadratic(np.exp(x), np.exp(x_out))
    else:
        raise ValueError(f"sigw_kernel must be 'radiation' or 'qcd-fluid', got "
                         f"{sigw_kernel!r}")
    lo, hi = peak_range
    step = float(x_out[1] - x_out[0])
    lnk_gw = np.arange(lo + x_out[0], hi + x_out[-1] + step, step)
    lnk_table = np.arange(math.floor((lo + x[0]) / LNK_STEP) * LNK_STEP,
                          hi + x[-1] + LNK_STEP, LNK_STEP)
    k_table = np.exp(lnk_table)
    m_hi = float(cosmo.horizon_mass_msun(k_table[0], dof, n_eff))
    m_lo = float(cosmo.horizon_mass_msun(k_table[-1], dof, n_eff)) * 1e-3
    masses = np.geomspace(m_lo, m_hi, n_mass)
    if pbh_plan is None:
        pbh = plan_pbh(k_table, masses, conventions, dof=dof, n_eff=n_eff)
    else:
        pbh = pbh_plan(k_table, masses)

    return BatchPlan(x=x, x_out=x_out, sigw=sigw, lnk_gw=lnk_gw,
                     f_gw=np.asarray(cosmo.k_to_f(np.exp(lnk_gw))),
                     transfer_gw=np.asarray(cosmo.gw_transfer_h2(np.exp(lnk_gw), dof, n_eff)),
                     lnk_table=lnk_table, pbh=pbh, peak_range=(float(lo), float(hi)))


def batch_observables(plan: BatchPlan, ln_k_peak: np.ndarray, log10_P_peak: np.ndarray,
                      shape: np.ndarray, n_s: np.ndarray, r: np.ndarray, N_star: np.ndarray,
                      ln_1e10_as: float, thresholds: np.ndarray | None = None,
                      zeta_map=None) -> Observables:
    """Omega_GW,0 h^2 and f_PBH of m emulated spectra, on the plan's shared grids.

    Parameters
    ----------
    plan : BatchPlan
    ln_k_peak, log10_P_peak : ndarray, shape (m,)
        Peak position [ln(Mpc^-1)] and height [dex]; every ln k_peak must lie in
        ``plan.peak_range``.
    shape : ndarray, shape (m, n_x)
        log10 P - log10 P_peak on ``plan.x`` [dex].
    n_s, r, N_star : ndarray, shape (m,)
    ln_1e10_as : float
    thresholds : ndarray, shape (m,), optional
        Per-walker collapse thresholds (needs a threshold-aware ``plan.pbh``).
    zeta_map : ZetaMap, optional
        Each spectrum's zeta = F(zeta_G) (parameters arrays (m,); needs the ``model``
        plan, :mod:`scan.observables.pbh.ng_model_plan`).

    Returns
    -------
    Observables
    """
    ln_k_peak = np.asarray(ln_k_peak, float)
    log10_p = np.asarray(log10_P_peak, float)[:, None] + np.asarray(shape, float)
    omega, ln_k_top, omega_peak = gw_on_grids(plan, ln_k_peak, log10_p)
    pbh = pbh_on_table(plan, ln_k_peak, log10_p, thresholds, zeta_map)
    gaussian = getattr(pbh, "f_pbh_total_gaussian", None)
    return Observables(
        f_hz=plan.f_gw, omega_gw_h2=omega, m_msun=np.asarray(plan.pbh.M),
        f_pbh_per_lnm=np.atleast_2d(pbh.f_pbh), f_pbh_total=np.atleast_1d(pbh.f_pbh_total),
        n_s=np.asarray(n_s, float), r=np.asarray(r, float), N_star=np.asarray(N_star, float),
        ln_1e10_as=float(ln_1e10_as), k_peak=np.exp(ln_k_peak),
        P_peak=10.0 ** np.asarray(log10_P_peak, float),
        f_gw_peak=np.asarray(cosmo.k_to_f(np.exp(ln_k_top))), omega_gw_h2_peak=omega_peak,
        f_pbh_total_gaussian=None if gaussian is None else np.atleast_1d(gaussian))


def gw_on_grids(plan: BatchPlan, ln_k_peak: np.ndarray, log10_p: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Omega_GW,0 h^2 of m spectra on the shared frequency grid, and each one's peak.

    Parameters
    ----------
    plan : BatchPlan
    ln_k_peak : ndarray, shape (m,) [ln(Mpc^-1)]
    log10_p : ndarray, shape (m, n_x)
        log10 P_zeta on ``plan.x`` (relative to each peak).

    Returns
    -------
    omega : ndarray, shape (m, n_f) [1]
        On ``plan.f_gw``; 0 outside each spectrum's window.
    ln_k_top : ndarray, shape (m,) [ln(Mpc^-1)]
        Wavenumber of each maximum (parabola through the largest samples).
    omega_peak : ndarray, shape (m,) [1]
        Omega_GW,0 h^2 there.
    """
    P = 10.0 ** log10_p
    omega_rel = plan.sigw.omega_gw(P, ln_k_peak) if isinstance(plan.sigw, RowQuadraticPlan) \
        else plan.sigw.omega_gw(P)                                   # (m, n_out)
    ln_omega = np.log(np.maximum(omega_rel, _FLOOR))
    shifted = interp_uniform_shifted(plan.lnk_gw, ln_k_peak, plan.x_out, ln_omega)
    omega = plan.transfer_gw * np.exp(shifted)                       # 0 outside the window
    x_top, ln_top = parabolic_peak(plan.x_out, ln_omega)
    ln_k_top = ln_k_peak + x_top
    # the transfer varies slowly (g_* steps): interpolated on the shared grid in ln k
    omega_peak = np.exp(ln_top) * np.interp(ln_k_top, plan.lnk_gw, plan.transfer_gw)
    return omega, ln_k_top, omega_peak


def pbh_on_table(plan: BatchPlan, ln_k_peak: np.ndarray, log10_p: np.ndarray,
                 thresholds: np.ndarray | None = None, zeta_map=None):
    """f_PBH of m spectra: each put on the shared absolute ln k table, one plan for all.

    Parameters
    ----------
    plan : BatchPlan
    ln_k_peak : ndarray, shape (m,) [ln(Mpc^-1)]
    log10_p : ndarray, shape (m, n_x)
        log10 P_zeta on ``plan.x``; taken as 0 outside it.
    thresholds : ndarray, shape (m,), optional
        Per-spectrum collapse thresholds (needs a threshold-aware ``plan.pbh``).
    zeta_map : ZetaMap, optional
        Per-spectrum maps (needs the ``model`` plan).

    Returns
    -------
    PBHResult-like
        ``f_pbh`` (m, n_M) per ln M on ``plan.pbh.M`` [M_sun], ``f_pbh_total`` (m,).
    """
    p_table = spectra_on_table(plan.lnk_table, ln_k_peak, plan.x, log10_p)
    if zeta_map is not None:
        return plan.pbh.evaluate(p_table, thresholds, zeta_map=zeta_map)
    if thresholds is None:
        return plan.pbh.evaluate(p_table)
    return plan.pbh.evaluate(p_table, np.asarray(thresholds, float))


def interp_uniform_shifted(x: np.ndarray, shift: np.ndarray, grid: np.ndarray,
                           fp: np.ndarray) -> np.ndarray:
    """Row-wise linear interpolation at ``x`` of ``fp[i]`` given on ``shift[i] + grid``.

    Parameters
    ----------
    x : ndarray, shape (n,)
        Where to interpolate.
    shift : ndarray, shape (p,)
        Offset of each row's abscissae.
    grid : ndarray, shape (n_x,)
        Evenly spaced increasing abscissae common to all rows (before the shift).
    fp : ndarray, shape (p, n_x)

    Returns
    -------
    ndarray, shape (p, n)
        Linear interpolation (the bracketing index found arithmetically on the even
        grid); -inf outside each row's range.
    """
    step = (grid[-1] - grid[0]) / (grid.size - 1)
    t = (x[None, :] - shift[:, None] - grid[0]) / step
    inside = (t >= -1e-9) & (t <= grid.size - 1 + 1e-9)
    j = np.clip(np.floor(t).astype(np.intp), 0, grid.size - 2)
    frac = t - j
    flat = np.ascontiguousarray(fp, dtype=float).ravel()
    j += (np.arange(fp.shape[0]) * grid.size)[:, None]      # index into the flat rows
    f0 = flat[j]
    f1 = flat[j + 1]
    return np.where(inside, f0 + (f1 - f0) * frac, -np.inf)


def parabolic_peak(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Position and height of each row's maximum, refined by a parabola through the
    largest sample and its two neighbours (exact for a parabola; the sample itself at
    an end of the grid).

    Parameters
    ----------
    x : ndarray, shape (n,)
        Increasing abscissae (e.g. ln f).
    y : ndarray, shape (m, n) or (n,)
        Ordinates (e.g. ln Omega).

    Returns
    -------
    x_peak, y_peak : ndarray, shape (m,) (floats for one row)
    """
    y2 = np.atleast_2d(np.asarray(y, float))
    rows = np.arange(y2.shape[0])
    top = np.argmax(y2, axis=1)
    inner = (top > 0) & (top < x.size - 1)
    j = np.clip(top, 1, x.size - 2)
    x0, x1, x2 = x[j - 1], x[j], x[j + 1]
    y0, y1, yb = y2[rows, j - 1], y2[rows, j], y2[rows, j + 1]
    d01, d12 = (y1 - y0) / (x1 - x0), (yb - y1) / (x2 - x1)
    curv = (d12 - d01) / (x2 - x0)                      # half the second derivative
    ok = inner & (curv < 0) & np.isfinite(curv)
    with np.errstate(divide="ignore", invalid="ignore"):
        xv = 0.5 * (x0 + x1) - d01 / (2.0 * curv)
        yv = y0 + d01 * (xv - x0) + curv * (xv - x0) * (xv - x1)
    x_peak = np.where(ok, xv, x[top])
    y_peak = np.where(ok, yv, y2[rows, top])
    if np.ndim(y) == 1:
        return float(x_peak[0]), float(y_peak[0])
    return x_peak, y_peak
