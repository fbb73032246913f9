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
kernel weight and its interpolation indices/fractions (placed by compiled loops,
:mod:`scan.observables.sigw_nodes`); :meth:`SIGWPlan.omega_gw` is then
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
from scan.observables.sigw_kernel_table import (
    SIGW_KERNELS,
    load_kernel_tables,
    tabulated_kernel,
)
from scan.observables.sigw_nodes import (  # noqa: F401
    T_RESONANCE,
    TINY,
    interpolation_entries,
    kernel_array,
    nodes_for_k,
)


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
    u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
    flat = kernel_array(np.ascontiguousarray(u).ravel(), np.ascontiguousarray(v).ravel())
    return flat.reshape(u.shape)


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
        lp = np.log(np.maximum(self._spectra(P_zeta), TINY))
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
    cols, vals = interpolation_entries(iu, fu, iv, fv)
    # built in CSR form directly (4 entries a row; a column met twice in a row is summed
    # by the product, as the COO route would sum it once)
    return sparse.csr_matrix((vals, cols, np.arange(0, 4 * n + 1, 4)), shape=(n, n_in))


def plan_sigw(k_in, k_out=None, *, f_out=None, n_gl: int = 4, grade: int = 10,
              dof: cosmo.Dof = None, n_eff: float = cosmo.N_EFF_DEFAULT,
              kernel: str = "radiation") -> SIGWPlan:
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
    kernel : str
        ``"radiation"``: the closed-form RD kernel; ``"qcd-fluid"``: the tabulated kernel
        on the QCD-era background for output k re-entering inside the table's range
        (:mod:`scan.observables.sigw_kernel_table`), the RD kernel elsewhere.

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
    iu_l, fu_l, iv_l, fv_l, w_l, counts = node_table(k_in, k_out, n_gl, grade, kernel, dof)
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


def node_table(k_in: np.ndarray, k_out: np.ndarray, n_gl: int = 4, grade: int = 10,
               kernel: str = "radiation", dof: cosmo.Dof = None):
    """The quadrature nodes of every output k, located in the table ``k_in``.

    Parameters
    ----------
    k_in : ndarray [Mpc^-1]
        Strictly increasing table wavenumbers.
    k_out : ndarray [Mpc^-1]
    n_gl, grade : int
        As :func:`plan_sigw`.
    kernel : str
        As :func:`plan_sigw`.
    dof : None, DofTable or (g_rho, g_s)
        g_*(T) for the re-entry temperature of each output k (``qcd-fluid`` only).

    Returns
    -------
    iu, fu, iv, fv, w : list of ndarray (one entry per output k)
        Lower table index and fraction (in ln k) of ku and kv, and the weight times
        K(u, v), of every node inside the table.
    counts : ndarray of int
        Nodes per output k.
    """
    if kernel not in SIGW_KERNELS:
        raise ValueError(f"kernel must be one of {SIGW_KERNELS}, got {kernel!r}")
    tables = load_kernel_tables() if kernel == "qcd-fluid" else None
    T_c = cosmo.temperature_of_k(k_out, dof) if tables is not None else k_out
    iu_l, fu_l, iv_l, fv_l, w_l, counts = [], [], [], [], [], []
    for T, (iu, fu, iv, fv, w, t, s, q) in zip(T_c, output_nodes(k_in, k_out, n_gl,
                                                                 grade)):
        if tables is not None:
            w = q * tabulated_kernel(float(T), t, s, w / q, tables)
        iu_l.append(iu), fu_l.append(fu), iv_l.append(iv), fv_l.append(fv)
        w_l.append(w)
        counts.append(w.size)
    return iu_l, fu_l, iv_l, fv_l, w_l, np.array(counts, dtype=int)


def output_nodes(k_in: np.ndarray, k_out: np.ndarray, n_gl: int = 4, grade: int = 10):
    """The RD-kernel nodes of each output k in the table ``k_in`` [Mpc^-1], one tuple
    (iu, fu, iv, fv, w, t, s, q) per output
    (:func:`~scan.observables.sigw_nodes.nodes_for_k`); ``n_gl``, ``grade`` as
    :func:`plan_sigw`."""
    lnk_in = np.ascontiguousarray(np.log(k_in), dtype=float)
    h = float(np.median(np.diff(lnk_in)))
    xg, wg = _gauss(n_gl)
    for k in k_out:
        yield nodes_for_k(float(k), lnk_in, h, xg, wg, int(grade))


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
