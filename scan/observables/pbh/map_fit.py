"""One-parameter and two-parameter fits of a tabulated delta-N map zeta = F(zeta_G).

The sampler's path takes an analytic map per spectrum; the model's own map
(:mod:`scan.observables.pbh.deltan`) is represented there by the logarithmic map
F = -ln(1 - lambda zeta_G)/lambda (Cai, Chen, Namjoo, Sasaki, Wang & Wang 2018,
arXiv:1712.09998, their eq. for zeta in terms of delta-N with a USR phase followed by
slow roll; Pi & Sasaki 2022, arXiv:2211.13932) fitted by least squares over
|zeta_G| <= ``SPAN`` sigma, sigma = sqrt(P_peak): :func:`fit_logarithmic`.
:func:`fit_local` fits the local (f_NL, g_NL) expansion over the same points, for
comparison (tests/tools/ng_representation.py measures both against the tabulated map's
f_PBH; the numbers are in docs/ng_model_representation.md).

Units: all quantities [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares, minimize_scalar

from scan.observables.pbh.zeta_map import ZetaMap

#: log10 P_peak [dex] below which the sampler's path keeps zeta Gaussian for ``model``
#: (the delta-N map is not computed at training time there): measured on wide_scan_high
#: models (tests/tools/ng_representation.py, docs/ng_model_representation.md), the model's
#: own f_PBH stays below 1e-100 there.
NG_LEVEL: float = -2.5
#: Half-width of the fit in units of sigma = sqrt(P_peak).
SPAN: float = 5.0
#: lambda is kept below this fraction of the edge 1/zeta_G of the largest fitted point.
EDGE_SHARE: float = 0.999
#: Largest |lambda| searched: above it the map is a wall at zeta_G = 1/lambda < 0.02.
LAMBDA_MAX: float = 50.0


@dataclass(frozen=True)
class LogFit:
    """A fitted logarithmic map.

    Attributes
    ----------
    log_lambda : float [1]
        lambda of F = -ln(1 - lambda zeta_G)/lambda.
    rms : float [1]
        Root-mean-square residual of F over the fitted points, relative to sigma.
    """

    log_lambda: float
    rms: float


def fitted_points(zmap: ZetaMap, sigma: float, span: float = SPAN):
    """The table's (zeta_G, zeta) [1] with |zeta_G| <= ``span`` ``sigma``."""
    zg, z = np.asarray(zmap.zeta_g, float), np.asarray(zmap.zeta, float)
    keep = np.abs(zg) <= span * sigma * (1 + 1e-12)
    if keep.sum() < 3:
        raise ValueError(f"the map has {keep.sum()} points within {span:g} sigma; need 3")
    return zg[keep], z[keep]


def _log_map(zg: np.ndarray, lam: float) -> np.ndarray:
    if lam == 0.0:
        return zg
    return -np.log1p(-lam * zg) / lam


def fit_logarithmic(zmap: ZetaMap, sigma: float, span: float = SPAN) -> LogFit:
    """Least-squares lambda [1] of the logarithmic map to a tabulated ``zmap`` over
    |zeta_G| <= ``span`` ``sigma`` (lambda restricted to where every fitted point is
    inside the map's domain lambda zeta_G < 1)."""
    zg, z = fitted_points(zmap, sigma, span)
    hi = min(LAMBDA_MAX, EDGE_SHARE / zg.max()) if zg.max() > 0 else LAMBDA_MAX
    lo = max(-LAMBDA_MAX, EDGE_SHARE / zg.min()) if zg.min() < 0 else -LAMBDA_MAX

    def cost(lam: float) -> float:
        return float(np.sum((_log_map(zg, lam) - z) ** 2))

    # the cost is smooth in lambda; start from the f_NL of the quadratic part
    res = minimize_scalar(cost, bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-10 * max(1.0, hi - lo)})
    lam = float(res.x)
    return LogFit(lam, math.sqrt(cost(lam) / zg.size) / sigma)


def fit_local(zmap: ZetaMap, sigma: float, span: float = SPAN) -> tuple[float, float]:
    """Least-squares (f_NL, g_NL) [1] of F - zeta_G = (3/5) f_NL zeta_G^2 +
    (9/25) g_NL zeta_G^3 over |zeta_G| <= ``span`` ``sigma``."""
    zg, z = fitted_points(zmap, sigma, span)
    design = np.column_stack([0.6 * zg**2, 0.36 * zg**3])
    coef, *_ = np.linalg.lstsq(design, z - zg, rcond=None)
    return float(coef[0]), float(coef[1])


@dataclass(frozen=True)
class CappedFit:
    """A fitted capped logarithmic map (:class:`ZetaMap` ``logarithmic`` with
    ``slope_max``).

    Attributes
    ----------
    log_lambda : float [1]
    slope_max : float [1]
        The cap of F' (> 1).
    rms : float [1]
        Root-mean-square residual of F over the fitted points, relative to sigma.
    """

    log_lambda: float
    slope_max: float
    rms: float

    def zeta_map(self) -> ZetaMap:
        """The fitted map."""
        return ZetaMap("logarithmic", log_lambda=self.log_lambda, slope_max=self.slope_max)


#: Half-width of the capped fit [sigma]: the whole delta-N table (6 sigma,
#: :func:`scan.observables.pbh.deltan.peak_map`), whose end slope the model map continues.
CAPPED_SPAN: float = 6.0


def fit_capped(zmap: ZetaMap, sigma: float, span: float = CAPPED_SPAN,
               cap: str = "fit") -> CappedFit:
    """Least-squares (lambda, slope_max) [1] of the capped logarithmic map to a tabulated
    ``zmap`` over |zeta_G| <= ``span`` ``sigma`` (residuals in F; parameters lambda and
    ln(slope_max - 1), started from the table's f_NL and its largest slope).

    ``cap = "max"``: slope_max is the map's largest slope over the fitted points and their
    linear continuation (the end slopes), and only lambda is fitted: the tail of C_l,
    where black holes form, follows the largest F'.
    """
    zg, z = fitted_points(zmap, sigma, span)
    slopes = zmap.slope(np.concatenate([zg, [zg[0] - sigma, zg[-1] + sigma]]))
    top = float(np.max(slopes))
    lam0 = 1.2 * zmap.f_nl_equivalent()
    if abs(lam0) < 1e-6 / sigma:
        lam0 = 1e-6 / sigma
    fixed = cap == "max"

    def residual(p):
        slope_max = top if fixed else 1 + math.exp(p[1])
        m = ZetaMap("logarithmic", log_lambda=p[0] / sigma, slope_max=slope_max)
        return (m.value(zg) - z) / sigma

    start = [lam0 * sigma] if fixed else [lam0 * sigma, math.log(max(top - 1, 1e-3))]
    lo, hi = [-LAMBDA_MAX * sigma, -12.0], [LAMBDA_MAX * sigma, 8.0]
    n = len(start)
    res = least_squares(residual, start, x_scale=[0.1, 1.0][:n], xtol=1e-12, ftol=1e-14,
                        gtol=1e-14, bounds=(lo[:n], hi[:n]))
    lam = float(res.x[0] / sigma)
    slope_max = top if fixed else 1 + math.exp(float(res.x[1]))
    return CappedFit(lam, slope_max, float(np.sqrt(np.mean(res.fun**2))))
