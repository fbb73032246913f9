"""Benchmark: Omega_GW h^2 at 200 frequencies from a 256-point spectrum (after planning),
against scipy.integrate.dblquad per frequency at the same accuracy.  Prints medians.

Run: python tests/bench/bench_sigw.py
"""
from __future__ import annotations

import math
import time

import numpy as np
from scipy import integrate

from scan.observables import cosmo, sigw

K_IN = np.geomspace(1e3, 1e9, 256)
P_IN = 1e-2 * np.exp(-np.log(K_IN / 1e6)**2 / (2 * 0.5**2))
F_OUT = cosmo.k_to_f(np.geomspace(1e2, 2e9, 200))
LNK, LNP = np.log(K_IN), np.log(P_IN)


def p_scalar(k: float) -> float:
    """Log-interpolated table, zero outside (the same spectrum the plan sees)."""
    lk = math.log(k)
    if lk < LNK[0] or lk > LNK[-1]:
        return 0.0
    return math.exp(np.interp(lk, LNK, LNP))


def dblquad_omega(k: float, eps: float) -> float:
    """Direct Omega_GW(eta_c, k): dblquad in (t, s), s in [0, 1], split at sqrt(3) - 1."""
    def integrand(s, t):
        u, v = 0.5 * (t + s + 1), 0.5 * (t - s + 1)
        return float(sigw.induced_kernel(u, v)) * p_scalar(k * u) * p_scalar(k * v)
    t_hi = 2 * K_IN[-1] / k - 1
    t_lo = max(0.0, 2 * K_IN[0] / k - 2)
    edges = sorted({t_lo, min(max(sigw.T_RESONANCE, t_lo), t_hi), t_hi})
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        total += integrate.dblquad(integrand, a, b, 0.0, 1.0, epsabs=0.0, epsrel=eps)[0]
    return total


def median_ms(fn, repeat: int = 50) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return 1e3 * float(np.median(times))


def main() -> None:
    start = time.perf_counter()
    plan = sigw.plan_sigw(K_IN, f_out=F_OUT)
    print(f"plan: {time.perf_counter() - start:.2f} s, {plan.n_nodes} nodes")
    fast = median_ms(lambda: plan.omega_gw_h2(P_IN))
    print(f"plan.omega_gw_h2, 200 f from 256-point P: median {fast:.2f} ms "
          f"({1e3 * fast / 200:.1f} us per frequency)")
    k_test = np.array([3e5, 1e6, 1.6e6])
    ref = np.array([dblquad_omega(k, 1e-9) for k in k_test])
    ours = sigw.plan_sigw(K_IN, k_test).omega_gw(P_IN)
    err_ours = np.max(np.abs(ours / ref - 1))
    print(f"plan accuracy vs dblquad(epsrel=1e-9): max rel err {err_ours:.1e}")
    eps = 1e-3
    slow_times, errs = [], []
    for k, r in zip(k_test, ref):
        start = time.perf_counter()
        val = dblquad_omega(k, eps)
        slow_times.append(time.perf_counter() - start)
        errs.append(abs(val / r - 1))
    slow = 1e3 * float(np.median(slow_times))
    print(f"dblquad(epsrel={eps:g}) per frequency: median {slow:.0f} ms, "
          f"max rel err {max(errs):.1e}")
    print(f"speed-up per frequency: {slow / (fast / 200):.0f}x; "
          f"200 frequencies: dblquad ~{200 * slow / 1e3:.0f} s vs {fast:.2f} ms")


if __name__ == "__main__":
    main()
