"""Background values (points, crossings, charts, segments, the solution) and the chart
maps shared by the solver and ``Background.evaluate``."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from scan.models import Model, kernel


@dataclass(frozen=True)
class BackgroundPoint:
    """The background at an array of e-folds (reduced Planck units, V0 = 1)."""

    N: np.ndarray
    phi: np.ndarray
    chi: np.ndarray
    dchi_dN: np.ndarray
    H: np.ndarray
    eps1: np.ndarray
    eps2: np.ndarray


@dataclass(frozen=True)
class PoleCrossing:
    """One crossing of a kinetic pole.

    Attributes
    ----------
    index : int
        Pole number in the config's order (``model.poles[index]``), not position order.
    position : float
        φᵢ [M_p].
    N_cross : float
        E-fold of the crossing (s = 0).
    N_usr_start, N_usr_end, usr_efolds : float
        The ultra-slow-roll window around the crossing: the contiguous interval with
        ε2 < −3 that contains N_cross (ε2 = −2(3 − ε1) < −3 exactly at the pole), and
        its length in e-folds.
    N_near_start, N_near_end, efolds_near : float
        "E-folds near the pole": the interval with |φ − φᵢ| < wᵢ, where the pole's own
        term (wᵢ/|φ − φᵢ|)^{pᵢ} of K exceeds 1, and its length.
    """

    index: int
    position: float
    N_cross: float
    N_usr_start: float
    N_usr_end: float
    usr_efolds: float
    N_near_start: float
    N_near_end: float
    efolds_near: float


@dataclass(frozen=True)
class Chart:
    """A coordinate patch: ``pole = -1`` is x = φ, otherwise x = s of that pole.

    ``lo < φ < hi`` are its boundaries (midpoints between poles, or ±inf).
    """

    pole: int
    lo: float
    hi: float


@dataclass(frozen=True)
class Segment:
    """One restart of the integrator: its e-fold span, chart and dense output."""

    N0: float
    N1: float
    chart: Chart
    sol: object = field(repr=False)


@dataclass(frozen=True, eq=False)
class Background:
    """An exact background solution (or an invalid one, with the partial solution).

    Attributes
    ----------
    valid : bool
        False for an invalid model; ``reason`` says why.
    reason : str
        "" when valid.
    N_start, N_end : float
        First e-fold; end of inflation ε1 = 1 (nan if inflation did not end).
    N, phi, chi, dchi_dN, H, eps1, eps2 : ndarray
        Solution nodes (they include pole crossings and chart boundaries); φ, χ [M_p],
        H [M_p] for V0 = 1.
    crossings : tuple of PoleCrossing
        Pole crossings in time order.
    model : Model
        The model solved.
    segments : tuple of Segment
        The dense output, one piece per restart.
    """

    valid: bool
    reason: str
    N_start: float
    N_end: float
    N: np.ndarray
    phi: np.ndarray
    chi: np.ndarray
    dchi_dN: np.ndarray
    H: np.ndarray
    eps1: np.ndarray
    eps2: np.ndarray
    crossings: tuple[PoleCrossing, ...]
    model: Model
    segments: tuple[Segment, ...] = field(repr=False)

    @property
    def N_last(self) -> float:
        """Last e-fold of the solution (N_end, or where the integration stopped)."""
        return self.segments[-1].N1 if self.segments else self.N_start

    def evaluate(self, N: np.ndarray | float) -> BackgroundPoint:
        """Dense output at e-folds ``N`` (vectorised; DOP853 7th-order interpolant).

        Raises
        ------
        ValueError
            If some N lies outside [N_start, N_last].
        """
        N = np.atleast_1d(np.asarray(N, dtype=float))
        if not self.segments:
            raise ValueError("this background has no solution to evaluate")
        span = 1e-12 * max(1.0, abs(self.N_last))
        if N.size and (N.min() < self.N_start - span or N.max() > self.N_last + span):
            raise ValueError(f"N outside the solution [{self.N_start}, {self.N_last}]")
        ends = np.array([s.N1 for s in self.segments])
        which = np.minimum(np.searchsorted(ends, N, side="right"), len(ends) - 1)
        y = np.empty((3, N.size))
        phi = np.empty(N.size)
        isk = np.empty(N.size)
        for i in np.unique(which):
            sel = which == i
            seg = self.segments[i]
            y[:, sel] = seg.sol(np.clip(N[sel], seg.N0, seg.N1))
            phi[sel], isk[sel], _ = chart_map(kernel(self.model), seg.chart, y[0, sel], np)
        return point(self.model, N, phi, isk, y[1], y[2])


def chart_map(kern, chart: Chart, x, xp):
    """(φ, 1/√K, dx/dN per unit π) from the chart coordinate x (floats or arrays)."""
    if chart.pole < 0:
        inv = 1.0 / xp.sqrt(kern.K(x, xp))
        return x, inv, inv
    sing = kern.singular[chart.pole]
    q = sing.q
    au = abs(x) ** (1.0 / q)
    sG = xp.sqrt(sing.G(xp.copysign(au, x), xp))
    return sing.position + xp.copysign(au, x), au ** (0.5 * sing.power) / sG, q / sG


def point(model: Model, N, phi, isk, pi, chi) -> BackgroundPoint:
    """Assemble a :class:`BackgroundPoint` from the state (ε2 = 2π′/π from the RHS)."""
    kern = kernel(model)
    V, dV = kern.V(phi, np), kern.dV(phi, np)
    eps1 = 0.5 * pi * pi
    with np.errstate(divide="ignore", invalid="ignore"):
        eps2 = -2.0 * (3.0 - eps1) * (1.0 + dV * isk / (V * pi))
    return BackgroundPoint(N=N, phi=phi, chi=chi, dchi_dN=pi,
                           H=np.sqrt(V / (3.0 - eps1)), eps1=eps1, eps2=eps2)


def charts(model: Model) -> tuple[Chart, ...]:
    """The charts of a model: one per singular point, split at the midpoints."""
    xs = [s.position for s in kernel(model).singular]
    if not xs:
        return (Chart(-1, -math.inf, math.inf),)
    mids = [0.5 * (a + b) for a, b in zip(xs, xs[1:])]
    edges = [-math.inf] + mids + [math.inf]
    return tuple(Chart(i, edges[i], edges[i + 1]) for i in range(len(xs)))


def chart_of(model: Model, phi: float) -> Chart:
    """The chart containing φ."""
    return next(c for c in charts(model) if c.lo <= phi < c.hi)


def to_chart(model: Model, chart: Chart, phi: float) -> float:
    """Chart coordinate of φ (used at the start and at chart boundaries only)."""
    if chart.pole < 0:
        return phi
    sing = kernel(model).singular[chart.pole]
    u = phi - sing.position
    return math.copysign(abs(u) ** sing.q, u)
