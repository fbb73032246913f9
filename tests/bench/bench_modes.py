"""Benchmark: 256-mode P_zeta of a pole model, vectorised solver vs the obvious baseline.

Run:  python tests/bench/bench_modes.py
Model: Starobinsky V with K = 1 + c[(phi - phi0)^2 + w^2]^{-p/2}, p = 1, c = 0.03,
w = 1e-6 (inflation.md section 5), background from the hybrid-form test fixture.
Baseline: one scipy solve_ivp per mode, default method (RK45), rtol = 1e-8, atol = 1e-14,
the same Hamiltonian mode equations co-integrated with the background (phi, pi) per mode,
started from the background's dense output at the mode's initial e-fold.  It is run on
a subset of modes and its time extrapolated linearly to 256 (printed as such).
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from test_modes_backgrounds import starobinsky  # noqa: E402

from scan.modes import ModeSettings, build_table, solve_modes  # noqa: E402
from scan.modes.grid import log_grid  # noqa: E402
from scan.modes.initial import bunch_davies  # noqa: E402
from scan.modes.solver import final_efolds  # noqa: E402


def baseline_mode(bg, N_k: float, N_final: float, x_in: float = 100.0) -> tuple[float, int]:
    """One mode, RK45 rtol 1e-8, background co-integrated: returns (P_zeta at V0 = 1, nfev)."""
    V, dV, K = bg.V, bg.dV, bg.K
    pk = bg.evaluate(np.array([N_k]))
    Hk, ek = pk.H[0], pk.eps1[0]
    N0 = N_k - np.log(x_in)
    p0 = bg.evaluate(np.array([N0]))
    phi0, pi0 = bg._segs[np.searchsorted(bg._starts, N0, side="right") - 1].sol(N0)

    def rhs(N, y):
        phi, pi, qr, qi, pr, pim = y
        sk = np.sqrt(K(phi))
        eps1 = 0.5 * pi**2
        v = V(phi)
        H = np.sqrt(v / (3 - eps1))
        n = N - N_k
        a = np.exp(-2 * n) * Hk * ek / (H * eps1)
        b = eps1 * Hk / (ek * H)
        return [pi / sk, -(3 - eps1) * (pi + dV(phi) / (sk * v)),
                a * pr, a * pim, -b * qr - pr, -b * qi - pim]

    n = N0 - N_k
    x = np.exp(-n) * Hk / p0.H[0]
    q, p = bunch_davies(np.array([n]), np.array([x]), p0.eps1, p0.eps2, p0.eps1 / ek)
    y0 = [phi0, pi0, q.real[0], q.imag[0], p.real[0], p.imag[0]]
    sol = solve_ivp(rhs, (N0, N_final), y0, rtol=1e-8, atol=1e-14)
    qr, qi = sol.y[2, -1], sol.y[3, -1]
    return (qr**2 + qi**2) * Hk**2 / (2 * np.pi**2 * ek), sol.nfev


def main(n_modes: int = 256, n_baseline: int = 16) -> None:
    bg = starobinsky(0.03, 1.0)
    settings = ModeSettings()
    t0 = time.perf_counter()
    table = build_table(bg, bg.N_start, bg.N_end, settings.table_tol)
    t_table = time.perf_counter() - t0
    N_k = log_grid(table, bg.N_end - 55.0, bg.N_end, settings.x_out, n_modes)
    solve_modes(bg, table, N_k, settings, bg.N_end)  # warm-up
    reps = 5
    t0 = time.perf_counter()
    for _ in range(reps):
        res = solve_modes(bg, table, N_k, settings, bg.N_end)
    t_vec = (time.perf_counter() - t0) / reps
    sub = np.linspace(0, n_modes - 1, n_baseline).astype(int)
    t0 = time.perf_counter()
    base = [baseline_mode(bg, N_k[i], res.N_final[i]) for i in sub]
    t_sub = time.perf_counter() - t0
    P_base = np.array([b[0] for b in base])
    t_base = t_sub * n_modes / n_baseline
    diff = np.max(np.abs(res.P_zeta[sub] / P_base - 1))
    print(f"model: Starobinsky + pole p=1 c=0.03 w=1e-6, N_end = {bg.N_end:.4f}, "
          f"{n_modes} modes over N_k in [{N_k[0]:.2f}, {N_k[-1]:.2f}], pole at "
          f"{bg.N_poles[0]:.3f}, P_zeta max/min at V0=1: {res.P_zeta.max():.3e}/"
          f"{res.P_zeta.min():.3e}")
    print(f"background table (once per model): {t_table:.3f} s, {table.N.size} nodes, "
          f"max midpoint error {table.max_error:.1e}")
    print(f"vectorised DOP853 rtol={settings.rtol:g}: {t_vec:.3f} s per 256-mode spectrum "
          f"(mean of {reps}), {res.nfev} RHS calls")
    print(f"baseline RK45 rtol=1e-8 per mode, background co-integrated: {t_sub:.2f} s for "
          f"{n_baseline} modes, {np.mean([b[1] for b in base]):.0f} RHS calls/mode -> "
          f"{t_base:.1f} s extrapolated linearly to {n_modes} modes")
    print(f"speed-up: {t_base / t_vec:.0f}x   max |P_vec/P_base - 1| on the {n_baseline} "
          f"common modes: {diff:.2e}")


if __name__ == "__main__":
    main()
