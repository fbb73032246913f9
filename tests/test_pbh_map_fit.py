"""Fits of a tabulated zeta = F(zeta_G) (scan/observables/pbh/map_fit.py) recover the
parameters of exact tables."""
from __future__ import annotations

import numpy as np
import pytest

from scan.observables.pbh.map_fit import fit_capped, fit_local, fit_logarithmic
from scan.observables.pbh.zeta_map import ZetaMap


def _table(zmap: ZetaMap, sigma: float, n: int = 41) -> ZetaMap:
    """A ``model`` map tabulated from ``zmap`` on |zeta_G| <= 6 sigma (as deltan.peak_map)."""
    zg = np.linspace(-6 * sigma, 6 * sigma, n)
    return ZetaMap("model", zeta_g=zg, zeta=zmap.value(zg))


@pytest.mark.parametrize("lam, sigma", [(3.0, 0.05), (1.0, 0.15), (-2.0, 0.05),
                                        (0.2, 0.3)])
def test_logarithmic_fit_recovers_lambda(lam, sigma):
    """An exact table of F = -ln(1 - lambda zeta_G)/lambda (Cai, Chen, Namjoo, Sasaki,
    Wang & Wang 2018, arXiv:1712.09998) gives lambda back to the bounded scalar search's
    tolerance (xatol 1e-10 of the bracket, <= 1e-7 relative here)."""
    fit = fit_logarithmic(_table(ZetaMap("logarithmic", log_lambda=lam), sigma), sigma)
    assert fit.log_lambda == pytest.approx(lam, rel=1e-7)
    assert fit.rms < 1e-6


@pytest.mark.parametrize("lam, cap, sigma", [(1.0, 4.0, 0.15), (3.0, 2.5, 0.05),
                                             (-1.5, 3.0, 0.1)])
def test_capped_fit_recovers_both_parameters(lam, cap, sigma):
    """An exact capped table gives (lambda, slope_max) back; the cap's edge falls between
    table points, where F is still exact (the cap makes F piecewise smooth), so the
    residual vanishes at the truth and least squares (xtol 1e-12) finds it to <= 1e-6."""
    fit = fit_capped(_table(ZetaMap("logarithmic", log_lambda=lam, slope_max=cap), sigma),
                     sigma)
    assert fit.log_lambda == pytest.approx(lam, rel=1e-6)
    assert fit.slope_max == pytest.approx(cap, rel=1e-6)
    assert fit.rms < 1e-6


def test_local_fit_recovers_coefficients():
    """F = zeta_G + (3/5) f_NL zeta_G^2 + (9/25) g_NL zeta_G^3 is linear in (f_NL, g_NL):
    the least-squares solution is exact to rounding."""
    sigma = 0.1
    f_nl, g_nl = fit_local(_table(ZetaMap("local", f_nl=2.5, g_nl=-4.0), sigma), sigma)
    assert (f_nl, g_nl) == pytest.approx((2.5, -4.0), rel=1e-10)
