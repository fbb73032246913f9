"""Mass fractions per (spectrum, epoch) pair, each pair with its own threshold (and exponent).

The quadratures of :func:`scan.observables.pbh.abundance.beta_monochromatic` and
:func:`scan.observables.pbh.abundance.beta_weighted`, evaluated elementwise over pairs so
that the threshold (a sampled nuisance, or the QCD-era threshold of each formation epoch,
:mod:`scan.observables.pbh.qcd`) and the critical-collapse exponent may differ from pair
to pair.  Used by :mod:`scan.observables.pbh.threshold_plan`.

The mass-weighted quadrature is compiled (:func:`_node_sums`): in blocks of ``BLOCK``
pairs (the buffers stay in cache; no array of the size pairs x nodes per call), the
logarithms and exponentials each in one vectorised pass
(:mod:`scan.observables.pbh.vector_math`, within 1 ulp of numpy's) instead of libm per
element.  Measured on the QCD-era benchmark stack (tests/bench/bench_pbh_nongaussian.py
--qcd, 3.1k live pairs x 48 nodes): 0.9-1.1 ms against 5.0 ms for the numpy form with its
temporaries already paged in (10 ms when they were not).

Units: every quantity [1].
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy import special

from scan.observables.pbh.abundance import _BETA_W, _BETA_Z, prefactor
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.thresholds import C_L_MAX
from scan.observables.pbh.vector_math import (
    NORMAL_MIN,
    X_MIN,
    exp_in_place,
    log_in_place,
)

#: Pairs per block of the compiled loops (128 x 48 nodes: 48 kB per buffer, in L2 cache).
BLOCK: int = 128
#: The criteria of the compiled loops (:func:`criterion_code`).
COMPACTION, LINEAR, PEAKS = 0, 1, 2


def y_max(conv: PBHConventions) -> float:
    """Upper limit of the Gaussian variable: 4/3 (type I compaction) or infinity."""
    return C_L_MAX if conv.criterion == "compaction" else math.inf


def beta_mono_rows(s2: np.ndarray, k2: np.ndarray, y_th: np.ndarray,
                   conv: PBHConventions) -> np.ndarray:
    """Mass fraction above threshold [1], shape (m, n_H), ``y_th`` broadcast to it.

    The formulas of :func:`scan.observables.pbh.abundance.beta_monochromatic` (Press-
    Schechter or the BBKS high-peak number density).

    Parameters
    ----------
    s2, k2 : ndarray [1]
        sigma^2 and <k^2> R^2, shape (m, n_H).
    y_th : ndarray [1]
        Threshold of the Gaussian variable, broadcastable to (m, n_H).
    conv : PBHConventions
    """
    sigma = np.sqrt(s2)
    nu = y_th / sigma
    if conv.criterion == "peaks":
        return (k2 / 3)**1.5 * (nu * nu - 1) * np.exp(-0.5 * nu * nu) / (3 * math.pi)
    top = y_max(conv)
    upper = 0.0 if math.isinf(top) else special.erfc(top / (math.sqrt(2) * sigma))
    return 0.5 * conv.ps_factor * (special.erfc(nu / math.sqrt(2)) - upper)


def beta_weighted_pairs(s: np.ndarray, k: np.ndarray, y_th: np.ndarray,
                        conv: PBHConventions, gamma_c: np.ndarray | None = None,
                        powers: np.ndarray | None = None,
                        epoch: np.ndarray | None = None) -> np.ndarray:
    """int dy K (C - C_th)^gamma_c p(y) [1] per pair, thresholds per pair, shape (n,).

    The quadrature of :func:`scan.observables.pbh.abundance.beta_weighted`: the 48-point
    rule in z on (0, 1) of :func:`scan.observables.pbh.abundance.beta_rule` with
    y = y_th + span z^{1/gamma_c}, span = min(y_max - y_th, 14 sigma).  With e = y - y_th
    = span z^{1/gamma_c} the excess is C - C_th = e for the linear criteria and
    e (1 - (3/8)(y + y_th)) for the compaction function, so (C - C_th)^gamma_c =
    span^gamma_c z [(1 - (3/8)(y + y_th))^gamma_c]: the power of the grid is taken once
    per exponent and, for compaction, folded into the exponential.  The node sums are
    compiled (:func:`_node_sums`, module doc).

    Parameters
    ----------
    s, k : ndarray [1]
        sigma^2 and <k^2> R^2 per pair, shape (n,).
    y_th : ndarray [1]
        Threshold of the Gaussian variable per pair, shape (n,).
    conv : PBHConventions
    gamma_c : ndarray [1], optional
        Critical-collapse exponents, shape (n_e,) (e.g. one per formation epoch); default
        ``conv.gamma_c`` for every pair.
    powers : ndarray [1], optional
        :func:`node_powers` of ``gamma_c[:, None]``, shape (n_e, 48) (default: computed).
    epoch : ndarray of int, optional
        Index into ``gamma_c`` of each pair, shape (n,) (required with ``gamma_c``).

    Returns
    -------
    ndarray [1]
        Shape (n,).
    """
    s, y0 = np.asarray(s, dtype=float), np.asarray(y_th, dtype=float)
    if gamma_c is None:
        gam, epoch = np.array([conv.gamma_c]), np.zeros(s.size, dtype=np.int64)
    else:
        gam = np.asarray(gamma_c, dtype=float)
    a = node_powers(gam[:, None]) if powers is None else powers    # e / span at the nodes
    wq = _BETA_W * a / gam[:, None]   # w z z^{1/gamma_c - 1}/gamma_c: (e/span)^gamma_c dy/dz
    span = np.minimum(y_max(conv) - y0, 14 * np.sqrt(s) + 1e-300)
    sums = _node_sums(s, y0, span, np.ascontiguousarray(a), wq, gam, epoch,
                      criterion_code(conv))
    return conv.K * span**(1 + gam[epoch]) * prefactor(s, k, conv) * sums


def criterion_code(conv: PBHConventions) -> int:
    """``COMPACTION``, ``LINEAR`` (press-schechter) or ``PEAKS``: the criterion of the
    compiled loops."""
    return {"compaction": COMPACTION, "peaks": PEAKS}.get(conv.criterion, LINEAR)


@njit(cache=True, error_model="numpy")
def _node_sums(s, y0, span, powers, wq, gam, epoch, kind):
    """sum_j wq_j g_j [1] per pair, shape (n,) (see :func:`beta_weighted_pairs`): g =
    exp(-y^2/(2 s) [+ gamma_c ln(1 - (3/8)(y + y_th))]) [* (nu^3 - 3 nu)_+ for peaks] at
    y_j = y_th + span a_j, a = ``powers``[epoch], wq = ``wq``[epoch]; exactly 0 where
    the exponent is below ``X_MIN``.  In blocks of ``BLOCK`` pairs, the logarithms and
    exponentials each in one vectorised pass per block.  1 - (3/8)(y + y_th) >= (3/8)(4/3
    - y_th) > 0 for y < 4/3 (6e-9 for the largest double C_th below 2/3); the clip at
    the smallest normal number only keeps log_in_place in its range (a NaN there comes
    with a NaN y, hence a NaN exponent)."""
    n, n_z = s.size, wq.shape[1]
    arg = np.empty(BLOCK * n_z)         # the exponent
    g = np.empty(BLOCK * n_z)           # 1 - (3/8)(y + y_th), then its log; the clipped
    out = np.empty(n)                   # exponent, then its exp
    for first in range(0, n, BLOCK):
        last = min(first + BLOCK, n)
        size = (last - first) * n_z
        for p in range(first, last):
            a, q, base = powers[epoch[p]], -0.5 / s[p], (p - first) * n_z
            for j in range(n_z):
                y = y0[p] + span[p] * a[j]
                arg[base + j] = y * y * q
                g[base + j] = max(1.0 - 0.375 * (y + y0[p]), NORMAL_MIN)
        if kind == COMPACTION:
            log_in_place(g[:size])
            for p in range(first, last):
                c, base = gam[epoch[p]], (p - first) * n_z
                for j in range(n_z):
                    arg[base + j] += c * g[base + j]
        for x in range(size):
            g[x] = X_MIN if arg[x] < X_MIN else arg[x]  # noqa: FURB136 -- NaN stays NaN
        exp_in_place(g[:size])
        for p in range(first, last):
            a, w, base, total = powers[epoch[p]], wq[epoch[p]], (p - first) * n_z, 0.0
            for j in range(n_z):
                v = 0.0 if arg[base + j] < X_MIN else g[base + j]
                if kind == PEAKS:
                    nu = (y0[p] + span[p] * a[j]) / math.sqrt(s[p])
                    v *= max(nu * (nu * nu - 3.0), 0.0)
                total += v * w[j]
            out[p] = total
    return out


def node_powers(gamma_c) -> np.ndarray:
    """z^{1/gamma_c} [1] at the 48 nodes of :func:`beta_weighted_pairs`, shape (48,) for
    a number or (n, 48) for exponents of shape (n, 1)."""
    return _BETA_Z**(1 / np.asarray(gamma_c, dtype=float))
