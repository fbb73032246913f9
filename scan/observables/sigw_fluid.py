"""The induced-GW kernel on a perfect-fluid background with w(eta), c_s^2(eta).

During the QCD crossover the equation of state w = p/rho and the sound speed
c_s^2 = dp/drho dip below 1/3, which changes how the scalar potential decays after
re-entry, the source of the second-order tensor modes and the expansion rate (Abe, Tada
& Ueda 2021, arXiv:2010.06193, abstract: the resonant amplification and cancellation
scales of the induced GW depend on c_s at different times).  This module computes the
oscillation-averaged kernel by time integration (:mod:`scan.observables.sigw_fluid_ode`)
in the normalisation of :func:`scan.observables.sigw.induced_kernel`,

    K_k(u, v) = (1/6) [(4v^2 - (1 + v^2 - u^2)^2)/(4uv)]^2  overline{(a I)^2},

a in units of its value at re-entry of k (k = a_c H_c); in radiation domination a = x
and this is the familiar (1/6) g^2 x^2 overline{I^2} of Kohri & Terada 2018
(arXiv:1804.08577).  The late-time a^4 rho_GW is conserved, so K_k is Omega_GW relative
to the radiation density at re-entry, and today's value follows with the unchanged
c_g(T_c(k)) of :func:`scan.observables.cosmo.gw_transfer_h2`.

Backgrounds (uniform grids in N = ln(a/a_c)):

* :func:`constant_background` - constant w and c_s^2 (checks);
* :func:`table_background` - from a g_*(T) table: entropy conservation g_s T^3 a^3 =
  const gives T(N); w = (4/3) g_s/g_rho - 1 (:func:`scan.observables.pbh.qcd.equation_of_state`);
  c_s^2 = dp/drho = s dT/(T ds) = 1/(3 + d ln g_s/d ln T) (zero chemical potential,
  dp/dT = s), the derivative by central differences on the table's own rows; both are
  1/3 below 3 MeV as in qcd.py; d ln eps/dN = 1 - 3w (eps = a^4 rho normalised at re-entry).

Accuracy: RK4 with steps <= 0.05/omega and a Hann window over k eta in
[eta_end/2, eta_end]; against the exact radiation kernel the error is ~1e-5 at
eta_end = 800 away from the log resonance u + v = sqrt(3) (tests/test_sigw_fluid.py).
The window must lie after the background has returned to w = 1/3: true for re-entry
below ~30 GeV at eta_end = 800 (modes entering earlier meet the crossover later, at
k eta ~ T_c/0.2 GeV, and need a longer eta_end).

Approximations: perfect adiabatic fluid (no free-streaming or diffusion damping, no
anisotropic stress); Newtonian-gauge tensor source; w = c_s^2 = 1/3 below 3 MeV as in
qcd.py (neutrino decoupling and e+- annihilation are left to the c_g transfer).

Size (measured, tests/tools/qcd_sigw_effect.py): the kernel is very sensitive to c_s
near the lines where the RD kernel vanishes (u^2 + v^2 = 1/c_s^2) or resonates
(c_s (u + v) = 1, crossed during the crossover for sqrt(3) < u + v < 2.13), so single
kernel values change by factors 0.06-4.6 for re-entry at 0.05-5 GeV, and Omega_GW of
smooth synthetic spectra by 0.76-1.86 at 1-100 nHz.  The SIGW plan uses it through
the table of :mod:`scan.observables.sigw_kernel_table` (``[observables] sigw_kernel =
"qcd-fluid"``).  Table design: one kernel costs ~20-50 ms (eta_end = 800);
a bicubic spline in (z, s), z = +-ln|t - (sqrt(3) - 1)| on either side of the RD
resonance, interpolates the RD kernel to 2e-2 (L1-weighted) on 16+24 t-points x 9
s-points, 8e-4 on 32+48 x 17 and 1e-4 on 64+96 x 33 (measured); the T_c grid must
resolve the resonance band, whose T_c dependence oscillates faster at higher T_c
(period ~1 in ln T_c near 10 GeV).
Units: u, v, w, c_s^2, kernels [1]; T [GeV]; k [Mpc^-1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scan.observables import cosmo
from scan.observables.gstar import DofTable, default_table
from scan.observables.pbh.qcd import T_DECOUPLING_GEV, equation_of_state
from scan.observables.sigw_fluid_ode import late_square

#: Default final k eta of the time integration (window over its second half).
ETA_END: float = 800.0
#: Initial scale factor (units of a_c) for u, v <= 1; divided by max(u, v) above.
A_START: float = 1e-3
#: N = ln(a/a_c) range and spacing of the tabulated backgrounds.
N_RANGE: tuple[float, float] = (-12.0, 8.0)
DN: float = 0.005


@dataclass(frozen=True)
class FluidBackground:
    """w, c_s^2 and ln(a^4 rho / (a^4 rho)_c) on the uniform grid N = n0 + i dn [1]."""

    n0: float
    dn: float
    w: np.ndarray
    cs2: np.ndarray
    lneps: np.ndarray

    @property
    def n(self) -> np.ndarray:
        """The grid N = ln(a/a_c) [1]."""
        return self.n0 + self.dn * np.arange(self.w.size)


def constant_background(w: float, cs2: float | None = None) -> FluidBackground:
    """Constant equation of state ``w`` and sound speed squared ``cs2`` (default w) [1]."""
    cs2 = w if cs2 is None else cs2
    n = np.array(N_RANGE)
    return FluidBackground(float(n[0]), float(n[1] - n[0]), np.full(2, float(w)),
                           np.full(2, float(cs2)), (1 - 3 * w) * n)


def sound_speed_squared(T_GeV, dof: cosmo.Dof = None) -> np.ndarray:
    """Adiabatic c_s^2 = 1/(3 + d ln g_s/d ln T) [1] of a g_* table (1/3 below 3 MeV).

    Parameters
    ----------
    T_GeV : array_like [GeV]
    dof : None, DofTable or (g_rho, g_s)
        As :mod:`scan.observables.cosmo` (constant pairs give 1/3).
    """
    T = np.asarray(T_GeV, dtype=float)
    table = default_table() if dof is None else dof
    if not isinstance(table, DofTable):
        return np.full(T.shape, 1 / 3)
    ln_t = np.log(table.T_GeV)
    slope = np.gradient(np.log(table.g_s), ln_t)
    inside = (T > table.T_GeV[0]) & (T < table.T_GeV[-1])
    d = np.where(inside, np.interp(np.log(T), ln_t, slope), 0.0)
    return np.where(T > T_DECOUPLING_GEV, 1 / (3 + d), 1 / 3)


def table_background(T_c_GeV: float, dof: cosmo.Dof = None) -> FluidBackground:
    """The background of a g_* table around re-entry at ``T_c_GeV`` [GeV] (module doc)."""
    n = np.arange(N_RANGE[0], N_RANGE[1] + 0.5 * DN, DN)
    ln_t = np.linspace(math.log(T_c_GeV) - 16.0, math.log(T_c_GeV) + 16.0, 6401)
    _, g_s = cosmo._dof_at(dof, np.exp(ln_t))
    _, g_s_c = cosmo._dof_at(dof, T_c_GeV)
    n_of_t = (math.log(T_c_GeV) + math.log(float(g_s_c)) / 3) - (ln_t + np.log(g_s) / 3)
    T = np.exp(np.interp(n, n_of_t[::-1], ln_t[::-1]))
    w = equation_of_state(T, dof)
    cs2 = sound_speed_squared(T, dof)
    steps = 0.5 * (2 - 3 * (w[1:] + w[:-1])) * DN         # trapezoid of 1 - 3w
    lneps = np.concatenate([[0.0], np.cumsum(steps)])
    lneps -= np.interp(0.0, n, lneps)
    return FluidBackground(float(n[0]), DN, w, cs2, lneps)


def fluid_kernel(u, v, background: FluidBackground, eta_end: float = ETA_END) -> np.ndarray:
    """Oscillation-averaged kernel K_k(u, v) [1] on ``background`` (module docstring).

    Parameters
    ----------
    u, v : array_like [1]
        Momentum ratios with |1 - v| <= u <= 1 + v (broadcast together).
    background : FluidBackground
        N = 0 is the re-entry of k.
    eta_end : float [1]
        Final k eta (see :data:`ETA_END`).

    Returns
    -------
    ndarray [1]
    """
    u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
    out = np.empty(u.shape)
    cs_max = math.sqrt(max(float(background.cs2.max()), 1e-12))
    for idx in np.ndindex(u.shape):
        uu, vv = float(u[idx]), float(v[idx])
        geometry = (4 * vv * vv - (1 + vv * vv - uu * uu)**2) / (4 * uu * vv)
        square = late_square(uu, vv, background.n0, background.dn, background.w,
                             background.cs2, background.lneps, A_START / max(uu, vv, 1.0),
                             eta_end, max(1.0, cs_max * uu, cs_max * vv))
        out[idx] = geometry * geometry * square / 6
    return out


def kernel_ratio(k_Mpc: float, u, v, dof: cosmo.Dof = None,
                 eta_end: float = ETA_END) -> np.ndarray:
    """K_k(u, v) on the g_* table's background over the radiation kernel [1], same method.

    Both kernels come from the same integrator (the radiation one on w = c_s^2 = 1/3),
    so the ratio carries no quadrature-method bias.

    Parameters
    ----------
    k_Mpc : float [Mpc^-1]
        Output wavenumber (re-entry temperature from :func:`cosmo.temperature_of_k`).
    u, v : array_like [1]
    dof : None, DofTable or (g_rho, g_s)
    """
    T_c = float(cosmo.temperature_of_k(k_Mpc, dof))
    table = fluid_kernel(u, v, table_background(T_c, dof), eta_end)
    return table / fluid_kernel(u, v, constant_background(1 / 3), eta_end)
