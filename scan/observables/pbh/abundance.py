"""PBH mass fraction at formation, the extended mass function and f_PBH.

Normalisation (entropy conservation): a mass fraction beta = rho_PBH/rho at formation,
when the horizon mass is M_H at temperature T_f, gives

    f_PBH = (3/4) beta T_f (g_*/g_*s)(T_f) s_0 / (rho_c,0 Omega_DM),

i.e. 1.673e8 (gamma/0.2)^{1/2} (g_*/106.75)^{-1/4} (0.12/Omega_DM h^2) (M/M_sun)^{-1/2} beta
for M = gamma M_H (Carr, Kohri, Sendouda & Yokoyama 2010, arXiv:0912.5297).
Critical collapse (Niemeyer & Jedamzik 1998): M = K M_H (C - C_th)^gamma_c and

    f(M) = int dln M_H  F(M_H) (M/M_H) p(y) (dy/dC) x / gamma_c,   x = (M/(K M_H))^{1/gamma_c},

with y the Gaussian variable (C_l or delta) at C = C_th + x, p its density (Gaussian
x ps_factor, or the BBKS high-peak density), F the normalisation above.  f is per ln M;
the total is int dln M_H F(M_H) int dy K (C - C_th)^gamma_c p(y).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from scan import constants as C
from scan.observables import cosmo
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.thresholds import C_L_MAX, C_MAX, compaction_linear

#: Nodes and weights of the beta rule in z = ((y - y_th)/span)^gamma_c on (0, 1).
BETA_NODES: int = 48
#: The rule's z nodes are t^GRADING for Gauss-Legendre nodes t on (0, 1) (see
#: :func:`beta_rule`).
GRADING: float = 1.3


def beta_rule(n: int = BETA_NODES, grading: float = GRADING) -> tuple[np.ndarray, np.ndarray]:
    """Nodes z and weights [1] on (0, 1) of the mass-weighted beta's rule in z.

    In z = ((y - y_th)/span)^gamma_c the integrand is z^{1/gamma_c} F(z^{1/gamma_c}), F
    smooth and steep (e^{-nu_th P a}, a = z^{1/gamma_c}, nu_th P up to ~1e4): not analytic
    at z = 0 for non-integer 1/gamma_c, so Gauss-Legendre in z converges only
    algebraically (48 points: 4e-10 high at nu_th = 37 against scipy's QAWS).  With z =
    t^``grading`` and ``n``-point Gauss-Legendre in t the end point is weaker and the
    steep part gets more nodes.  Measured against a 20 x 200-point composite rule (itself
    within 1e-13 of QAWS) for C_th 0.1 to 0.66 and nu_th 2 to 39: 48 points with grading
    1.3 within 5.1e-13 for gamma_c 0.33 to 0.36 and 2.3e-12 down to 0.27 (the QCD-era
    exponents reach 0.28); 56 points with grading 1.5 within 1.1e-13, but they made the
    direct per-pair quadrature of the QCD-era Gaussian stack (pair_beta.py) 15-35 %
    slower (measured).  The check against QAWS: tests/test_pbh_tables.py.
    """
    t, w = np.polynomial.legendre.leggauss(n)
    t, w = 0.5 * (t + 1), 0.5 * w
    return t**grading, w * grading * t**(grading - 1)


_BETA_Z, _BETA_W = beta_rule()


def abundance_coefficient(M_H_msun, dof: cosmo.Dof = None, omega_dm_h2: float = 0.12,
                          n_eff: float = cosmo.N_EFF_DEFAULT):
    """F(M_H) [1] with f_PBH = F beta, beta the mass fraction at horizon mass M_H [M_sun].

    Today's entropy s_0 uses g_*s0 for ``n_eff`` (3.909 for N_eff = 3, 3.935 for 3.044).
    """
    T = cosmo.temperature_of_horizon_mass(M_H_msun, dof)
    g, gs = cosmo._dof_at(dof, T)
    T0 = C.T_CMB_K * C.K_B_GEV_PER_K
    s0 = 2 * math.pi**2 / 45 * cosmo.dof_today(n_eff)[1] * T0**3
    rho_dm = 3 * C.H100_GEV**2 * C.M_PLANCK_REDUCED_GEV**2 * omega_dm_h2
    return 0.75 * T * (g / gs) * s0 / rho_dm


def fpbh_prefactor(gamma: float = 0.2, g_star: float = 106.75, omega_dm_h2: float = 0.12,
                   n_eff: float = cosmo.N_EFF_DEFAULT) -> float:
    """Coefficient c [1] of f_PBH = c (M/M_sun)^{-1/2} beta for M = gamma M_H, g_* = g_*s."""
    return float(abundance_coefficient(1.0 / gamma, (g_star, g_star), omega_dm_h2, n_eff))


def _relation(conv: PBHConventions) -> tuple[float, float]:
    """(threshold in y, upper limit of y) for the criterion."""
    if conv.criterion == "compaction":
        return float(compaction_linear(conv.threshold)), C_L_MAX
    return conv.threshold, math.inf


def density(y, sigma2, kR2, conv: PBHConventions):
    """Probability density p(y) [1] of the Gaussian variable y at smoothing variance sigma2.

    ``kR2`` = <k^2> R^2 (used by peaks theory only, BBKS 1986 high-peak limit, each peak
    assigned the volume (4 pi/3) R^3).
    """
    sigma = np.sqrt(sigma2)
    nu = y / sigma
    if conv.criterion == "peaks":
        shape = np.clip(nu**3 - 3 * nu, 0.0, None) * np.exp(-0.5 * nu * nu)
        return (kR2 / 3)**1.5 * shape / (3 * math.pi * sigma)
    return conv.ps_factor * np.exp(-0.5 * nu * nu) / (math.sqrt(2 * math.pi) * sigma)


def prefactor(sigma2, kR2, conv: PBHConventions):
    """The y-independent factor p_0 [1] of :func:`density` at ``sigma2`` [1] (and <k^2> R^2
    = ``kR2`` [1] for peaks): p = p_0 e^{-nu^2/2} (times (nu^3 - 3 nu)_+ for peaks)."""
    if conv.criterion == "peaks":
        return (kR2 / 3)**1.5 / (3 * math.pi * np.sqrt(sigma2))
    return conv.ps_factor / (math.sqrt(2 * math.pi) * np.sqrt(sigma2))


def beta_monochromatic(sigma2, kR2, conv: PBHConventions):
    """Mass fraction beta [1] above threshold (no extra factor gamma; Carr et al. 2010)."""
    y_th, y_max = _relation(conv)
    sigma = np.sqrt(sigma2)
    nu = y_th / sigma
    if conv.criterion == "peaks":
        return (kR2 / 3)**1.5 * (nu * nu - 1) * np.exp(-0.5 * nu * nu) / (3 * math.pi)
    upper = 0.0 if math.isinf(y_max) else special.erfc(y_max / (math.sqrt(2) * sigma))
    return 0.5 * conv.ps_factor * (special.erfc(nu / math.sqrt(2)) - upper)


def _excess(e, y_th: float, conv: PBHConventions):
    """C - C_th [1] at y = y_th + ``e``: e (1 - (3/8)(y + y_th)) for ``compaction``
    (factored: no cancellation near y_th), e otherwise; never negative."""
    if conv.criterion == "compaction":
        return e * np.clip(1 - 0.375 * (e + 2 * y_th), 0.0, None)
    return e


def beta_weighted(sigma2, kR2, conv: PBHConventions):
    """Mass-weighted beta = int dy K (C - C_th)^gamma_c p(y) [1] (critical collapse), by
    :func:`beta_rule` in z = ((y - y_th)/span)^gamma_c, span = min(y_max - y_th, 14 sigma)."""
    y_th, y_max = _relation(conv)
    sigma = np.sqrt(np.atleast_1d(sigma2))[:, None]
    span = np.minimum(y_max - y_th, 14 * sigma + 1e-300)
    z = _BETA_Z[None, :]
    e = span * z**(1 / conv.gamma_c)                    # y - y_th
    y = y_th + e
    dy = span * z**(1 / conv.gamma_c - 1) / conv.gamma_c
    excess = _excess(e, y_th, conv)
    p = density(y, sigma**2, np.atleast_1d(kR2)[:, None], conv)
    return (conv.K * excess**conv.gamma_c * p * dy) @ _BETA_W


def critical_kernel(M_msun, M_H_msun, conv: PBHConventions, thresholds=None,
                    exponents=None):
    """Geometry of critical collapse on an (M, M_H) grid: (y, weight, valid).

    weight = (M/M_H) (dy/dC) x / gamma_c, so dbeta/dlnM = weight * p(y).
    ``thresholds`` [1]: one threshold per epoch M_H (default: ``conv.threshold``);
    ``exponents`` [1]: one gamma_c per epoch (default: ``conv.gamma_c``).
    """
    thr = conv.threshold if thresholds is None else np.asarray(thresholds)[None, :]
    gam = conv.gamma_c if exponents is None else np.asarray(exponents)[None, :]
    y_th = compaction_linear(thr) if conv.criterion == "compaction" else thr
    ratio = np.asarray(M_msun)[:, None] / np.asarray(M_H_msun)[None, :]
    with np.errstate(over="ignore"):  # M >> K M_H: x -> inf, outside the valid branch
        x = (ratio / conv.K)**(1 / gam)
    c = thr + x
    if conv.criterion == "compaction":
        valid = c < C_MAX
        y = compaction_linear(np.minimum(c, C_MAX))
        dy_dc = 1 / np.sqrt(np.clip(1 - 1.5 * c, 1e-300, None))
    else:
        valid = np.ones_like(c, dtype=bool)
        y, dy_dc = c, np.ones_like(c)
    with np.errstate(over="ignore", invalid="ignore"):
        weight = np.where(valid, ratio * dy_dc * x / gam, 0.0)
    return np.where(valid, y, y_th), weight, valid
