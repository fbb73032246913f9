"""The critical-collapse mass function summed over live formation epochs, and a fast exp.

f(M) = sum_H weight(M, M_H) w_H F(M_H) p(y(M, M_H)) (see :mod:`scan.observables.pbh.abundance`):
everything but the density p depends only on the plan's (M, M_H) grid and is laid out
once per plan, epoch-major, so that each live (spectrum, epoch) pair reads one
contiguous row.  p(y) = p_0 exp(-y^2/(2 sigma^2)) [(nu^3 - 3 nu)_+ for peaks] is then one
exponential per (pair, mass), skipped where the weight is exactly 0 (compaction above
C = 2/3).

Units: masses [M_sun]; y, weights, sigma^2 and f [1].
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.observables.pbh.abundance import prefactor
from scan.observables.pbh.conventions import PBHConventions

#: exp(2 x) rounds to exactly 0 in double precision for x <= this (e^{-746} is below half
#: the smallest subnormal number, 4.9e-324).
_HALF_ZERO: float = -373.0


def half_exp(x: np.ndarray, where: np.ndarray | None = None) -> np.ndarray:
    """exp(2 x) [1] for x <= 0 (NaN and -inf included), as exp(x)^2, 0 where not
    ``where``.

    libm's exp takes slow special-case paths for |x| >= 512 (results near or below the
    smallest normal number, underflow); the Gaussian tails here reach exponents of -760
    and far beyond.  exp(x) is evaluated only where x > -373 (on libm's fast path), the
    square adds one rounding (<= 2 ulp in all); elsewhere exp(2 x) is exactly 0 in double
    precision, and so is the result.

    Parameters
    ----------
    x : ndarray [1]
        Half the exponent.
    where : ndarray of bool, optional
        Evaluate only there (0 elsewhere).

    Returns
    -------
    ndarray [1]
        Same shape as ``x``.
    """
    mask = ~(x <= _HALF_ZERO)                     # NaN stays, and propagates
    if where is not None:
        mask &= where
    g = np.zeros(x.shape)
    np.exp(x, out=g, where=mask)
    g *= g
    return g


@dataclass(frozen=True)
class MassKernel:
    """The critical-collapse kernel per formation epoch, laid out for the mass function.

    Attributes
    ----------
    quarter_y2 : ndarray [1]
        -y(M, M_H)^2 / 4, shape (n_H, n_M) (epoch-major, contiguous): half the exponent
        of the Gaussian density times sigma^2.
    y : ndarray [1] or None
        y(M, M_H), shape (n_H, n_M) (``peaks`` only).
    weight : ndarray [1]
        weight(M, M_H) w_H F(M_H) (:func:`scan.observables.pbh.abundance.critical_kernel`, the
        epoch weights and abundance coefficients), shape (n_H, n_M).
    force : ndarray of bool
        Shape (n_H,): epochs whose weights are not all finite (always evaluated, so
        that non-finite values propagate).
    nonzero : ndarray of bool or None
        weight != 0, shape (n_H, n_M), if some weights are exactly 0: the density is
        not evaluated where the weight is 0 (the term is 0 either way).
    """

    quarter_y2: np.ndarray
    y: np.ndarray | None
    weight: np.ndarray
    force: np.ndarray
    nonzero: np.ndarray | None


def mass_kernel(y: np.ndarray, weight: np.ndarray, epoch_factor: np.ndarray,
                conv: PBHConventions) -> MassKernel:
    """Lay out the kernel of :func:`scan.observables.pbh.abundance.critical_kernel` per epoch.

    Parameters
    ----------
    y, weight : ndarray [1]
        Shape (n_M, n_H), as returned by ``critical_kernel``.
    epoch_factor : ndarray [1]
        w_H F(M_H), shape (n_H,).
    conv : PBHConventions

    Returns
    -------
    MassKernel
    """
    yT = np.ascontiguousarray(y.T)
    wT = np.ascontiguousarray(weight.T * epoch_factor[:, None])
    zero = weight.T == 0
    return MassKernel(-0.25 * yT * yT, yT if conv.criterion == "peaks" else None, wT,
                      ~np.isfinite(weight).all(0),
                      np.ascontiguousarray(~zero) if zero.any() else None)


def mass_function(kernel: MassKernel, s2: np.ndarray, k2: np.ndarray, i: np.ndarray,
                  h: np.ndarray, conv: PBHConventions) -> np.ndarray:
    """f(M) = sum_H weight p(y) [1] over the (spectrum i, epoch h) pairs given.

    Parameters
    ----------
    kernel : MassKernel
    s2, k2 : ndarray [1]
        sigma^2 (> 0) and <k^2> R^2, shape (m, n_H).
    i, h : ndarray of int
        The pairs to sum (the others contribute 0), ``i`` non-decreasing (as
        :func:`numpy.nonzero` returns them).
    conv : PBHConventions

    Returns
    -------
    ndarray [1]
        Shape (m, n_M).
    """
    s, k = s2[i, h], k2[i, h]
    g = np.take(kernel.quarter_y2, h, axis=0)
    g *= (1.0 / s)[:, None]                                   # -y^2 / (4 sigma^2)
    g = half_exp(g, None if kernel.nonzero is None else np.take(kernel.nonzero, h, axis=0))
    if conv.criterion == "peaks":
        nu = np.take(kernel.y, h, axis=0) / np.sqrt(s)[:, None]
        g *= np.clip(nu * (nu * nu - 3), 0.0, None)
    g *= np.take(kernel.weight, h, axis=0)
    g *= prefactor(s, k, conv)[:, None]
    counts = np.bincount(i, minlength=s2.shape[0])
    f = np.zeros((s2.shape[0], kernel.weight.shape[1]))
    if i.size:
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        f[counts > 0] = np.add.reduceat(g, starts[counts > 0], axis=0)
    return f
