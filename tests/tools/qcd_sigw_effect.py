"""Measure how the QCD-era w(T), c_s^2(T) change Omega_GW for nanohertz spectra.

Direct quadrature (no plan): Omega_GW(eta_c, k) = int_0^inf dt int_0^1 ds K(u, v)
P(ku) P(kv) (u, v = (t +- s + 1)/2, u <-> v symmetry), with Gauss-Legendre panels in
ln|t - (sqrt(3) - 1)| on both sides of the RD log resonance, once with the closed-form
RD kernel and once with :func:`scan.observables.sigw_fluid.fluid_kernel` on the
Saikawa & Shirai 2018 background of each k; the printed ratio is what multiplies
Omega_GW h^2 today (the transfer c_g(T_c) is common to both).  Spectra are synthetic
(log-normal peaks and a flat P).  Slow (tens of seconds per k): an offline tool.

    python tests/tools/qcd_sigw_effect.py

Measured with this tool (commit introducing it; ratio = Saikawa-Shirai background / RD):
log-normal width 0.5 at f_* = 10 nHz: 1.04, 1.86, 1.68, 1.06 at k/k_* = 0.5, 1, 2/sqrt(3),
1.5; width 0.2: 0.86, 2.32, 1.63, 0.62; flat P (t <= 15): 1.13, 1.18, 1.55, 0.76, 0.82 at
f = 1, 3, 10, 30, 100 nHz; width 0.5 at f_* = 3 nHz: 1.08, 1.24, 1.25, 1.31, at 30 nHz:
1.18, 0.75, 0.68, 0.60, at 100 nHz: 1.03, 0.82, 0.76, 0.70 (k/k_* = 0.5, 1, 2/sqrt(3),
1.5).  The RD values reproduce an independent computation of the log-normal case in the
setup of Pi & Sasaki 2020 (arXiv:2005.12306; 0.2996, 0.3160 at width 0.5 -- computed, not a
published number) to 1e-4.
"""
from __future__ import annotations

import itertools
import math
import sys

import numpy as np

from scan.observables import cosmo
from scan.observables import sigw_fluid as sf
from scan.observables.sigw import induced_kernel

T_RES = math.sqrt(3.0) - 1.0


def _panels(a: float, b: float, n_panels: int, n_gl: int = 6):
    """Gauss-Legendre nodes/weights on [a, b] in n_panels equal panels."""
    x, w = np.polynomial.legendre.leggauss(n_gl)
    edges = np.linspace(a, b, n_panels + 1)
    pairs = list(itertools.pairwise(edges))
    nodes = [0.5 * (hi - lo) * x + 0.5 * (hi + lo) for lo, hi in pairs]
    weights = [0.5 * (hi - lo) * w for lo, hi in pairs]
    return np.concatenate(nodes), np.concatenate(weights)


def nodes(t_max: float = 15.0):
    """(u, v, weight) of the (s, t) quadrature (panels in ln|t - t_res|, t <= t_max)."""
    tau_l, w_l = _panels(math.log(1e-8), math.log(T_RES), 6)
    tau_r, w_r = _panels(math.log(1e-8), math.log(t_max - T_RES), 8)
    t = np.concatenate([T_RES - np.exp(tau_l), T_RES + np.exp(tau_r)])
    wt = np.concatenate([w_l * np.exp(tau_l), w_r * np.exp(tau_r)])
    s, ws = _panels(0.0, 1.0, 2)
    T, S = np.meshgrid(t, s, indexing="ij")
    W = np.outer(wt, ws)
    return (0.5 * (T + S + 1)).ravel(), (0.5 * (T - S + 1)).ravel(), W.ravel()


def omega_ratio(k: float, spectrum, u, v, weight) -> tuple[float, float]:
    """(Omega_GW with the RD kernel, ratio table-background / RD) at k [Mpc^-1]."""
    pp = spectrum(k * u) * spectrum(k * v) * weight
    keep = pp > 1e-12 * pp.max()
    rd = float(np.sum(induced_kernel(u[keep], v[keep]) * pp[keep]))
    bg = sf.table_background(float(cosmo.temperature_of_k(k)))
    qcd = float(np.sum(sf.fluid_kernel(u[keep], v[keep], bg) * pp[keep]))
    return rd, qcd / rd


def lognormal(k_star: float, width: float):
    """P(k) = exp(-ln^2(k/k_star)/(2 width^2)) / (sqrt(2 pi) width) (amplitude 1)."""
    return lambda k: np.exp(-np.log(k / k_star)**2 / (2 * width**2)) \
        / (math.sqrt(2 * math.pi) * width)


def main() -> int:
    u, v, w = nodes()
    f_star = 1e-8
    k_star = float(cosmo.f_to_k(f_star))
    for width in (0.5, 0.2):
        for x in (0.5, 1.0, 2 / math.sqrt(3), 1.5):
            rd, ratio = omega_ratio(x * k_star, lognormal(k_star, width), u, v, w)
            print(f"log-normal width {width}, f_* = {f_star:.0e} Hz, k/k_* = {x:.3f}: "
                  f"Omega/A^2 (RD) = {rd:.4g}, ratio = {ratio:.4f}", flush=True)
    for f in (1e-9, 3e-9, 1e-8, 3e-8, 1e-7):
        k = float(cosmo.f_to_k(f))
        rd, ratio = omega_ratio(k, lambda q: np.ones_like(q), u, v, w)
        print(f"flat P, f = {f:.0e} Hz (T_c = {float(cosmo.temperature_of_k(k)):.3g} GeV): "
              f"Omega/A^2 (RD, t <= 15) = {rd:.4g}, ratio = {ratio:.4f}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
