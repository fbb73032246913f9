"""Smoothed density variance at horizon crossing, sigma^2(R), for a tabulated P_zeta.

sigma_j^2(R) = (16/81) int dln k (kR)^4 W^2(kR) T^2(kR) (kR)^{2j} P_zeta(k),
T(x) = 3 (sin y - y cos y)/y^3 with y = x/sqrt(3) (linear radiation-era transfer at
eta = R), comoving gauge (e.g. Young, Byrnes & Sasaki 2014, arXiv:1405.7023; Ando,
Inomata & Kawasaki 2018, arXiv:1802.06393).  j = 0 is the variance; j = 1 gives
<k^2> R^2 = sigma_1^2 / sigma_0^2 for peaks theory.  R = 1/k_H with k_H = a H at the
horizon mass M_H (see :mod:`scan.observables.cosmo`).  The ln k integral is the trapezoid rule on
the table's own grid (P linear between table points).
"""
from __future__ import annotations

import numpy as np

WINDOWS: tuple[str, ...] = ("gaussian", "top-hat")


def transfer_rd(x):
    """Linear RD density transfer T(kR) [1] at eta = R (x = kR)."""
    y = np.asarray(x, dtype=float) / np.sqrt(3.0)
    small = y < 1e-3
    ys = np.where(small, 1.0, y)
    full = 3 * (np.sin(ys) - ys * np.cos(ys)) / ys**3
    return np.where(small, 1.0 - y * y / 10, full)


def window(x, kind: str = "gaussian"):
    """Smoothing window W(kR) [1]: ``"gaussian"`` exp(-x^2/2) or real-space ``"top-hat"``."""
    x = np.asarray(x, dtype=float)
    if kind == "gaussian":
        return np.exp(-0.5 * x * x)
    if kind == "top-hat":
        small = x < 1e-3
        xs = np.where(small, 1.0, x)
        return np.where(small, 1.0 - x * x / 10, 3 * (np.sin(xs) - xs * np.cos(xs)) / xs**3)
    raise ValueError(f"unknown window '{kind}' (choose from {WINDOWS})")


def variance_integrand(x, kind: str = "gaussian", moment: int = 0):
    """(16/81) x^4 W^2(x) T^2(x) x^{2 moment} [1]: sigma_j^2 per ln k per unit P."""
    x = np.asarray(x, dtype=float)
    return (16 / 81) * x**(4 + 2 * moment) * (window(x, kind) * transfer_rd(x))**2


def lnk_weights(k_in) -> tuple[np.ndarray, np.ndarray]:
    """(ln k, trapezoid weights in ln k) of the table ``k_in`` [Mpc^-1]."""
    lnk = np.log(np.asarray(k_in, dtype=float))
    w = np.zeros_like(lnk)
    dl = np.diff(lnk)
    w[:-1] += 0.5 * dl
    w[1:] += 0.5 * dl
    return lnk, w


def variance_matrix(k_in, R, kind: str = "gaussian", moment: int = 0) -> np.ndarray:
    """Matrix V with sigma_j^2(R) = V @ P on the table ``k_in`` [Mpc^-1], R [Mpc]."""
    lnk, w = lnk_weights(k_in)
    x = np.outer(np.atleast_1d(R), np.exp(lnk))
    return variance_integrand(x, kind, moment) * w


def variance(k_in, P_zeta, R, kind: str = "gaussian", moment: int = 0) -> np.ndarray:
    """sigma_j^2(R) [1] for ``P_zeta`` [1] tabulated on ``k_in`` [Mpc^-1]; R [Mpc]."""
    return variance_matrix(k_in, R, kind, moment) @ np.asarray(P_zeta, dtype=float)


def variance_delta(k_star: float, amplitude: float, R, kind: str = "gaussian",
                   moment: int = 0) -> np.ndarray:
    """sigma_j^2(R) [1] for P = A delta(ln(k/k_star)); k_star [Mpc^-1], R [Mpc]."""
    return amplitude * variance_integrand(k_star * np.asarray(R, dtype=float), kind, moment)
