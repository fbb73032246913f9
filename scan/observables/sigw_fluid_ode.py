"""Compiled time integration of the induced-GW kernel on a perfect-fluid background.

Units: conformal time eta in units of 1/k (x = k eta), scale factor a in units of its
value a_c at re-entry of k (k = a_c H_c), so the conformal Hubble rate is
H = sqrt(eps(a))/a with eps = (a^4 rho)/(a^4 rho)_c.  The background is given on a
uniform grid in N = ln a: the equation of state w(N), the adiabatic sound speed squared
c_s^2(N) and ln eps(N).  For one pair (u, v) the integrator advances, with classical
fourth-order Runge-Kutta,

* the two scalar transfer functions T_q = Phi_q/zeta_q (q = u, v; Newtonian gauge, no
  anisotropic stress, adiabatic perfect fluid; Mukhanov, Feldman & Brandenberger 1992,
  Phys. Rep. 215, 203, Eq. for Phi with c_s^2, from memory):
      T'' + 3(1 + c_s^2) H T' + [c_s^2 q^2 + 3(c_s^2 - w) H^2] T = 0
  (the bracket's 2H' + (1 + 3c_s^2)H^2 rewritten with H' = -(1 + 3w)H^2/2);
* two homogeneous solutions y_1, y_2 of the tensor equation for a h,
      y'' + (1 - a''/a) y = 0,   a''/a = (1 - 3w) H^2 / 2,
  started as cos and sin (Wronskian 1);
* the Green's-function integrals C_i = int a f y_i d eta of the source (Kohri & Terada
  2018, arXiv:1804.08577, their f for constant w, here with w(eta)):
      f = 2 T_u T_v + 4/(3(1 + w)) (T_u'/H + T_u)(T_v'/H + T_v).

Then a I(eta) = C_1 y_2 - C_2 y_1, and the late-time, oscillation-averaged square is
((a I)^2 + (a I)'^2)/2 evaluated with C_i averaged over a Hann window in eta (the
partial integrals converge only as oscillating 1/eta terms, which the smooth window
averages away; see :mod:`scan.observables.sigw_fluid`).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

#: Step control: at most this fraction of the fastest period/(2 pi), and of eta itself.
OMEGA_STEP: float = 0.05
ETA_STEP: float = 0.05


@njit(cache=True)
def _coefficients(a: float, n0: float, dn: float, w_tab, cs2_tab, lneps_tab):
    """(w, c_s^2, H) at scale factor a, linear in N = ln a on the uniform grid."""
    x = (math.log(a) - n0) / dn
    last = w_tab.size - 1
    if x <= 0.0:
        i, f = 0, 0.0
    elif x >= last:
        i, f = last - 1, 1.0
    else:
        i = int(x)
        f = x - i
    w = w_tab[i] + f * (w_tab[i + 1] - w_tab[i])
    cs2 = cs2_tab[i] + f * (cs2_tab[i + 1] - cs2_tab[i])
    lneps = lneps_tab[i] + f * (lneps_tab[i + 1] - lneps_tab[i])
    return w, cs2, math.exp(0.5 * lneps) / a


@njit(cache=True)
def _rhs(y, u: float, v: float, n0: float, dn: float, w_tab, cs2_tab, lneps_tab, out):
    """Time derivatives of the state (a, T_u, T_u', T_v, T_v', y1, y1', y2, y2', C1, C2)."""
    a = y[0]
    w, cs2, hub = _coefficients(a, n0, dn, w_tab, cs2_tab, lneps_tab)
    hub2 = hub * hub
    mass = 3.0 * (cs2 - w) * hub2
    friction = 3.0 * (1.0 + cs2) * hub
    out[0] = a * hub
    out[1] = y[2]
    out[2] = -friction * y[2] - (cs2 * u * u + mass) * y[1]
    out[3] = y[4]
    out[4] = -friction * y[4] - (cs2 * v * v + mass) * y[3]
    omega2 = 1.0 - 0.5 * (1.0 - 3.0 * w) * hub2
    out[5] = y[6]
    out[6] = -omega2 * y[5]
    out[7] = y[8]
    out[8] = -omega2 * y[7]
    src = a * (2.0 * y[1] * y[3] + 4.0 / (3.0 * (1.0 + w))
               * (y[2] / hub + y[1]) * (y[4] / hub + y[3]))
    out[9] = src * y[5]
    out[10] = src * y[7]


@njit(cache=True)
def _initial_state(a_start: float, n0: float, dn: float, w_tab, cs2_tab, lneps_tab):
    """Superhorizon start: T = 3(1 + w)/(5 + 3w), T' = 0, y1 = cos, y2 = sin, C = 0.

    Returns the state and k eta = 2/((1 + 3w) H) (exact for constant w, a ~ eta^{2/(1+3w)}).
    """
    w0, _, hub0 = _coefficients(a_start, n0, dn, w_tab, cs2_tab, lneps_tab)
    eta = 2.0 / ((1.0 + 3.0 * w0) * hub0)
    state = np.zeros(11)
    state[0] = a_start
    state[1] = state[3] = 3.0 * (1.0 + w0) / (5.0 + 3.0 * w0)
    state[5], state[6] = math.cos(eta), -math.sin(eta)
    state[7], state[8] = math.sin(eta), math.cos(eta)
    return state, eta


@njit(cache=True)
def _rk4_step(state, h: float, u: float, v: float, n0: float, dn: float, w_tab, cs2_tab,
              lneps_tab, work) -> None:
    """One classical Runge-Kutta step of size h, in place (``work``: 5 x 11 scratch)."""
    k1, k2, k3, k4, tmp = work[0], work[1], work[2], work[3], work[4]
    _rhs(state, u, v, n0, dn, w_tab, cs2_tab, lneps_tab, k1)
    for i in range(11):
        tmp[i] = state[i] + 0.5 * h * k1[i]
    _rhs(tmp, u, v, n0, dn, w_tab, cs2_tab, lneps_tab, k2)
    for i in range(11):
        tmp[i] = state[i] + 0.5 * h * k2[i]
    _rhs(tmp, u, v, n0, dn, w_tab, cs2_tab, lneps_tab, k3)
    for i in range(11):
        tmp[i] = state[i] + h * k3[i]
    _rhs(tmp, u, v, n0, dn, w_tab, cs2_tab, lneps_tab, k4)
    for i in range(11):
        state[i] += h * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]) / 6.0


@njit(cache=True)
def scalar_transfer(q: float, n0: float, dn: float, w_tab, cs2_tab, lneps_tab,
                    a_start: float, eta_out) -> np.ndarray:
    """T_q = Phi_q/zeta_q [1] at the increasing times ``eta_out`` (k eta units), same steps.

    Parameters as :func:`late_square` (q: the scalar wavenumber over k).
    """
    state, eta = _initial_state(a_start, n0, dn, w_tab, cs2_tab, lneps_tab)
    work = np.empty((5, 11))
    h_max = OMEGA_STEP / max(1.0, q)
    out = np.empty(eta_out.size)
    for j in range(eta_out.size):
        while eta < eta_out[j]:
            h = min(h_max, ETA_STEP * eta, eta_out[j] - eta)
            _rk4_step(state, h, q, q, n0, dn, w_tab, cs2_tab, lneps_tab, work)
            eta += h
        out[j] = state[1]
    return out


@njit(cache=True)
def late_square(u: float, v: float, n0: float, dn: float, w_tab, cs2_tab, lneps_tab,
                a_start: float, eta_end: float, omega_max: float) -> float:
    """Oscillation-averaged late-time (a I)^2 [1] for one (u, v) (module docstring).

    Parameters
    ----------
    u, v : float [1]
    n0, dn : float [1]
        First N = ln(a/a_c) of the background grid and its spacing.
    w_tab, cs2_tab, lneps_tab : ndarray [1]
        w, c_s^2 and ln eps on the grid.
    a_start : float [1]
        Initial scale factor (superhorizon for k, k u and k v).
    eta_end : float [1]
        Final k eta; the window averages over [eta_end/2, eta_end].
    omega_max : float [1]
        Fastest angular frequency in k eta units (max(1, c_s u, c_s v)).
    """
    state, eta = _initial_state(a_start, n0, dn, w_tab, cs2_tab, lneps_tab)
    work = np.empty((5, 11))
    h_max = OMEGA_STEP / omega_max
    start = 0.5 * eta_end
    sum_w = sum_c1 = sum_c2 = 0.0
    while eta < eta_end:
        h = min(h_max, ETA_STEP * eta, eta_end - eta)
        _rk4_step(state, h, u, v, n0, dn, w_tab, cs2_tab, lneps_tab, work)
        eta += h
        if eta > start:
            wt = h * math.sin(math.pi * (eta - start) / (eta_end - start)) ** 2
            sum_w += wt
            sum_c1 += wt * state[9]
            sum_c2 += wt * state[10]
    c1, c2 = sum_c1 / sum_w, sum_c2 / sum_w
    wronskian = state[5] * state[8] - state[6] * state[7]
    ai = (c1 * state[7] - c2 * state[5]) / wronskian
    dai = (c1 * state[8] - c2 * state[6]) / wronskian
    return 0.5 * (ai * ai + dai * dai)
