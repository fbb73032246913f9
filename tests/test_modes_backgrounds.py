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
    tol = 1e-10
    tab = build_table(bg, bg.N_start, bg.N_end, tol=tol)
    assert bg.N0 in tab.N
    N = np.random.default_rng(1).uniform(bg.N_start, bg.N_end, 20000)
    lne, g = tab.lneps1_neglnH(N)
    p = bg.evaluate(N)
    assert np.max(np.abs(lne - np.log(p.eps1))) < 1e-9   # eps1 spans 12 decades here
    # the table is built to midpoint accuracy tol in both logarithms, and a cubic-Hermite
    # error (x−a)²(x−b)²·f⁽⁴⁾/4! peaks at the midpoint, so tol bounds −ln H everywhere
    # (1e-12 relied on ln H being nearly linear here; measured 3e-14)
    assert np.max(np.abs(g + np.log(p.H))) < tol
