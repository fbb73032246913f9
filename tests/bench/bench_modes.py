"""Benchmark: 256-mode P_zeta of a pole model, vectorised solver vs the obvious baseline.

Run:  python tests/bench/bench_modes.py
Model: Starobinsky V with K = 1 + c/|phi - phi0|, p = 1, c = 0.03, phi0 = 4.2, start
phi = 6 (inflation.md section 5), exact background from ``scan.background``.
Baseline: one scipy solve_ivp per mode, default method (RK45), rtol = 1e-8, atol = 1e-14,
the same Hamiltonian mode equations, the background (eps1, H) read from the background's
dense output ``evaluate`` at every right-hand-side call.  It is run on a subset of modes
and its time extrapolated linearly to 256 (printed as such).
"""
from __future__ import annotations

import time

import numpy as np
from scipy.integrate import solve_ivp

from scan.background import solve_background  # noqa: E402
from scan.models import Model, Pole  # noqa: E402
from scan.modes import ModeSettings, build_table, solve_modes  # noqa: E402
from scan.modes.grid import log_grid  # noqa: E402
from scan.modes.initial import bunch_davies  # noqa: E402


def baseline_mode(bg, N_k: float, N_final: float, x_in: float = 100.0) -> tuple[float, int]:
    """One mode, RK45 rtol 1e-8, background from dense output: (P_zeta at V0 = 1, nfev)."""
    pk = bg.evaluate(np.array([N_k]))
    Hk, ek = pk.H[0], pk.eps1[0]
    N0 = N_k - np.log(x_in)
    p0 = bg.evaluate(np.array([N0]))

    def rhs(N, y):
        qr, qi, pr, pim = y
        pt = bg.evaluate(N)
        eps1, H = pt.eps1[0], pt.H[0]
        n = N - N_k
        a = np.exp(-2 * n) * Hk * ek / (H * eps1)
        b = eps1 * Hk / (ek * H)
        return [a * pr, a * pim, -b * qr - pr, -b * qi - pim]

    n = N0 - N_k
    x = np.exp(-n) * Hk / p0.H[0]
    q, p = bunch_davies(np.array([n]), np.array([x]), p0.eps1, p0.eps2, p0.eps1 / ek)
    y0 = [q.real[0], q.imag[0], p.real[0], p.imag[0]]
    sol = solve_ivp(rhs, (N0, N_final), y0, rtol=1e-8, atol=1e-14)
    qr, qi = sol.y[0, -1], sol.y[1, -1]
    return (qr**2 + qi**2) * Hk**2 / (2 * np.pi**2 * ek), sol.nfev


def main(n_modes: int = 256, n_baseline: int = 16) -> None:
    bg = solve_background(Model("starobinsky", kinetic="poles", poles=(Pole(4.2, 0.03, 1.0),)),
                          phi_start=6.0)
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
    print(f"model: Starobinsky + pole p=1 c=0.03 (exact), N_end = {bg.N_end:.4f}, "
          f"{n_modes} modes over N_k in [{N_k[0]:.2f}, {N_k[-1]:.2f}], pole at "
          f"{bg.crossings[0].N_cross:.3f}, P_zeta max/min at V0=1: {res.P_zeta.max():.3e}/"
          f"{res.P_zeta.min():.3e}")
    print(f"background table (once per model): {t_table:.3f} s, {table.N.size} nodes, "
          f"max midpoint error {table.max_error:.1e}")
    print(f"vectorised DOP853 rtol={settings.rtol:g}: {t_vec:.3f} s per 256-mode spectrum "
          f"(mean of {reps}), {res.nfev} RHS calls")
    print(f"baseline RK45 rtol=1e-8 per mode, background from evaluate(): {t_sub:.2f} s for "
          f"{n_baseline} modes, {np.mean([b[1] for b in base]):.0f} RHS calls/mode -> "
          f"{t_base:.1f} s extrapolated linearly to {n_modes} modes")
    print(f"speed-up: {t_base / t_vec:.0f}x   max |P_vec/P_base - 1| on the {n_baseline} "
          f"common modes: {diff:.2e}")


if __name__ == "__main__":
    main()
