"""Many Mukhanov-Sasaki modes at once: the Hamiltonian (zeta, Pi) form on a shared clock.

Equations (' = d/dN, a = e^N): zeta' = Pi/(2 a^3 H eps1), Pi' = -2 k^2 a eps1 zeta/H.
In the scaled variables of :mod:`scan.modes.initial` (n = N - N_k, e = eps1/eps_k,
h = H/H_k):  q' = p~ e^{-2n}/(h e),  p~' = -(e/h) q - p~.  Tensors: e = 1.
Only eps1 and H enter (no eps2, eps3, V_chichi), through the table's ln eps1 and -ln H.

Phase A integrates every mode on the shared relative clock n from n_in = -ln x_in to
the n where the last mode has k/(aH) <= x_out, so all modes oscillate in step and one
DOP853 system with a compiled right-hand side (:mod:`scan.modes.kernel`) serves them all.  Phase B (only if a
non-attractor phase, eps2 < eps2_attractor, lies ahead) carries every mode on its own
affine clock N_i(T) = N_i0 + T L_i, T in [0, 1], to its own final e-fold.

Kinetic-pole crossings (``getattr(bg, "crossings", ())``, each with ``N_cross``; only
poles of power p < 1, see ``_cusp_crossings``): for p < 1 the canonical U_chichi has an
integrable cusp at the crossing, and a mode whose x_in start falls up to CUSP_AFTER_EFOLDS after it misses that cusp's particle
production (error ~ x_cross^{-7/3}).  Such modes (and those starting less than
CUSP_MARGIN_EFOLDS before a crossing) are solved in Phase A as a separate group on the
same clock, starting CUSP_MARGIN_EFOLDS before the crossing: n_in of the group is the
earliest start any of its modes needs, capped at CUSP_MAX_EXTRA_EFOLDS before the usual
-ln x_in (x_start <= x_in e^4), and clipped to the table's start.  The other modes are
untouched; the groups are merged before Phase B.  Extra cost: one more Phase-A solve for
the few modes concerned, with ~x_start/x_in times the steps of the usual one (<= e^4 ~ 55;
measured: the p = 0.5 convergence test, 48 modes, 1.3 s -> 11.5 s; p >= 1 unaffected).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.modes.initial import bunch_davies
from scan.modes.kernel import MESSAGE_DONE, MESSAGE_SMALL, integrate_modes
from scan.modes.protocol import BackgroundLike
from scan.modes.settings import ModeSettings
from scan.modes.table import BackgroundTable
from scan.ode import TABLEAU

#: eps_t for tensors in z_t = a sqrt(2 eps_t) = a/sqrt(8).
EPS_TENSOR = 1.0 / 16.0

#: Modes starting up to this many e-folds after a pole crossing get the early start.
CUSP_AFTER_EFOLDS = 3.0
#: ... and so do those starting less than this before one; the early start lies this far
#: before the crossing.
CUSP_MARGIN_EFOLDS = 1.0
#: Cap on how much earlier than -ln x_in the early group may start [e-folds].
CUSP_MAX_EXTRA_EFOLDS = 4.0


@dataclass(frozen=True)
class ModeResult:
    """Power spectra at V0 = 1 for modes labelled by their exit e-fold N_k (k = aH).

    Attributes
    ----------
    N_k : ndarray
        Exit e-folds.
    P_zeta, P_tensor : ndarray
        Dimensionless spectra for V0 = 1 (both scale as V0).
    N_final : ndarray
        E-fold at which each mode was read off.
    nfev : int
        Right-hand-side evaluations (all phases).
    success : bool
    message : str
    """

    N_k: np.ndarray
    P_zeta: np.ndarray
    P_tensor: np.ndarray
    N_final: np.ndarray
    nfev: int
    success: bool
    message: str


def _integrate(table: BackgroundTable, y0: np.ndarray, span: tuple[float, float],
               Lk: np.ndarray, gk: np.ndarray, N0: np.ndarray, n0: float,
               rate: np.ndarray | None, settings: ModeSettings) -> tuple[np.ndarray, int, bool,
                                                                          str]:
    """DOP853 (compiled, :func:`scan.modes.kernel.integrate_modes`) on clock t over ``span``:
    N_i = N0_i + t*rate_i, n_i = n0 + t*rate_i (rate None: rate = 1).

    Returns (y at the end, right-hand-side calls, success, message)."""
    y, nfev, ok = integrate_modes(
        float(span[0]), float(span[1]), np.ascontiguousarray(y0, dtype=float), settings.rtol,
        settings.rtol * settings.atol_factor, table.N, table.coef, Lk, gk,
        np.ascontiguousarray(N0, dtype=float), float(n0),
        np.ones(Lk.size) if rate is None else np.ascontiguousarray(rate, dtype=float),
        rate is not None, TABLEAU)
    return y, int(nfev), bool(ok), MESSAGE_DONE if ok else MESSAGE_SMALL


def _freeze_n(table: BackgroundTable, N_k: np.ndarray, gk: np.ndarray, x_out: float) -> float:
    """Smallest common n at which every mode has k/(aH) <= x_out."""
    n = np.full_like(N_k, np.log(1.0 / x_out))
    for _ in range(4):
        g = table.lneps1_neglnH(np.minimum(N_k + n, table.N[-1]))[1]
        n = np.log(1.0 / x_out) + (g - gk)
    return float(np.max(n))


def last_nonattractor_efold(table: BackgroundTable, eps2_attractor: float) -> float:
    """Last tabulated e-fold with eps2 < eps2_attractor (-inf if none)."""
    idx = np.flatnonzero(table.eps2 < eps2_attractor)
    return float(table.N[idx[-1]]) if idx.size else -np.inf


def final_efolds(table: BackgroundTable, N_k: np.ndarray, n_A: float,
                 settings: ModeSettings, N_stop: float) -> np.ndarray:
    """Per-mode read-off e-fold: frozen, and settle_efolds past the last non-attractor phase."""
    N_na = last_nonattractor_efold(table, settings.eps2_attractor)
    settle = min(N_na + settings.settle_efolds, N_stop)
    return np.maximum(N_k + n_A, settle)


def _initial_state(bg: BackgroundLike, table: BackgroundTable, N_k, Lk, gk, n_in):
    N_in = N_k + n_in
    pt = bg.evaluate(N_in)
    eps1 = np.asarray(pt.eps1, float)
    eps2 = np.asarray(pt.eps2, float)
    L, g = table.lneps1_neglnH(N_in)
    x = np.exp(-n_in + g - gk)
    n = np.full_like(N_k, n_in)
    q, p = bunch_davies(n, x, eps1, eps2, np.exp(L - Lk))
    qt, pt_ = bunch_davies(n, x, eps1, np.zeros_like(eps2), np.ones_like(eps2))
    return np.concatenate([q.real, q.imag, p.real, p.imag, qt.real, qt.imag, pt_.real, pt_.imag])


def _cusp_crossings(bg: BackgroundLike) -> list[float]:
    """N_cross of the crossings with a cusp in U_chichi: pole power p < 1 (all if unknown).

    The power is read from ``bg.model.poles[crossing.index].power`` when the background
    carries its model (``scan.background.Background`` does); p >= 1 poles have no cusp
    and are left alone (their spectra converge without the early start).
    """
    poles = getattr(getattr(bg, "model", None), "poles", None)
    out = []
    for c in getattr(bg, "crossings", ()):
        try:
            power = float(poles[c.index].power)
        except (TypeError, IndexError, AttributeError):
            power = 0.0
        if power < 1.0:
            out.append(float(c.N_cross))
    return out


def _start_groups(bg: BackgroundLike, table: BackgroundTable, N_k: np.ndarray,
                  n_in: float) -> list[tuple[np.ndarray, float]]:
    """Phase-A groups (mode indices, start n): the usual one, and one near pole crossings.

    A mode whose start N_k + n_in lies in [N_cross - CUSP_MARGIN_EFOLDS,
    N_cross + CUSP_AFTER_EFOLDS] of a crossing needs n <= N_cross - CUSP_MARGIN_EFOLDS - N_k;
    the group starts at the smallest such n, no earlier than n_in - CUSP_MAX_EXTRA_EFOLDS
    nor than the table's first node.
    """
    start = N_k + n_in
    need = np.full(N_k.shape, n_in)
    for Nc in _cusp_crossings(bg):
        near = (start >= Nc - CUSP_MARGIN_EFOLDS) & (start <= Nc + CUSP_AFTER_EFOLDS)
        need = np.where(near, np.minimum(need, Nc - CUSP_MARGIN_EFOLDS - N_k), need)
    early = need < n_in
    if not np.any(early):
        return [(np.arange(N_k.size), n_in)]
    n_early = max(float(need[early].min()), n_in - CUSP_MAX_EXTRA_EFOLDS,
                  float(table.N[0] - N_k[early].min()))
    groups = [(np.flatnonzero(early), n_early)]
    if not np.all(early):
        groups.insert(0, (np.flatnonzero(~early), n_in))
    return groups


def solve_modes(bg: BackgroundLike, table: BackgroundTable, N_k: np.ndarray,
                settings: ModeSettings, N_stop: float) -> ModeResult:
    """Integrate the scalar and tensor modes exiting at ``N_k`` (V0 = 1).

    Parameters
    ----------
    bg : BackgroundLike
        Background (dense output used for the initial eps1, eps2 only).
    table : BackgroundTable
        Table covering [min(N_k) - ln x_in, N_stop].
    N_k : ndarray
        Exit e-folds of the modes [e-folds].
    settings : ModeSettings
    N_stop : float
        Last e-fold any mode may be integrated to (end of inflation or of the table).

    Returns
    -------
    ModeResult
    """
    N_k = np.asarray(N_k, dtype=float)
    Lk, gk = table.lneps1_neglnH(N_k)
    n_in = -np.log(settings.x_in)
    n_A = _freeze_n(table, N_k, gk, settings.x_out)
    if N_k.min() + n_in < table.N[0] or N_k.max() + n_A > N_stop:
        raise ValueError("modes outside the tabulated background range")
    groups = _start_groups(bg, table, N_k, n_in)
    Y = np.empty((8, N_k.size))
    nfev, ok, msg = 0, True, ""
    for idx, n0 in groups:
        y0 = _initial_state(bg, table, N_k[idx], Lk[idx], gk[idx], n0)
        yA, nA, okA, msgA = _integrate(table, y0, (n0, n_A), Lk[idx], gk[idx], N_k[idx], 0.0,
                                       None, settings)
        Y[:, idx] = yA.reshape(8, -1)
        nfev += nA
        if not okA:
            ok, msg = False, msgA
        elif ok:
            msg = msgA
    y = Y.reshape(-1)
    N_final = final_efolds(table, N_k, n_A, settings, N_stop)
    rate = N_final - (N_k + n_A)
    if ok and np.any(rate > 0.0):
        y, nB, ok, msg = _integrate(table, y, (0.0, 1.0), Lk, gk, N_k + n_A, n_A, rate,
                                    settings)
        nfev += nB
    return _spectra(y, Lk, gk, N_k, N_final, nfev, ok, msg)


def _spectra(y, Lk, gk, N_k, N_final, nfev, ok, msg) -> ModeResult:
    Y = y.reshape(8, -1)
    with np.errstate(divide="ignore"):
        lq2 = np.log(Y[0] ** 2 + Y[1] ** 2)
        lt2 = np.log(Y[4] ** 2 + Y[5] ** 2)
    P_zeta = np.exp(lq2 - 2.0 * gk - Lk) / (2.0 * np.pi**2)
    P_tensor = np.exp(lt2 - 2.0 * gk) / (2.0 * np.pi**2 * EPS_TENSOR)
    return ModeResult(N_k, P_zeta, P_tensor, N_final, int(nfev), bool(ok), str(msg))
