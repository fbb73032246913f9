"""The CMB pivot: N*, the N ↔ k map, Hubble-flow parameters and slow-roll n_s, r.

k* [Mpc⁻¹] leaves the horizon (k* = aH) N* e-folds before the end of inflation.  N* is
given or follows from the reheating matching equation (Liddle & Leach 2003,
astro-ph/0305263; Planck 2018 X, arXiv:1807.06211):

    N* = C₀ − ln[k*/(a0H0)] + ¼ ln[V*²/ρ_end] + (1 − 3w)/(12(1 + w)) ln(ρ_th/ρ_end)
         − (1/12) ln g_th  (+ ½ ln[3/(3 − ε*)] keeping H*² = V*/(3 − ε*)),
    C₀ = ln(T0/H0) + ⅓ ln g_s0 − ¼ ln(30/π²) − ½ ln 3,

everything in reduced Planck units (V, ρ in M_p⁴).  V* = V0 f(φ*) needs V0; until the
exact-mode normalisation fixes it, V0 is estimated from the slow-roll amplitude
P_ζ ≈ H*²/(8π²ε1*) = A_s and the two are iterated to a fixed point.

n_s and r at second order in the Hubble-flow parameters (Stewart & Lyth 1993,
gr-qc/9302019; flow form of Schwarz et al. 2001, astro-ph/0106020), C = γ_E + ln 2 − 2.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from scan import constants as const
from scan.background import Background
from scan.errors import ConfigError

#: C = γ_E + ln 2 − 2 of the second-order slow-roll expressions.
C_SR = 0.5772156649015329 + math.log(2.0) - 2.0


@dataclass(frozen=True)
class Reheating:
    """Reheating history for the N* matching.

    Parameters
    ----------
    kind : {"instant", "temperature", "density"}
        Instant thermalisation (ρ_th = ρ_end), or a phase with equation of state ``w``
        ending at temperature ``T_GeV`` or density ``rho_GeV4``.
    w : float
        Equation of state during reheating.
    T_GeV : float, optional
        Thermalisation temperature [GeV].
    rho_GeV4 : float, optional
        Energy density at thermalisation [GeV⁴].
    g_th : float
        Relativistic degrees of freedom at thermalisation.
    """

    kind: str = "instant"
    w: float = 0.0
    T_GeV: float | None = None
    rho_GeV4: float | None = None
    g_th: float = 106.75

    def rho_th(self, rho_end: float) -> float:
        """Energy density at thermalisation [M_p⁴]."""
        if self.kind == "instant":
            return rho_end
        if self.kind == "temperature" and self.T_GeV:
            T = self.T_GeV / const.M_PLANCK_REDUCED_GEV
            return math.pi**2 / 30.0 * self.g_th * T**4
        if self.kind == "density" and self.rho_GeV4:
            return self.rho_GeV4 / const.M_PLANCK_REDUCED_GEV**4
        if self.kind in ("temperature", "density"):
            key = "reheat_temperature_GeV" if self.kind == "temperature" else "reheat_density_GeV4"
            raise ConfigError("pivot", key, f"reheating = '{self.kind}' needs {key} > 0")
        raise ConfigError("pivot", "reheating", f"unknown reheating '{self.kind}'",
                          "choose instant, temperature or density")


@dataclass(frozen=True)
class Pivot:
    """The pivot scale on an exact background.

    Attributes
    ----------
    valid, reason : bool, str
        False with a reason if the background cannot host the pivot.
    N_star : float
        E-folds from the pivot's exit to the end of inflation.
    N_pivot : float
        E-fold of the pivot's exit, N_end − N_star.
    k_star : float
        Pivot wavenumber [Mpc⁻¹].
    phi_star, H_star : float
        φ* [M_p] and H* [M_p] for V0 = 1.
    eps1, eps2, eps3 : float
        Hubble-flow parameters at the pivot's exit (exact background).
    n_s, r : float
        Second-order slow roll (Stewart & Lyth 1993).
    n_s_leading, r_leading : float
        First order: 1 − 2ε1 − ε2 and 16ε1.
    V0 : float
        Potential scale [M_p⁴] (slow-roll estimate, or the value given).
    A_s : float
        Target amplitude of the normalisation.
    """

    valid: bool
    reason: str
    N_star: float
    N_pivot: float
    k_star: float
    phi_star: float
    H_star: float
    eps1: float
    eps2: float
    eps3: float
    n_s: float
    r: float
    n_s_leading: float
    r_leading: float
    V0: float
    A_s: float


def matching_constant(T0_K: float = const.T_CMB_K, H0_s: float = const.H0_S,
                      g_s0: float = const.G_S0) -> float:
    """C₀ = ln(T0/H0) + ⅓ ln g_s0 − ¼ ln(30/π²) − ½ ln 3 (T0, H0 in energy units)."""
    ln_T0_over_H0 = math.log(const.K_B_SI * T0_K / (const.HBAR_SI * H0_s))
    return ln_T0_over_H0 + math.log(g_s0) / 3.0 - 0.25 * math.log(30.0 / math.pi**2) \
        - 0.5 * math.log(3.0)


def ln_k_over_a0H0(k_star: float = 0.05, H0_s: float = const.H0_S) -> float:
    """ln[k/(a0H0)] for k [Mpc⁻¹] (a0 = 1): a0H0 = H0/c in Mpc⁻¹."""
    return math.log(k_star / (H0_s / const.C_M_S * const.MPC_M))


def n_star_matching(V_star: float, rho_end: float, eps_star: float | None = None, *,
                    reheating: Reheating = Reheating(), k_star: float = 0.05,
                    C0: float | None = None) -> float:
    """N* from the matching equation (module docstring); V*, ρ_end [M_p⁴].

    ``eps_star`` adds ½ ln[3/(3 − ε*)] (H*² = V*/(3 − ε*) kept exactly); None drops it.
    """
    C0 = matching_constant() if C0 is None else C0
    rho_th = reheating.rho_th(rho_end)
    w = reheating.w
    N = (C0 - ln_k_over_a0H0(k_star) + 0.25 * math.log(V_star**2 / rho_end)
         + (1.0 - 3.0 * w) / (12.0 * (1.0 + w)) * math.log(rho_th / rho_end)
         - math.log(reheating.g_th) / 12.0)
    if eps_star is not None:
        N += 0.5 * math.log(3.0 / (3.0 - eps_star))
    return N


def hubble_flow(bg: Background, N: float, h: float = 5e-3) -> tuple[float, float, float]:
    """ε1, ε2 (exact, from the state) and ε3 = d ln ε2/dN (5-point stencil, step h)."""
    p = bg.evaluate(np.array([N - 2 * h, N - h, N, N + h, N + 2 * h]))
    e2 = p.eps2
    de2 = (e2[0] - 8.0 * e2[1] + 8.0 * e2[3] - e2[4]) / (12.0 * h)
    eps3 = float(de2 / e2[2]) if e2[2] != 0.0 else 0.0  # ε2 ≡ 0 (power law): ε2ε3 = 0
    return float(p.eps1[2]), float(e2[2]), eps3


def slow_roll_ns_r(eps1: float, eps2: float, eps3: float) -> tuple[float, float]:
    """Second-order n_s and r (Stewart & Lyth 1993; inflation.md §3d)."""
    C = C_SR
    n_s = 1.0 - 2 * eps1 - eps2 - 2 * eps1**2 - (2 * C + 3) * eps1 * eps2 - C * eps2 * eps3
    r = 16 * eps1 * (1 + C * eps2 + (C - math.pi**2 / 2 + 5) * eps1 * eps2
                     + (C**2 / 2 - math.pi**2 / 8 + 1) * eps2**2
                     + (C**2 / 2 - math.pi**2 / 24) * eps2 * eps3)
    return n_s, r


def leading_ns_r(eps1: float, eps2: float) -> tuple[float, float]:
    """First-order n_s = 1 − 2ε1 − ε2 and r = 16ε1."""
    return 1.0 - 2.0 * eps1 - eps2, 16.0 * eps1


def ln_k_over_kstar(bg: Background, N: np.ndarray, N_pivot: float) -> np.ndarray:
    """ln(k/k*) = (N − N_pivot) + ln[H(N)/H(N_pivot)] for the mode with k = aH at N."""
    N = np.asarray(N, dtype=float)
    H = bg.evaluate(N.ravel()).H.reshape(N.shape)
    return (N - N_pivot) + np.log(H / bg.evaluate(N_pivot).H[0])


def exit_efold(bg: Background, ln_k_ratio: float, N_pivot: float) -> float:
    """The e-fold where k = aH for ln(k/k*) = ``ln_k_ratio`` (aH grows monotonically)."""
    top = bg.N_end if math.isfinite(bg.N_end) else bg.N_last
    f = lambda N: float(ln_k_over_kstar(bg, N, N_pivot)) - ln_k_ratio  # noqa: E731
    return brentq(f, bg.N_start, top, xtol=1e-12)


def v0_slow_roll(bg: Background, N_pivot: float, A_s: float) -> float:
    """V0 [M_p⁴] from H*²/(8π²ε1*) = A_s with H* the V0 = 1 Hubble rate."""
    p = bg.evaluate(N_pivot)
    return A_s * 8.0 * math.pi**2 * float(p.eps1[0]) / float(p.H[0]) ** 2


def _invalid_pivot(reason: str, k_star: float, A_s: float) -> Pivot:
    nan = math.nan
    return Pivot(False, reason, nan, nan, k_star, nan, nan, nan, nan, nan, nan, nan, nan,
                 nan, nan, A_s)


def solve_pivot(bg: Background, *, N_star: float | None = None, k_star: float = 0.05,
                reheating: Reheating = Reheating(), A_s: float | None = None,
                V0: float | None = None, keep_eps_star: bool = True,
                margin: float = 0.0, tol: float = 1e-9, max_iter: int = 50) -> Pivot:
    """The pivot on a background: N* (given or matched), flow parameters, n_s, r.

    Parameters
    ----------
    bg : Background
        A valid background that ends (N_end finite).
    N_star : float, optional
        Given N*; default: the matching equation with ``reheating``.
    k_star : float
        Pivot [Mpc⁻¹].
    reheating : Reheating
        Reheating history of the matching.
    A_s : float, optional
        Amplitude for the slow-roll V0 estimate (default Planck 2018, 3.044).
    V0 : float, optional
        Fixed V0 [M_p⁴] (e.g. from the exact modes); otherwise estimated and iterated.
    keep_eps_star : bool
        Keep the ½ ln[3/(3 − ε*)] term.
    margin : float
        E-folds required between the start of the solution and the pivot's exit.
    tol, max_iter : float, int
        Fixed-point iteration of N* (and V0).

    Returns
    -------
    Pivot
        ``valid=False`` if the background is invalid, never ends, or is too short.
    """
    A_s = math.exp(const.LN_1E10_AS_PLANCK18) * 1e-10 if A_s is None else A_s
    if not bg.valid or not math.isfinite(bg.N_end):
        return _invalid_pivot(bg.reason or "inflation does not end: no pivot", k_star, A_s)
    rho_end_1 = 3.0 * float(bg.evaluate(bg.N_end).H[0]) ** 2  # ρ_end for V0 = 1
    n = 55.0 if N_star is None else float(N_star)
    v0 = V0
    for _ in range(max_iter if N_star is None else 1):
        N_piv = bg.N_end - n
        if N_piv - 2e-2 < bg.N_start + margin:
            return _invalid_pivot(f"too few e-folds for the pivot: N* = {n:.4g} but only "
                                  f"{bg.N_end - bg.N_start - margin:.4g} available",
                                  k_star, A_s)
        v0 = v0_slow_roll(bg, N_piv, A_s) if V0 is None else V0
        if N_star is not None:
            break
        p = bg.evaluate(N_piv)
        V_star = v0 * float(p.H[0]) ** 2 * (3.0 - float(p.eps1[0]))
        new = n_star_matching(V_star, v0 * rho_end_1, float(p.eps1[0]) if keep_eps_star
                              else None, reheating=reheating, k_star=k_star)
        if not math.isfinite(new):
            return _invalid_pivot("non-finite N* from the matching equation", k_star, A_s)
        done, n = abs(new - n) < tol, new
        if done:
            break
    N_piv = bg.N_end - n
    e1, e2, e3 = hubble_flow(bg, N_piv)
    n_s, r = slow_roll_ns_r(e1, e2, e3)
    ns1, r1 = leading_ns_r(e1, e2)
    p = bg.evaluate(N_piv)
    v0 = v0_slow_roll(bg, N_piv, A_s) if V0 is None else V0
    return Pivot(True, "", n, N_piv, k_star, float(p.phi[0]), float(p.H[0]), e1, e2, e3,
                 n_s, r, ns1, r1, v0, A_s)
