"""Omega_GW of many spectra on one short table as a quadratic form (for samplers).

The induced-GW integral is quadratic in the spectrum.  If P_zeta between the nodes of a
table is interpolated *linearly in P* (in ln k), the quadrature of :mod:`scan.observables.sigw`
collapses to

    Omega_GW(eta_c, k_j) = sum_{a <= b} W_jab P_a P_b,

with a fixed matrix W built once from the same nodes and kernel weights.  For m spectra
that is one (m, n(n+1)/2) x (n(n+1)/2, n_out) matrix product — no exponential per node —
which is what a sampler evaluating 64 walkers per call needs.  W is sparse (a pair of
nodes feeds only the outputs it brackets, ~15 % of the entries), so the product is done
in blocks of :data:`OUT_BLOCK` outputs, each over the pairs it uses: the same sum in
another order (equal to the dense product to rounding), a third of the multiply-adds.

Linear-in-P interpolation is less accurate than :mod:`scan.observables.sigw`'s linear-in-ln P on a
coarse table (at a node spacing h in ln k where P changes by a factor r, the mid-interval
difference is (ln r)^2/8).  So the spectrum is first refined ``refine``-fold by
log-linear interpolation (exactly :mod:`scan.observables.sigw`'s interpolant) and the quadratic form
acts on the refined table, cutting that difference by ``refine``^2.  The accuracy
against :func:`scan.observables.sigw.plan_sigw` on the same coarse table is tested
(``tests/test_sigw_quadratic.py``) and stated in :func:`plan_quadratic`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse

from scan.observables.sigw import node_table

#: Outputs per block of the sparse-by-blocks product (measured fastest on 64 outputs).
OUT_BLOCK = 16


@dataclass(frozen=True)
class QuadraticPlan:
    """Omega_GW(eta_c, k_out) = quadratic form of P on a refined table (see module doc).

    Attributes
    ----------
    k_in : ndarray [Mpc^-1]
        The table spectra are given on (n,).
    k_out : ndarray [Mpc^-1]
    refine : int
        Refinement factor of the table before the quadratic form.
    """

    k_in: np.ndarray
    k_out: np.ndarray
    refine: int
    _lift: np.ndarray        # (n_fine, n): ln P on k_in -> ln P on the refined table
    _pairs: tuple[np.ndarray, np.ndarray]
    _W: np.ndarray           # (n_pairs, n_out)
    _blocks: tuple[tuple[int, int, np.ndarray, np.ndarray, np.ndarray], ...]
    # (start, stop, a and b of the pairs outputs start:stop use, W[used, start:stop].T)

    def omega_gw(self, P_zeta) -> np.ndarray:
        """Omega_GW(eta_c, k_out) [1] for one (n,) or a stack (m, n) of spectra on k_in."""
        P = np.asarray(P_zeta, dtype=float)
        one = P.ndim == 1
        P = np.atleast_2d(P)
        if P.shape[-1] != self.k_in.size:
            raise ValueError(f"P_zeta must have shape ({self.k_in.size},) or "
                             f"(m, {self.k_in.size}), got {P.shape}")
        # refined table, transposed (n_fine, m): the rows of a pair are contiguous
        fine = np.exp(self._lift @ np.log(np.maximum(P, 1e-300)).T)  # 0 -> 1e-300
        omega = np.empty((self.k_out.size, P.shape[0]))
        for start, stop, a, b, w_block in self._blocks:
            products = np.take(fine, a, axis=0) * np.take(fine, b, axis=0)
            np.matmul(w_block, products, out=omega[start:stop])
        return omega[:, 0] if one else np.ascontiguousarray(omega.T)


def plan_quadratic(k_in, k_out, *, refine: int = 2, n_gl: int = 4, grade: int = 10,
                   kernel: str = "radiation", dof=None) -> QuadraticPlan:
    """Build the quadratic form of Omega_GW for spectra on ``k_in`` (log-spaced).

    Parameters
    ----------
    k_in : array_like [Mpc^-1]
        Strictly increasing, evenly log-spaced table (the emulator's shape grid).
    k_out : array_like [Mpc^-1]
        Output wavenumbers.
    refine : int
        The spectrum is refined this many times (log-linear) before the quadratic form.
    n_gl, grade : int
        Quadrature of :func:`scan.observables.sigw.plan_sigw`.
    kernel, dof
        As :func:`scan.observables.sigw.plan_sigw`: ``"qcd-fluid"`` makes the form depend
        on the absolute ``k_out`` (its re-entry temperatures, with g_*(T) ``dof``); the
        batch path's scale-free per-row forms are :mod:`scan.observables.quadratic_qcd`.

    Returns
    -------
    QuadraticPlan

    Notes
    -----
    Measured against :func:`scan.observables.sigw.plan_sigw` on the same 41-point table over
    ln(k/k_peak) in [-3, 3] (log-normal peaks of width 0.3-1 and broken power laws
    k^4 / k^-1.5..-5), with ``refine = 2``: see ``tests/test_sigw_quadratic.py``.
    """
    k_in = np.asarray(k_in, dtype=float)
    k_out = np.atleast_1d(np.asarray(k_out, dtype=float))
    refine = int(refine)
    if refine < 1:
        raise ValueError(f"refine must be >= 1, got {refine}")
    lnk = np.log(k_in)
    fine = refined_table(lnk, refine)
    iu, fu, iv, fv, w, counts = node_table(np.exp(fine), k_out, n_gl, grade, kernel, dof)
    out = np.repeat(np.arange(k_out.size), counts)
    assemble = pair_assembly(out, *(np.concatenate(v) for v in (iu, fu, iv, fv)),
                             fine.size, k_out.size)
    sym = (assemble @ np.concatenate(w)).reshape(k_out.size, -1)   # (n_out, n_pairs)
    used = np.any(sym != 0.0, axis=0)
    W = np.ascontiguousarray(sym[:, used].T)
    a, b = (index[used] for index in np.triu_indices(fine.size))
    return QuadraticPlan(k_in=k_in, k_out=k_out, refine=refine,
                         _lift=_linear_lift(lnk, fine), _pairs=(a, b), _W=W,
                         _blocks=_output_blocks(a, b, W))


def refined_table(lnk: np.ndarray, refine: int) -> np.ndarray:
    """The table ln k [ln Mpc^-1] refined ``refine``-fold (linearly in ln k)."""
    n = lnk.size
    return np.interp(np.linspace(0, n - 1, (n - 1) * refine + 1), np.arange(n), lnk)


def pair_assembly(out, iu, fu, iv, fv, n_fine: int, n_out: int) -> sparse.csr_matrix:
    """The sparse map (n_out n_pairs, n_nodes) from node weights (quadrature weight times
    kernel) to the forms W (n_out, n_pairs), flattened: node n of output ``out[n]``
    feeds the table pairs (iu or iu + 1, iv or iv + 1) with the bilinear weights (linear
    in P in ln k), (a, b) and (b, a) both at the upper-triangle index of (min, max)
    (the order of ``np.triu_indices(n_fine)``)."""
    n_pairs = n_fine * (n_fine + 1) // 2
    rows, vals = [], []
    for ia, wa in ((iu, 1 - fu), (iu + 1, fu)):
        for ib, wb in ((iv, 1 - fv), (iv + 1, fv)):
            lo, hi = np.minimum(ia, ib), np.maximum(ia, ib)
            rows.append(out * n_pairs + lo * n_fine - lo * (lo - 1) // 2 + (hi - lo))
            vals.append(wa * wb)
    cols = np.tile(np.arange(out.size), 4)
    return sparse.csr_matrix((np.concatenate(vals), (np.concatenate(rows), cols)),
                             shape=(n_out * n_pairs, out.size))


def _output_blocks(a: np.ndarray, b: np.ndarray, W: np.ndarray, size: int = OUT_BLOCK
                   ) -> tuple[tuple[int, int, np.ndarray, np.ndarray, np.ndarray], ...]:
    """Blocks of ``size`` output columns of W (n_pairs, n_out) of the pairs (a, b): each
    with the pairs it uses and its transposed sub-matrix (C-contiguous, for
    ``W_block @ products``)."""
    blocks = []
    for start in range(0, W.shape[1], size):
        stop = min(start + size, W.shape[1])
        used = np.flatnonzero(np.any(W[:, start:stop] != 0.0, axis=1))
        blocks.append((start, stop, a[used], b[used],
                       np.ascontiguousarray(W[used, start:stop].T)))
    return tuple(blocks)


def _linear_lift(x: np.ndarray, x_fine: np.ndarray) -> np.ndarray:
    """Matrix of linear interpolation from nodes ``x`` to ``x_fine`` (inside [x0, x-1])."""
    i = np.clip(np.searchsorted(x, x_fine, side="right") - 1, 0, x.size - 2)
    t = (x_fine - x[i]) / (x[i + 1] - x[i])
    lift = np.zeros((x_fine.size, x.size))
    rows = np.arange(x_fine.size)
    lift[rows, i] = 1.0 - t
    lift[rows, i + 1] += t
    return lift
