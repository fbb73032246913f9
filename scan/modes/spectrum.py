"""The public entry point: P_zeta(k), P_t(k) and the CMB pivot from the exact modes."""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from scan.modes.features import find_dip, find_peak, refine
from scan.modes.grid import efolds_below, k_mpc, log_grid
from scan.modes.normalise import (K_STAR_MPC, LN10_AS_PLANCK18, STENCIL, PivotValues, as_from_ln10,
                                  iterate_normalisation, pivot_values)
from scan.modes.protocol import BackgroundLike
from scan.modes.settings import ModeSettings
from scan.modes.solver import ModeResult, solve_modes
from scan.modes.table import BackgroundTable, build_table

_NAN = float("nan")


@dataclass(frozen=True)
class Spectrum:
    """Exact scalar and tensor spectra, CMB-normalised.

    Attributes
    ----------
    k : ndarray
        Wavenumbers [Mpc^-1].
    P_zeta, P_tensor : ndarray
        Dimensionless power spectra at k (normalised with V0).
    N_exit : ndarray
        E-fold of horizon exit k = aH of each k [e-folds, background clock].
    k_peak, P_peak : float
        Interpolated maximum (nan if the maximum is at the grid edge) [Mpc^-1], [-].
    k_dip, P_dip : float
        Interpolated deepest minimum below k_peak (nan if none).
    n_s, alpha_s, r : float
        Tilt, running and tensor-to-scalar ratio at k_star.
    A_s : float
        Amplitude P_zeta(k_star) imposed.
    V0 : float
        Potential scale [M_p^4] giving A_s (H scales as sqrt(V0)).
    N_star : float
        E-folds from exit of k_star to the end of inflation.
    usr_efolds : float
        E-folds with eps2 < -3 (super-horizon growth of zeta).
    valid : bool
    reason : str
    k_star : float
        Pivot [Mpc^-1].
    N_end : float
        End of inflation [e-folds, background clock].
    refined : bool
        True if the peak/dip refinement converged.
    """

    k: np.ndarray
    P_zeta: np.ndarray
    P_tensor: np.ndarray
    N_exit: np.ndarray
    k_peak: float
    P_peak: float
    k_dip: float
    P_dip: float
    n_s: float
    alpha_s: float
    r: float
    A_s: float
    V0: float
    N_star: float
    usr_efolds: float
    valid: bool
    reason: str
    k_star: float = K_STAR_MPC
    N_end: float = _NAN
    refined: bool = False


def invalid_spectrum(reason: str, **known) -> Spectrum:
    """A Spectrum carrying only ``reason`` (and any fields already known)."""
    empty = np.empty(0)
    base = dict(k=empty, P_zeta=empty, P_tensor=empty, N_exit=empty, k_peak=_NAN,
                P_peak=_NAN, k_dip=_NAN, P_dip=_NAN, n_s=_NAN, alpha_s=_NAN, r=_NAN,
                A_s=_NAN, V0=_NAN, N_star=_NAN, usr_efolds=_NAN, valid=False, reason=reason)
    base.update(known)
    return Spectrum(**base)


@dataclass(frozen=True)
class _Context:
    bg: BackgroundLike
    table: BackgroundTable
    settings: ModeSettings
    N_stop: float
    refine_splits: int = 4

    def solve(self, N_k: np.ndarray):
        return solve_modes(self.bg, self.table, N_k, self.settings, self.N_stop)

    def pivot_at(self, N_pivot: float) -> PivotValues:
        ln0 = self.table.ln_aH(np.array([N_pivot]))[0]
        N_k = self.table.N_of_ln_aH(ln0 + STENCIL)
        res = self.solve(N_k)
        return pivot_values(N_pivot, self.table.ln_aH(N_k) - ln0, res.P_zeta, res.P_tensor)


def compute_spectrum(bg: BackgroundLike, *, N_star: float | Callable[[float], float] = 55.0,
                     n_modes: int = 256, k_star: float = K_STAR_MPC,
                     ln10As: float = LN10_AS_PLANCK18, settings: ModeSettings = ModeSettings(),
                     refine_features: bool = True, N_star_guess: float = 55.0,
                     reuse_modes: bool = True, table_method: str = "scaled") -> Spectrum:
    """Exact P_zeta(k), P_t(k) from k_star to the last mode frozen before the end.

    Parameters
    ----------
    bg : BackgroundLike
        Background for V0 = 1 (``scan.background.Background`` or any duck-typed one).
    N_star : float or callable
        E-folds from exit of k_star to the end of inflation, or ``N_star(V0)`` (reheating
        matching); the latter is iterated with the normalisation.
    n_modes : int
        Base grid size (log-spaced in k); refinement adds modes around peak and dip.
    k_star : float
        Pivot [Mpc^-1].
    ln10As : float
        ln(10^10 A_s) imposed at k_star.
    settings : ModeSettings
    refine_features : bool
        Refine the grid around the peak and the dip.
    N_star_guess : float
        Start of the V0 <-> N_star iteration.
    reuse_modes : bool
        True (default): refine peak and dip with three new modes per interval and round
        (``features.refine``, ``splits = 4``); iterate V0 <-> N_star on the degree-4 polynomial through one
        solved pivot stencil (re-solved only if N_star moves by more than one stencil
        step), then solve the final stencil together with the k grid in one vectorised
        call, and check the fixed point on those exact modes.  False: the earlier path
        (one stencil solve per iteration, then the grid; refinement by bisection).
    table_method : str
        ``build_table`` method ("scaled", or the earlier "bisect").

    Returns
    -------
    Spectrum
        ``valid=False`` with a reason instead of an exception for untrustworthy models.
    """
    if not bg.valid:
        return invalid_spectrum(f"background: {bg.reason}")
    if not np.isfinite(bg.N_end):
        return invalid_spectrum("inflation does not end (no eps1 = 1)")
    ctx = _Context(bg, build_table(bg, bg.N_start, bg.N_end, settings.table_tol,
                                   method=table_method), settings, float(bg.N_end),
                   refine_splits=4 if reuse_modes else 2)
    A_s = as_from_ln10(ln10As)
    if reuse_modes:
        return _spectrum_reusing(ctx, N_star, A_s, N_star_guess, k_star, n_modes,
                                 refine_features)
    norm = _normalise(ctx, N_star, A_s, N_star_guess)
    if isinstance(norm, Spectrum):
        return norm
    V0, Nst, pv, ok = norm
    return _assemble(ctx, pv, V0, Nst, A_s, k_star, n_modes, refine_features, ok)


def _normalise(ctx: _Context, N_star, A_s: float, guess: float):
    n_star_of_V0 = N_star if callable(N_star) else (lambda V0: float(N_star))
    start = guess if callable(N_star) else float(N_star)
    earliest = ctx.table.N[0] + np.log(ctx.settings.x_in) + 2.0 * STENCIL[-1] + 0.1
    if ctx.N_stop - start < earliest:
        return invalid_spectrum("background starts too late for the pivot mode's initial data")
    try:
        return iterate_normalisation(ctx.pivot_at, ctx.N_stop, n_star_of_V0, A_s, start)
    except ValueError as exc:
        return invalid_spectrum(f"pivot outside the background: {exc}")


def _assemble(ctx, pv, V0, N_star, A_s, k_star, n_modes, refine_features, norm_ok) -> Spectrum:
    N_piv = ctx.N_stop - N_star
    N_k = log_grid(ctx.table, N_piv, ctx.N_stop, ctx.settings.x_out, n_modes)
    if N_k.size < 3:
        return invalid_spectrum("too few e-folds between the pivot and the end of inflation")
    return _assemble_from(ctx, pv, V0, N_star, A_s, k_star, refine_features, norm_ok, N_k,
                          ctx.solve(N_k))


def _stencil(ctx: _Context, N_pivot: float) -> tuple[np.ndarray, np.ndarray]:
    """Exit e-folds of the pivot stencil and their ln(aH) offsets from the pivot."""
    ln0 = ctx.table.ln_aH(np.array([N_pivot]))[0]
    N_k = ctx.table.N_of_ln_aH(ln0 + STENCIL)
    return N_k, ctx.table.ln_aH(N_k) - ln0


def _predict_n_star(ctx: _Context, n_star_of_V0, A_s: float, start: float,
                    tol: float = 1e-7, max_iter: int = 12) -> float:
    """Fixed point of N_* = n_star_of_V0(A_s/P_zeta(k_*)) on solved stencils.

    P_zeta at a pivot shifted by x = Delta ln(aH) from the solved stencil's centre is the
    degree-4 polynomial through its five exact modes (|x| <= one stencil step; a stencil
    further away is solved anew).
    """
    N_star = float(start)
    N_c = ctx.N_stop - N_star
    N_k, x = _stencil(ctx, N_c)
    coef = np.polyfit(x, np.log(ctx.solve(N_k).P_zeta), x.size - 1)
    ln_c = ctx.table.ln_aH(np.array([N_c]))[0]
    for _ in range(4 * max_iter):
        dx = float(ctx.table.ln_aH(np.array([ctx.N_stop - N_star]))[0] - ln_c)
        if abs(dx) > STENCIL[-1] / 2:
            N_c = ctx.N_stop - N_star
            N_k, x = _stencil(ctx, N_c)
            coef = np.polyfit(x, np.log(ctx.solve(N_k).P_zeta), x.size - 1)
            ln_c = ctx.table.ln_aH(np.array([N_c]))[0]
            dx = 0.0
        N_new = float(n_star_of_V0(A_s / np.exp(np.polyval(coef, dx))))
        if abs(N_new - N_star) < tol:
            return N_new
        N_star = N_new
    return N_star


def _spectrum_reusing(ctx: _Context, N_star, A_s: float, guess: float, k_star: float,
                      n_modes: int, refine_features: bool) -> Spectrum:
    """The spectrum with the normalisation modes reused (see ``compute_spectrum``)."""
    n_star_of_V0 = N_star if callable(N_star) else (lambda V0: float(N_star))
    start = guess if callable(N_star) else float(N_star)
    earliest = ctx.table.N[0] + np.log(ctx.settings.x_in) + 2.0 * STENCIL[-1] + 0.1
    if ctx.N_stop - start < earliest:
        return invalid_spectrum("background starts too late for the pivot mode's initial data")
    tol = 1e-6  # [e-folds], as iterate_normalisation
    try:
        for _ in range(3):
            if callable(N_star):
                start = _predict_n_star(ctx, n_star_of_V0, A_s, start)
            if ctx.N_stop - start < earliest:
                return invalid_spectrum("background starts too late for the pivot mode's "
                                        "initial data")
            N_piv = ctx.N_stop - start
            N_st, x = _stencil(ctx, N_piv)
            N_k = log_grid(ctx.table, N_piv, ctx.N_stop, ctx.settings.x_out, n_modes)
            if N_k.size < 3:
                return invalid_spectrum("too few e-folds between the pivot and the end of "
                                        "inflation")
            both = ctx.solve(np.concatenate([N_st, N_k]))
            m = N_st.size
            pv = pivot_values(N_piv, x, both.P_zeta[:m], both.P_tensor[:m])
            V0 = A_s / pv.P_zeta
            N_check = float(n_star_of_V0(V0))
            ok = abs(N_check - start) < tol
            if ok:
                break
            start = N_check
    except ValueError as exc:
        return invalid_spectrum(f"pivot outside the background: {exc}")
    grid = ModeResult(N_k, both.P_zeta[m:], both.P_tensor[m:], both.N_final[m:], both.nfev,
                      both.success, both.message)
    return _assemble_from(ctx, pv, V0, start, A_s, k_star, refine_features, ok, N_k, grid)


def _assemble_from(ctx, pv, V0, N_star, A_s, k_star, refine_features, norm_ok, N_k,
                   res) -> Spectrum:
    N_piv = ctx.N_stop - N_star
    lnk = np.log(k_mpc(ctx.table, N_k, N_piv, k_star))
    lnP = np.log(res.P_zeta)
    extra: dict[float, float] = {}
    refined = False
    if refine_features:
        lnk, lnP, peak, dip, refined = refine(lnk, lnP, _grid_solver(ctx, N_piv, k_star, extra),
                                              splits=ctx.refine_splits)
    else:
        peak = find_peak(lnk, lnP)
        dip = find_dip(lnk, lnP, peak)
    P_t = _tensor_on(lnk, np.log(k_mpc(ctx.table, N_k, N_piv, k_star)), res.P_tensor, extra)
    N_exit = ctx.table.N_of_ln_aH(lnk - np.log(k_star) + ctx.table.ln_aH(np.array([N_piv]))[0])
    spec = dict(k=np.exp(lnk), P_zeta=V0 * np.exp(lnP), P_tensor=V0 * P_t, N_exit=N_exit,
                k_peak=float(np.exp(peak.ln_k)), P_peak=V0 * float(np.exp(peak.ln_P)),
                k_dip=float(np.exp(dip.ln_k)), P_dip=V0 * float(np.exp(dip.ln_P)),
                n_s=pv.n_s, alpha_s=pv.alpha_s, r=pv.r, A_s=A_s, V0=V0, N_star=N_star,
                usr_efolds=efolds_below(ctx.table, -3.0), k_star=k_star,
                N_end=ctx.N_stop, refined=refined)
    valid, reason = _validity(ctx, res, spec, norm_ok, N_piv)
    return Spectrum(valid=valid, reason=reason, **spec)


def _grid_solver(ctx: _Context, N_piv: float, k_star: float, extra: dict):
    ln_ref = ctx.table.ln_aH(np.array([N_piv]))[0]

    def solve(lnk_new: np.ndarray) -> np.ndarray:
        N_k = ctx.table.N_of_ln_aH(lnk_new - np.log(k_star) + ln_ref)
        res = ctx.solve(N_k)
        extra.update(zip(lnk_new.tolist(), res.P_tensor.tolist()))
        return np.log(res.P_zeta)

    return solve


def _tensor_on(lnk, lnk_base, P_t_base, extra: dict) -> np.ndarray:
    lookup = dict(zip(lnk_base.tolist(), P_t_base.tolist()))
    lookup.update(extra)
    return np.array([lookup[v] for v in lnk.tolist()])


def _validity(ctx: _Context, res, spec: dict, norm_ok: bool, N_piv: float) -> tuple[bool, str]:
    s = ctx.settings
    P = spec["P_zeta"]
    if not res.success:
        return False, f"mode integration failed: {res.message}"
    if not norm_ok:
        return False, "V0 <-> N_star iteration did not converge"
    if not np.all(np.isfinite(P)) or np.any(P <= 0.0):
        return False, "non-finite curvature spectrum (ill-conditioned background)"
    if P.max() >= s.p_zeta_max:
        return False, f"stochastic regime: P_zeta reaches {P.max():.3g} >= {s.p_zeta_max:g}"
    t = ctx.table
    sel = (t.N >= N_piv) & (t.N <= ctx.N_stop)
    diff = spec["V0"] * np.exp(-2.0 * t.neg_lnH[sel] - t.lneps1[sel]) / (8 * np.pi**2)
    if diff.size and diff.max() >= s.diffusion_max:
        return False, (f"stochastic regime: H^2/(8 pi^2 eps1) reaches {diff.max():.3g} "
                       f">= {s.diffusion_max:g}")
    return True, ""
