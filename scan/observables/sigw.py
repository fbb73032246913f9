"""Scalar-induced gravitational waves in radiation domination, and their value today.

Omega_GW(eta_c, k) is the late-time, oscillation-averaged second-order result
(Kohri & Terada 2018, arXiv:1804.08577; Espinosa, Racco & Riotto 2018, arXiv:1804.07732):

    Omega_GW(eta_c, k) = int_0^inf dv int_{|1-v|}^{1+v} du  K(u, v) P(ku) P(kv),

with :func:`induced_kernel` K (both polarisations, per ln k, relative to the total
density at eta_c; the flat spectrum P = A gives 0.8222 A^2).  The integral is done in
u = (t+s+1)/2, v = (t-s+1)/2 (s in [0, 1] using the u <-> v symmetry, t >= 0), with
Gauss-Legendre panels graded geometrically towards the log resonance t = sqrt(3) - 1
(u + v = sqrt(3)), panels uniform in ln(1+t) above it, and s-panels refined where
ln(ku), ln(kv) change quickly.  Panel widths follow the input table's ln k spacing, so
any feature the table resolves is resolved by the quadrature.

P_zeta is interpolated linearly in (ln k, ln P) and is zero outside its table.
:func:`plan_sigw` precomputes, for a fixed input k-grid and output k, every node's
kernel weight and its interpolation indices/fractions; :meth:`SIGWPlan.omega_gw` is then
a sparse product on ln P, an exponential and a weighted segmented sum (a second sparse
product), for one spectrum or a stack of m spectra on the same table at once.  Today:
Omega_GW,0 h^2 = c_g(T_c) Omega_r,0 h^2 Omega_GW(eta_c, k) (:func:`scan.observables.cosmo.gw_transfer_h2`).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy import sparse

from scan.observables import cosmo

#: Location of the log resonance u + v = sqrt(3) in t.
T_RESONANCE: float = math.sqrt(3.0) - 1.0
_TINY = 1e-300


class TruncationWarning(UserWarning):
    """P_zeta is not negligible at an end of its table, so Omega_GW is underestimated."""


class ResolutionWarning(UserWarning):
    """A peak of P_zeta is resolved by too few table points for a reliable Omega_GW."""


def induced_kernel(u, v):
    """Oscillation-averaged RD kernel K(u, v) [1], including the 1/12 (KT18 / ERR18).

    Parameters
    ----------
    u, v : array_like [1]
        Momentum ratios |k - q|/k and q/k, with |1 - v| <= u <= 1 + v.

    Returns
    -------
    ndarray [1]
    """
    u, v = np.asarray(u, dtype=float), np.asarray(v, dtype=float)
    a = u * u + v * v - 3.0
    geo = ((4 * v * v - (1 + v * v - u * u)**2) / (4 * u * v))**2
    pre = (3 * a / (4 * u**3 * v**3))**2
    with np.errstate(divide="ignore"):
        log = np.log(np.abs((3 - (u + v)**2) / (3 - (u - v)**2)))
    brace = (-4 * u * v + a * log)**2 + np.where(u + v > math.sqrt(3.0), (math.pi * a)**2, 0.0)
    return geo * pre * brace / 12.0


def omega_gw_delta(k, k_star: float, amplitude: float):
    """Closed-form Omega_GW(eta_c, k) [1] for P = A delta(ln(k/k_star)) (KT18).

    Zero at k/k_star = sqrt(2/3), log resonance at 2/sqrt(3), zero for k >= 2 k_star.

    Parameters
    ----------
    k : array_like [Mpc^-1]
    k_star : float [Mpc^-1]
    amplitude : float [1]
    """
    x = np.asarray(k, dtype=float) / k_star
    b = 3 * x * x - 2
    with np.errstate(divide="ignore", invalid="ignore"):
        log = np.log(np.abs(1 - 4 / (3 * x * x)))
        res = np.where(3 * x < 2 * math.sqrt(3.0), (math.pi * b)**2, 0.0)
        val = (3 * amplitude**2 / 64) * ((4 - x * x) / 4)**2 * x * x * b * b \
            * (res + (4 + b * log)**2)
    return np.where((x < 2) & (x > 0) & np.isfinite(val), val, 0.0)


def _gauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [0, 1]."""
    x, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (x + 1), 0.5 * w


def _t_panels(t_lo: float, t_hi: float, h: float, grade: int) -> np.ndarray:
    """Panel edges in t on [t_lo, t_hi]: graded towards sqrt(3)-1, uniform in ln(1+t) above."""
    r = 0.3
    left = T_RESONANCE * (1 - r**np.arange(grade + 1))
    right = T_RESONANCE * (1 + r**np.arange(grade, -1, -1))
    width = min(0.4, 3.0 * h)
    tau0, tau1 = math.log1p(right[-1]), math.log1p(max(t_hi, right[-1]))
    n_tau = max(1, math.ceil((tau1 - tau0) / width))
    upper = np.expm1(np.linspace(tau0, tau1, n_tau + 1))[1:]
    edges = np.unique(np.clip(np.concatenate([left, [T_RESONANCE], right, upper]), t_lo, t_hi))
    return _subdivide(edges, width)


def _subdivide(edges: np.ndarray, width: float) -> np.ndarray:
    """Split panels wider than ``width`` in ln(1+t) into equal pieces."""
    tau = np.log1p(edges)
    pieces = [tau[:1]]
    for a, b in zip(tau[:-1], tau[1:]):
        n = max(1, math.ceil((b - a) / width))
        pieces.append(np.linspace(a, b, n + 1)[1:])
    return np.expm1(np.concatenate(pieces))


def _nodes_for_k(k: float, lnk_lo: float, lnk_hi: float, h: float, n_gl: int,
                 grade: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(s, t, weight) quadrature nodes for one output k (weights exclude the kernel)."""
    t_lo = max(0.0, 2 * math.exp(lnk_lo) / k - 1)
    t_hi = 2 * math.exp(lnk_hi) / k - 1
    if t_hi <= t_lo:
        return np.empty(0), np.empty(0), np.empty(0)
    xg, wg = _gauss(n_gl)
    edges = _t_panels(t_lo, t_hi, h, grade)
    s_all, t_all, w_all = [], [], []
    v_floor = math.exp(lnk_lo) / k
    for a, b in zip(edges[:-1], edges[1:]):
        tn, tw = a + (b - a) * xg, (b - a) * wg
        tm = 0.5 * (a + b)
        spread = max(math.log((tm + 2) / (tm + 1)),
                     math.log((tm + 1) / max(tm, 2 * v_floor, 0.02)))
        n_s = int(min(48, max(1, math.ceil(spread / (2.0 * h)))))
        s_edges = np.linspace(0.0, 1.0, n_s + 1)
        sn = (s_edges[:-1, None] + np.diff(s_edges)[:, None] * xg).ravel()
        sw = (np.diff(s_edges)[:, None] * wg).ravel()
        s_all.append(np.repeat(sn[None, :], tn.size, 0).ravel())
        t_all.append(np.repeat(tn, sn.size))
        w_all.append(np.outer(tw, sw).ravel())
    return np.concatenate(s_all), np.concatenate(t_all), np.concatenate(w_all)


def _locate(lnx: np.ndarray, lnk_in: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower table index and fraction of each ln x inside the table."""
    i = np.clip(np.searchsorted(lnk_in, lnx, side="right") - 1, 0, lnk_in.size - 2)
    frac = (lnx - lnk_in[i]) / (lnk_in[i + 1] - lnk_in[i])
    return i.astype(np.int32), frac


@dataclass(frozen=True)
class SIGWPlan:
    """Everything in Omega_GW that does not depend on P_zeta (see :func:`plan_sigw`).

    Attributes
    ----------
    k_in : ndarray [Mpc^-1]
        Table wavenumbers the spectrum will be given on.
    k_out : ndarray [Mpc^-1]
        Output wavenumbers.
    f_out : ndarray [Hz]
        Output frequencies, c k_out / (2 pi).
    transfer_h2 : ndarray [1]
        c_g Omega_r,0 h^2 at each output k.
    n_nodes : int
        Total quadrature nodes (over all output k).
    """

    k_in: np.ndarray
    k_out: np.ndarray
    f_out: np.ndarray
    transfer_h2: np.ndarray
    n_nodes: int
    _interp: sparse.csr_matrix
    _sum: sparse.csr_matrix

    def omega_gw(self, P_zeta) -> np.ndarray:
        """Omega_GW(eta_c, k_out) [1] for one or a stack of spectra tabulated on k_in.

        Parameters
        ----------
        P_zeta : array_like [1]
            Shape (n_k,) for one spectrum, or (m, n_k) for m spectra on the same
            table ``k_in`` (evaluated together: two sparse products and one
            exponential over all m).

        Returns
        -------
        ndarray [1]
            Shape (n_out,) for one spectrum, (m, n_out) for a stack.
        """
        lp = np.log(np.maximum(self._spectra(P_zeta), _TINY))
        a = self._interp @ lp.T              # ln P(ku) + ln P(kv) per node: (n_nodes[, m])
        np.exp(a, out=a)
        return np.asarray(self._sum @ a).T   # sum_nodes w K P P per k_out: ([m, ]n_out)

    def omega_gw_h2(self, P_zeta) -> np.ndarray:
        """Omega_GW,0 h^2 [1] today at f_out for one or a stack of spectra on k_in.

        Parameters
        ----------
        P_zeta : array_like [1]
            Shape (n_k,) or (m, n_k), as for :meth:`omega_gw`.

        Returns
        -------
        ndarray [1]
            Shape (n_out,) or (m, n_out).
        """
        return self.transfer_h2 * self.omega_gw(P_zeta)

    def _spectra(self, P_zeta) -> np.ndarray:
        """``P_zeta`` as a float array of shape (n_k,) or (m, n_k), checked against k_in."""
        P = np.asarray(P_zeta, dtype=float)
        if P.ndim not in (1, 2) or P.shape[-1] != self.k_in.size:
            raise ValueError(f"P_zeta must have shape ({self.k_in.size},) or "
                             f"(m, {self.k_in.size}), got {P.shape}")
        return P


def _interpolation_matrix(iu_l, fu_l, iv_l, fv_l, n_in: int) -> sparse.csr_matrix:
    """Sparse map ln P (table) -> ln P(ku) + ln P(kv) at every node (4 entries a row)."""
    iu, fu = np.concatenate(iu_l), np.concatenate(fu_l)
    iv, fv = np.concatenate(iv_l), np.concatenate(fv_l)
    n = iu.size
    rows = np.repeat(np.arange(n), 4)
    cols = np.stack([iu, iu + 1, iv, iv + 1], axis=1).ravel()
    vals = np.stack([1 - fu, fu, 1 - fv, fv], axis=1).ravel()
    return sparse.csr_matrix((vals, (rows, cols)), shape=(n, n_in))


def plan_sigw(k_in, k_out=None, *, f_out=None, n_gl: int = 4, grade: int = 10,
              dof: cosmo.Dof = None, n_eff: float = cosmo.N_EFF_DEFAULT) -> SIGWPlan:
    """Precompute the induced-GW quadrature for a spectrum table ``k_in``.

    Parameters
    ----------
    k_in : array_like [Mpc^-1]
        Strictly increasing table wavenumbers (at least 2).
    k_out : array_like [Mpc^-1], optional
        Output wavenumbers; or give ``f_out`` [Hz] instead.
    f_out : array_like [Hz], optional
    n_gl : int
        Gauss-Legendre points per panel (each direction).
    grade : int
        Number of geometric panels (ratio 0.3) on each side of the resonance.
    dof, n_eff
        g_*(T) choice and N_eff for the transfer to today (see :mod:`scan.observables.cosmo`).

    Returns
    -------
    SIGWPlan
    """
    k_in = np.asarray(k_in, dtype=float)
    if k_out is None:
        if f_out is None:
            raise ValueError("give k_out [Mpc^-1] or f_out [Hz]")
        k_out = cosmo.f_to_k(f_out)
    k_out = np.atleast_1d(np.asarray(k_out, dtype=float))
    iu_l, fu_l, iv_l, fv_l, w_l, counts = node_table(k_in, k_out, n_gl, grade)
    n_nodes = int(counts.sum())
    # weighted segmented sum over each output k's nodes (row j holds k_out[j]'s weights)
    summation = sparse.csr_matrix(
        (np.concatenate(w_l), np.arange(n_nodes), np.concatenate([[0], np.cumsum(counts)])),
        shape=(k_out.size, n_nodes))
    return SIGWPlan(
        k_in=k_in, k_out=k_out, f_out=cosmo.k_to_f(k_out),
        transfer_h2=np.asarray(cosmo.gw_transfer_h2(k_out, dof, n_eff)),
        n_nodes=n_nodes,
        _interp=_interpolation_matrix(iu_l, fu_l, iv_l, fv_l, k_in.size),
        _sum=summation,
    )


def node_table(k_in: np.ndarray, k_out: np.ndarray, n_gl: int = 4, grade: int = 10):
    """The quadrature nodes of every output k, located in the table ``k_in``.

    Parameters
    ----------
    k_in : ndarray [Mpc^-1]
        Strictly increasing table wavenumbers.
    k_out : ndarray [Mpc^-1]
    n_gl, grade : int
        As :func:`plan_sigw`.

    Returns
    -------
    iu, fu, iv, fv, w : list of ndarray (one entry per output k)
        Lower table index and fraction (in ln k) of ku and kv, and the weight times
        K(u, v), of every node inside the table.
    counts : ndarray of int
        Nodes per output k.
    """
    lnk_in = np.log(k_in)
    h = float(np.median(np.diff(lnk_in)))
    parts, counts = [], []
    for k in k_out:
        s, t, w = _nodes_for_k(k, lnk_in[0], lnk_in[-1], h, n_gl, grade)
        parts.append((k, s, t, w))
    iu_l, fu_l, iv_l, fv_l, w_l = [], [], [], [], []
    for k, s, t, w in parts:
        u, v = 0.5 * (t + s + 1), 0.5 * (t - s + 1)
        lu, lv = np.log(k * u), np.log(np.maximum(k * v, _TINY))
        keep = (lv >= lnk_in[0]) & (lu <= lnk_in[-1]) & (v > 0)
        u, v, lu, lv, w = u[keep], v[keep], lu[keep], lv[keep], w[keep]
        wk = w * induced_kernel(u, v)
        good = np.isfinite(wk) & (wk != 0)
        iu, fu = _locate(lu[good], lnk_in)
        iv, fv = _locate(lv[good], lnk_in)
        iu_l.append(iu), fu_l.append(fu), iv_l.append(iv), fv_l.append(fv)
        w_l.append(wk[good])
        counts.append(int(good.sum()))
    return iu_l, fu_l, iv_l, fv_l, w_l, np.array(counts, dtype=int)


def check_spectrum(P_zeta, edge_tol: float = 1e-3, min_peak_points: int = 5) -> None:
    """Warn when the table truncates the integral or under-resolves its peak.

    Parameters
    ----------
    P_zeta : array_like [1]
    edge_tol : float [1]
        TruncationWarning if P at either end exceeds ``edge_tol`` x max(P).
    min_peak_points : int
        ResolutionWarning if fewer table points lie above half the maximum.
    """
    P = np.asarray(P_zeta, dtype=float)
    top = float(P.max())
    if top <= 0:
        return
    if max(P[0], P[-1]) > edge_tol * top:
        warnings.warn(f"P_zeta at the table ends ({P[0]:.3g}, {P[-1]:.3g}) exceeds "
                      f"{edge_tol:g} x its maximum; Omega_GW misses the part of the "
                      "integral beyond the table (P is taken as 0 there)",
                      TruncationWarning, stacklevel=2)
    if np.count_nonzero(P > 0.5 * top) < min_peak_points:
        warnings.warn(f"the peak of P_zeta is resolved by fewer than {min_peak_points} "
                      "table points above half maximum; refine the table or use "
                      "omega_gw_delta for a Dirac-delta peak", ResolutionWarning, stacklevel=2)


def omega_gw_h2(k_in, P_zeta, f_out, **plan_kw) -> np.ndarray:
    """One-shot Omega_GW,0 h^2 [1] at ``f_out`` [Hz] for ``P_zeta`` [1] on ``k_in`` [Mpc^-1].

    Checks the table (:func:`check_spectrum`), plans and evaluates; for repeated
    spectra on the same grid use :func:`plan_sigw` once and :meth:`SIGWPlan.omega_gw_h2`.
    """
    check_spectrum(P_zeta)
    return plan_sigw(k_in, f_out=f_out, **plan_kw).omega_gw_h2(P_zeta)
