"""Mass fractions per (spectrum, epoch) pair, each pair with its own threshold (and exponent).

The quadratures of :func:`scan.observables.pbh.abundance.beta_monochromatic` and
:func:`scan.observables.pbh.abundance.beta_weighted`, evaluated elementwise over pairs so
that the threshold (a sampled nuisance, or the QCD-era threshold of each formation epoch,
:mod:`scan.observables.pbh.qcd`) and the critical-collapse exponent may differ from pair
to pair.  Used by :mod:`scan.observables.pbh.threshold_plan`.

Units: every quantity [1].
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from scan.observables.pbh.abundance import _BETA_W, _BETA_Z, prefactor
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.kernel import half_exp
from scan.observables.pbh.thresholds import C_L_MAX


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
                        powers: np.ndarray | None = None) -> np.ndarray:
    """int dy K (C - C_th)^gamma_c p(y) [1] per pair, thresholds per pair, shape (n,).

    The quadrature of :func:`scan.observables.pbh.abundance.beta_weighted`: the 48-point
    rule in z on (0, 1) of :func:`scan.observables.pbh.abundance.beta_rule` with
    y = y_th + span z^{1/gamma_c}, span = min(y_max - y_th, 14 sigma).  With e = y - y_th = span z^{1/gamma_c} the excess is C - C_th = e for
    the linear criteria and e (1 - (3/8)(y + y_th)) for the compaction function, so
    (C - C_th)^gamma_c = span^gamma_c z [(1 - (3/8)(y + y_th))^gamma_c]: the power of
    the grid is taken once (per pair when ``gamma_c`` is given per pair) and, for
    compaction, folded into the exponential.

    Parameters
    ----------
    s, k : ndarray [1]
        sigma^2 and <k^2> R^2 per pair, shape (n,).
    y_th : ndarray [1]
        Threshold of the Gaussian variable per pair, shape (n,).
    conv : PBHConventions
    gamma_c : ndarray [1], optional
        Critical-collapse exponent per pair, shape (n,) (default ``conv.gamma_c``).
    powers : ndarray [1], optional
        z^{1/gamma_c} at the rule's nodes per pair, shape (n, 48) (:func:`node_powers`
        of the pairs' exponents, gathered; default: computed here).

    Returns
    -------
    ndarray [1]
        Shape (n,).
    """
    gam = conv.gamma_c if gamma_c is None else np.asarray(gamma_c, dtype=float)[:, None]
    a = node_powers(gam) if powers is None else powers     # e / span at the nodes
    wq = _BETA_W * a / gam            # w z z^{1/gamma_c - 1}/gamma_c: (e/span)^gamma_c dy/dz
    sc, y0 = s[:, None], y_th[:, None]
    span = np.minimum(y_max(conv) - y0, 14 * np.sqrt(sc) + 1e-300)
    y = y0 + span * a
    arg = y * y * (-0.5 / sc)
    if conv.criterion == "compaction":
        with np.errstate(divide="ignore"):
            arg += gam * np.log(np.maximum(1 - 0.375 * (y + y0), 0.0))
    g = half_exp(0.5 * arg)
    if conv.criterion == "peaks":
        nu = y / np.sqrt(sc)
        g *= np.clip(nu * (nu * nu - 3), 0.0, None)
    row = conv.K * (span**(1 + gam))[:, 0] * prefactor(s, k, conv)
    return row * (g @ wq if wq.ndim == 1 else np.einsum("ij,ij->i", g, wq))


def node_powers(gamma_c) -> np.ndarray:
    """z^{1/gamma_c} [1] at the 48 nodes of :func:`beta_weighted_pairs`, shape (48,) for
    a number or (n, 48) for exponents of shape (n, 1)."""
    return _BETA_Z**(1 / np.asarray(gamma_c, dtype=float))
