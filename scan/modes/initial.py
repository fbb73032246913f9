"""Bunch-Davies initial data with the de Sitter correction, in per-mode scaled variables.

Scaled variables (mode k exits at N_k, k = a_k H_k, eps_k = eps1(N_k), n = N - N_k):
q = k^{3/2} zeta sqrt(eps_k)/H_k and p~ = Pi k^{3/2} e^{-n}/(2 a_k^3 H_k^2 sqrt(eps_k)),
so that P_zeta = |q|^2 H_k^2/(2 pi^2 eps_k) and both are O(1) near horizon exit.
From v = e^{-ik tau}(1 - i/(k tau))/sqrt(2k), tau = -1/[aH(1 - eps1)], zeta = v/z,
Pi = z(v_tau - (z_tau/z) v), z_tau/z = aH(1 + eps2/2) (the common phase e^{-ik tau} is
dropped): q = e^{-n} f/(2 sqrt(e)), p~ = sqrt(e) B/2 with e = eps1/eps_k,
f = 1 - i/(k tau), B = -i - 1/(k tau) + i/(k tau)^2 - (1 + eps2/2)(1 - i/(k tau))/x.
Tensors (z_t = a/sqrt(8)): the same with e = 1 and eps2 -> 0.
"""
from __future__ import annotations

import numpy as np


def bunch_davies(n: np.ndarray, x: np.ndarray, eps1: np.ndarray, eps2: np.ndarray,
                 e: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Scaled (q, p~) at relative e-fold ``n`` where k/(aH) = ``x``.

    Parameters
    ----------
    n : ndarray
        N - N_k at the initial time [e-folds].
    x : ndarray
        k/(aH) at that time.
    eps1, eps2 : ndarray
        Background flow parameters at that time (eps2 = 0 for tensors).
    e : ndarray
        eps1/eps_k (1 for tensors).

    Returns
    -------
    q, p : complex ndarray
    """
    ktau = -x / (1.0 - eps1)
    f = 1.0 - 1j / ktau
    B = -1j - 1.0 / ktau + 1j / ktau**2 - (1.0 + 0.5 * eps2) * f / x
    se = np.sqrt(e)
    return np.exp(-n) * f / (2.0 * se), se * B / 2.0
