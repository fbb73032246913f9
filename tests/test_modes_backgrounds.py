"""Analytic backgrounds for the mode-solver tests (and tests of the background table).

Each class satisfies ``scan.modes.protocol.BackgroundLike`` with closed-form dense output.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.modes.protocol import BackgroundLike
from scan.modes.table import build_table


@dataclass(frozen=True)
class Point:
    N: np.ndarray
    H: np.ndarray
    eps1: np.ndarray
    eps2: np.ndarray


class _Analytic:
    valid = True
    reason = ""

    def __init__(self, N_start: float, N_end: float, extra_nodes=()):
        self.N_start, self.N_end = float(N_start), float(N_end)
        self.N = np.unique(np.concatenate([np.linspace(N_start, N_end, 11), extra_nodes]))


class PowerLaw(_Analytic):
    """a ~ t^p: eps1 = 1/p, eps2 = 0, H = H0 e^{-N/p} (Lucchin & Matarrese 1985)."""

    def __init__(self, p: float, H0: float = 1e-5, N_start=0.0, N_end=80.0):
        super().__init__(N_start, N_end)
        self.eps, self.H0 = 1.0 / p, H0

    def evaluate(self, N):
        N = np.asarray(N, float)
        return Point(N, self.H0 * np.exp(-self.eps * N), np.full_like(N, self.eps),
                     np.zeros_like(N))


class ConstantRoll(_Analytic):
    """Prescribed eps1 = eps0 e^{eps2 N}, d ln H/dN = -eps1 (H from its exact integral)."""

    def __init__(self, eps2: float, eps0: float = 1e-8, H0: float = 1e-5, N_end=30.0):
        super().__init__(0.0, N_end)
        self.e2, self.e0, self.H0 = eps2, eps0, H0

    def evaluate(self, N):
        N = np.asarray(N, float)
        eps1 = self.e0 * np.exp(self.e2 * N)
        lnH = -self.e0 * np.expm1(self.e2 * N) / self.e2
        return Point(N, self.H0 * np.exp(lnH), eps1, np.full_like(N, self.e2))


class LinearBreak(_Analytic):
    """Starobinsky (1992) slope break with V0 dominant: phi' = -A/(3H^2).

    Before N0: eps1 = eps_plus.  After: phi' ~ r + (1 - r) e^{-3(N - N0)} with
    r = A_-/A_+, so eps1 = eps_plus [r + (1 - r) e^{-3(N-N0)}]^2 (USR for r -> 0), and
    ln H = ln H0 - int eps1 dN exactly.  For H = const, z''/z = 2/tau^2 on both sides and
    Starobinsky's closed form would be exact; the drift of H is O(eps_plus) = 1e-8.
    """

    def __init__(self, r: float, eps_plus: float = 1e-8, H0: float = 1e-5, N0: float = 20.0,
                 N_end: float = 36.0):
        super().__init__(0.0, N_end, extra_nodes=[N0])
        self.r, self.ep, self.H0, self.N0 = r, eps_plus, H0, N0

    def evaluate(self, N):
        N = np.asarray(N, float)
        d = np.maximum(N - self.N0, 0.0)
        decay = (1.0 - self.r) * np.exp(-3.0 * d)
        u = self.r + decay
        eps2 = np.where(N > self.N0, -6.0 * decay / u, 0.0)
        r = self.r
        after = (r**2 * d + 2 * r * (1 - r) * -np.expm1(-3 * d) / 3
                 + (1 - r) ** 2 * -np.expm1(-6 * d) / 6)
        lnH = -self.ep * (np.minimum(N, self.N0) - self.N_start + after)
        return Point(N, self.H0 * np.exp(lnH), self.ep * u**2, eps2)

    def P_exact(self, y):
        """P(k), y = k/(a0 H): 9H^6/(4 pi^2 A_-^2) |alpha - beta|^2 (Starobinsky 1992).

        The complex closed form is used (in double it agrees with an 80-bit evaluation to
        3e-10 at y = 0.04; the expanded D^2 form of inflation.md loses digits there).
        """
        R = 1.0 - self.r
        y = np.asarray(y, float)
        ab = 1.0 - (3j * R / (2 * y**3)) * ((1 + y**2) + (y + 1j) ** 2 * np.exp(2j * y))
        eps_minus = self.ep * self.r**2
        return self.H0**2 / (8 * np.pi**2 * eps_minus) * np.abs(ab) ** 2


def test_analytic_backgrounds_follow_protocol():
    for bg in (PowerLaw(10), ConstantRoll(-6.0), LinearBreak(1e-3)):
        assert isinstance(bg, BackgroundLike)


def test_table_reproduces_dense_output_through_a_kink():
    """Table of ln eps1, ln H vs the closed form, off the nodes, across the slope break."""
    bg = LinearBreak(1e-6)
    tab = build_table(bg, bg.N_start, bg.N_end, tol=1e-10)
    assert bg.N0 in tab.N
    N = np.random.default_rng(1).uniform(bg.N_start, bg.N_end, 20000)
    lne, g = tab.lneps1_neglnH(N)
    p = bg.evaluate(N)
    assert np.max(np.abs(lne - np.log(p.eps1))) < 1e-9   # eps1 spans 12 decades here
    assert np.max(np.abs(g + np.log(p.H))) < 1e-12


class HybridBackground(_Analytic):
    """Numerical background for V(phi), K(phi) in the hybrid form of inflation.md 1.1.

    State (phi, pi = sqrt(K) phi'): phi' = pi/sqrt(K), pi' = -(3 - eps1)(pi + V'/(sqrt(K) V)),
    eps1 = pi^2/2, eps2 = 2 pi'/pi, H^2 = V/(3 - eps1) (V0 = 1).  Started on the slow-roll
    attractor; DOP853 rtol 1e-12, atol 1e-30; stopped and restarted at ``phi_break``
    (a regularised pole); terminal event eps1 = 1.  A stand-in for scan.background in
    these tests: it is a test fixture, not the production background.
    """

    def __init__(self, V, dV, K, phi_start: float, phi_break: float | None = None,
                 N_max: float = 200.0):
        from scipy.integrate import solve_ivp
        self.V, self.dV, self.K = V, dV, K

        def rhs(N, y):
            phi, pi = y
            sk = np.sqrt(K(phi))
            return [pi / sk, -(3 - 0.5 * pi**2) * (pi + dV(phi) / (sk * V(phi)))]

        def end(N, y):
            return 0.5 * y[1] ** 2 - 1.0
        end.terminal, end.direction = True, 1
        events = [end]
        if phi_break is not None:
            def brk(N, y):
                return y[0] - phi_break
            brk.terminal = True
            events.append(brk)
        y = [phi_start, -dV(phi_start) / (np.sqrt(K(phi_start)) * V(phi_start))]
        self._segs, N0 = [], 0.0
        while True:
            sol = solve_ivp(rhs, (N0, N_max), y, method="DOP853", rtol=1e-12, atol=1e-30,
                            events=events, dense_output=True)
            self._segs.append(sol)
            if sol.status == 1 and len(events) > 1 and sol.t_events[1].size:
                N0, y = sol.t[-1], sol.y[:, -1].copy()
                events = [end]
                continue
            break
        self.N_end = float(sol.t[-1]) if sol.t_events[0].size else float("nan")
        self.N_start = 0.0
        self.N = np.concatenate([s.t for s in self._segs])
        self.N_poles = np.array([s.t[-1] for s in self._segs[:-1]])
        self._starts = np.array([s.t[0] for s in self._segs])

    def evaluate(self, N):
        N = np.atleast_1d(np.asarray(N, float))
        seg = np.clip(np.searchsorted(self._starts, N, side="right") - 1, 0, len(self._segs) - 1)
        y = np.empty((2, N.size))
        for j, s in enumerate(self._segs):
            m = seg == j
            if m.any():
                y[:, m] = s.sol(N[m])
        phi, pi = y
        eps1 = 0.5 * pi**2
        sk = np.sqrt(self.K(phi))
        dpi = -(3 - eps1) * (pi + self.dV(phi) / (sk * self.V(phi)))
        H = np.sqrt(self.V(phi) / (3 - eps1))
        return Point(N, H, eps1, 2 * dpi / pi)


def quadratic() -> HybridBackground:
    """V = phi^2/2 (m = 1), canonical, from phi = 17."""
    return HybridBackground(lambda f: 0.5 * f**2, lambda f: f, lambda f: np.ones_like(f), 17.0)


def starobinsky(c: float = 0.0, p: float = 1.0, phi0: float = 4.2, w: float = 1e-6):
    """V = (1 - e^{-sqrt(2/3) phi})^2 with K = 1 + c[(phi - phi0)^2 + w^2]^{-p/2} (inflation.md 5)."""
    b = np.sqrt(2.0 / 3.0)

    def K(f):
        return 1.0 + c * ((f - phi0) ** 2 + w**2) ** (-p / 2)
    return HybridBackground(lambda f: (1 - np.exp(-b * f)) ** 2,
                            lambda f: 2 * b * np.exp(-b * f) * (1 - np.exp(-b * f)), K,
                            6.0 if c else 5.8, phi0 if c else None)
