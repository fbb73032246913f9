"""Exact inflationary background in e-folds, through integrable kinetic poles.

CONTRACT (shared with ``scan.modes``; keep it stable):

* ``BackgroundPoint`` — a frozen record of arrays ``phi, chi, dchi_dN, H, eps1, eps2``
  at given e-folds ``N`` (H in reduced Planck units for the potential's V0 = 1: the
  background in N does not depend on V0, H scales as sqrt(V0)).
* ``Background`` — the solution: ``valid``, ``reason``, ``N_start``, ``N_end`` (nan if
  inflation did not end), node arrays ``N, phi, chi, dchi_dN, H, eps1, eps2`` and
  ``evaluate(N) -> BackgroundPoint`` (dense output, vectorised over an array of N).

Equations (no slow roll): π ≡ dχ/dN = √K dφ/dN, ε1 = π²/2, H² = V/(3 − ε1),
π′ = −(3 − ε1)(π + V_φ/(√K V)), ε2 = 2π′/π.  The state is (x, π, χ) where x is the
coordinate of a *chart*: x = φ without poles; near pole i (between the midpoints to its
neighbours) x = s = sign(u)|u|^q, u = φ − φᵢ, q = 1 − pᵢ/2, with
ds/dN = qπ/√G, G = |u|^p K = |u|^p(1 + R) + c finite at the pole.  u is recovered from s,
never from φ.  The integration (DOP853) stops and restarts at every pole crossing
(s = 0) and chart boundary; the end of inflation is ε1 = 1 (upward).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq

from scan.errors import ConfigError
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
        Pole index in position order.
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


def solve_background(model: Model, *, phi_start: float | None = None,
                     velocity_start: float | None = None, N_start: float = 0.0,
                     n_max: float = 300.0, rtol: float = 1e-10, min_efolds: float = 0.0,
                     efolds_auto: float = 75.0, allow_no_end: bool = False,
                     max_restarts: int = 64, max_rhs_calls: int = 200_000) -> Background:
    """Solve the exact background of ``model`` (V0 = 1).

    Parameters
    ----------
    model : Model
        The model.
    phi_start : float, optional
        Initial φ [M_p]; default: slow-roll N(φ) = ``efolds_auto`` for K = 1
        (:func:`auto_phi_start`; poles only add e-folds).
    velocity_start : float, optional
        Initial dφ/dN [M_p]; default: the slow-roll attractor π₀ = −V_φ/(√K V).
    N_start : float
        Label of the first e-fold.
    n_max : float
        Give up (invalid) if inflation has not ended after this many e-folds.
    rtol : float
        Relative tolerance.  Absolute tolerances: 1e-30 for π (relative-only control
        through ultra-slow roll, where ε1 may fall by tens of decades), 1e-22 for the
        pole coordinate s (see ``_ATOL_S``), 1e-14 for φ, 1e-12 for χ.
    min_efolds : float
        Invalid if N_end − N_start is smaller (e.g. N* plus a margin for the modes).
    efolds_auto : float
        Slow-roll e-folds of the automatic start (N* + 15 is comfortable).
    allow_no_end : bool
        Accept a solution that reaches N_start + n_max without ending (power-law
        inflation); N_end is then nan.
    max_restarts, max_rhs_calls : int
        Guards against chattering and stalled steps (invalid beyond them).

    Returns
    -------
    Background
        ``valid=False`` with a ``reason`` for: a pole with power ≥ 2, the field stopping
        (π = 0) before a pole, no end within ``n_max``, fewer than ``min_efolds``,
        non-finite values, integrator failure or exhausted guards.

    Raises
    ------
    ConfigError
        If the start cannot be chosen automatically or lies on a pole.
    """
    return _run(model, phi_start=phi_start, velocity_start=velocity_start, N_start=N_start,
               n_max=n_max, rtol=rtol, min_efolds=min_efolds, efolds_auto=efolds_auto,
               allow_no_end=allow_no_end, max_restarts=max_restarts,
               max_rhs_calls=max_rhs_calls)


# ----- the automatic start -----
@lru_cache(maxsize=128)
def auto_phi_start(model: Model, efolds: float) -> float:
    """φ_start with slow-roll N(φ) = ∫_{φ_end}^{φ} V/V_φ dφ = ``efolds`` for K = 1.

    φ_end solves ε_V = 1.  Valid for the built-in families, which inflate at φ > 0 and
    roll toward φ = 0 (ε_V decreases with φ); poles only add e-folds (K ≥ 1).

    Raises
    ------
    ConfigError
        For exponential (no end) and plug-in potentials: give ``phi_start``.
    """
    if model.potential in ("exponential", "plugin"):
        raise ConfigError("background", "phi_start", f"cannot be chosen automatically for "
                          f"the '{model.potential}' potential", "give phi_start")
    kern = kernel(model.with_canonical_kinetics())

    def eps_minus_one(x: float) -> float:
        return 0.5 * (kern.dV(x, math) / kern.V(x, math)) ** 2 - 1.0

    hi = 1.0
    while eps_minus_one(hi) > 0.0:
        hi *= 2.0
    phi_end = brentq(eps_minus_one, 1e-8, hi, xtol=1e-14)

    def n_sr(x: float) -> float:
        return quad(lambda f: kern.V(f, math) / kern.dV(f, math), phi_end, x,
                    epsrel=1e-10)[0] - efolds

    hi = phi_end + 1.0
    while n_sr(hi) < 0.0:
        hi = phi_end + 2.0 * (hi - phi_end)
    return brentq(n_sr, phi_end, hi, xtol=1e-12)


@lru_cache(maxsize=256)
def _chi_at(model: Model, phi: float) -> float:
    return float(model.canonical_field(phi))


# ----- the integration -----
#: Absolute tolerance of the pole coordinate s.  Relative-only control fails where s passes
#: through zero with a cusp (|s|^{2p/(2-p)} in G for p < 1); 1e-22 is far below any
#: displacement that matters unless the field creeps with pi < ~1e-20 (eps1 < 1e-40, the
#: ill-conditioned regime, inflation.md §5.5).  Results vary by < 1e-8 e-folds for 1e-18..1e-22.
_ATOL_S = 1e-22


class _Exhausted(Exception):
    """The right-hand-side call budget is used up (stalled or chattering integration)."""


def _rhs(kern, chart: Chart, budget: list[int]):
    """Scalar-fast RHS d(x, π, χ)/dN in a chart (math on floats)."""
    V, dV = kern.V, kern.dV
    if chart.pole < 0:
        K = kern.K

        def rhs(N, y):
            budget[0] -= 1
            if budget[0] < 0:
                raise _Exhausted
            x, pi, _ = y.tolist()
            inv = 1.0 / math.sqrt(K(x, math))
            return [pi * inv, -(3.0 - 0.5 * pi * pi) * (pi + dV(x, math) * inv / V(x, math)), pi]
        return rhs
    sing = kern.singular[chart.pole]
    q, iq, hp, x0, G = sing.q, 1.0 / sing.q, 0.5 * sing.power, sing.position, sing.G

    def rhs(N, y):
        budget[0] -= 1
        if budget[0] < 0:
            raise _Exhausted
        s, pi, _ = y.tolist()
        au = abs(s) ** iq
        u = math.copysign(au, s)
        sG = math.sqrt(G(u, math))
        phi = x0 + u
        slope = dV(phi, math) * au ** hp / (sG * V(phi, math))
        return [q * pi / sG, -(3.0 - 0.5 * pi * pi) * (pi + slope), pi]
    return rhs


def _event(g, N0: float, y0, sign: float, name: str, terminal: bool = True,
           direction: float = 0.0):
    """A solve_ivp event; if g vanishes at the (re)start it reads ``sign`` there instead,
    the sign g takes just after N0, so a restart does not re-trigger its own event."""
    g0 = g(N0, y0)
    nudge = abs(g0) <= 1e-12 * (1.0 + abs(g0))

    def ev(N, y):
        return sign if (nudge and N == N0) else g(N, y)
    ev.terminal, ev.direction, ev.__name__ = terminal, direction, name
    return ev


def _events(kern, chart: Chart, has_poles: bool, N0: float, y0) -> list:
    """End of inflation, pole crossing, chart boundaries and (pole models) π = 0."""
    ahead = math.copysign(1.0, y0[1]) if y0[1] != 0.0 else -math.copysign(
        1.0, kern.dV(chart_map(kern, chart, y0[0], math)[0], math))
    evs = [_event(lambda N, y: 0.5 * y[1] * y[1] - 1.0, N0, y0, -1.0, "end", direction=1.0)]
    if chart.pole >= 0:
        evs.append(_event(lambda N, y: y[0], N0, y0, ahead, "cross"))
    for name, b in (("lo", chart.lo), ("hi", chart.hi)):
        if math.isfinite(b):
            evs.append(_event(lambda N, y, b=b: chart_map(kern, chart, y[0], math)[0] - b,
                              N0, y0, ahead, name))
    if has_poles:
        evs.append(_event(lambda N, y: y[1], N0, y0, ahead, "stop"))
    return evs


def _initial_state(model: Model, phi0: float, velocity: float | None):
    kern = kernel(model)
    if any(phi0 == s.position for s in kern.singular):
        raise ConfigError("background", "phi_start", f"phi_start = {phi0} lies on a pole",
                          "start away from the singular points of K")
    chart = chart_of(model, phi0)
    x0 = to_chart(model, chart, phi0)
    _, isk, _ = chart_map(kern, chart, x0, math)
    if velocity is None:
        pi0 = -kern.dV(phi0, math) * isk / kern.V(phi0, math)
    else:
        pi0 = float(velocity) / isk
    return chart, np.array([x0, pi0, _chi_at(model, phi0)])


def _neighbour(model: Model, chart: Chart, name: str) -> Chart:
    return charts(model)[chart.pole + (1 if name == "hi" else -1)]


def _run(model: Model, *, phi_start, velocity_start, N_start, n_max, rtol, min_efolds,
         efolds_auto, allow_no_end, max_restarts, max_rhs_calls) -> Background:
    kern = kernel(model)
    for s in kern.singular:
        if s.power >= 2.0:
            return _invalid(model, N_start, f"pole at phi = {s.position:g} has power "
                            f"{s.power:g} >= 2: infinite field distance, it cannot be crossed")
    phi0 = auto_phi_start(model, float(efolds_auto)) if phi_start is None else float(phi_start)
    chart, y0 = _initial_state(model, phi0, velocity_start)
    if not np.all(np.isfinite(y0)):
        return _invalid(model, N_start, f"non-finite initial state at phi = {phi0:g}")
    budget, N0, N_lim = [int(max_rhs_calls)], float(N_start), float(N_start) + float(n_max)
    segs, nodes, cross, end, why = [], [], [], math.nan, ""
    while not why:
        if len(segs) > max_restarts:
            why = f"more than {max_restarts} restarts (chattering at N = {N0:.6g})"
            break
        events = _events(kern, chart, bool(kern.singular), N0, y0)
        atol = [_ATOL_S if chart.pole >= 0 else 1e-14, 1e-30, 1e-12]
        try:
            sol = solve_ivp(_rhs(kern, chart, budget), (N0, N_lim), y0, method="DOP853",
                            rtol=rtol, atol=atol, events=events, dense_output=True)
        except _Exhausted:
            why = f"more than {max_rhs_calls} right-hand-side calls (stalled near N = {N0:.6g})"
            break
        if sol.status < 0 or not np.all(np.isfinite(sol.y)):
            why = f"non-finite values or integrator failure after N = {N0:.6g}: {sol.message}"
            break
        segs.append(Segment(N0, float(sol.t[-1]), chart, sol.sol))
        first = 0 if not nodes else 1  # a restart repeats the previous end point
        nodes.append((chart, sol.t[first:], sol.y[:, first:]))
        if sol.status == 0:
            if not allow_no_end:
                why = (f"inflation did not end within n_max = {n_max:g} e-folds "
                       f"(eps1 = {0.5 * sol.y[1, -1] ** 2:.3g} at N = {N_lim:g})")
            break
        name = next(ev.__name__ for ev, t in zip(events, sol.t_events) if len(t))
        moving = math.copysign(1.0, y0[1])
        N0, y0 = float(sol.t[-1]), sol.y[:, -1].copy()
        if name == "end":
            end = N0
            break
        if name == "stop":
            why = _stop_reason(model, chart, N0, y0, moving)
        elif name == "cross":
            cross.append((chart.pole, N0))
            y0[0] = sol.y[0, -1] = 0.0  # exactly on the pole (the root finder leaves ~1e-15)
        else:
            phi_b = chart.lo if name == "lo" else chart.hi
            chart = _neighbour(model, chart, name)
            y0[0] = to_chart(model, chart, phi_b)
    if not why and math.isfinite(end) and end - N_start < min_efolds:
        why = (f"too few e-folds: inflation lasts {end - N_start:.4g} < {min_efolds:g} "
               f"required (start higher up the potential)")
    return _assemble(model, segs, nodes, N_start, end, why, cross)


def _stop_reason(model: Model, chart: Chart, N: float, y, moving: float) -> str:
    """Reason text for π = 0; ``moving`` is the sign of dφ/dN before the stop."""
    kern = kernel(model)
    phi = chart_map(kern, chart, y[0], math)[0]
    ahead = [s.position for s in kern.singular if (s.position - phi) * moving > 0]
    target = f" before the pole at phi = {min(ahead, key=lambda x: abs(x - phi)):g}" \
        if ahead else ""
    return f"the field stops (dphi/dN = 0) at phi = {phi:.6g}, N = {N:.6g} and turns back{target}"


def _invalid(model: Model, N_start: float, reason: str) -> Background:
    return _assemble(model, [], [], N_start, math.nan, reason, [])


def _assemble(model, segs, nodes, N_start, N_end, why, cross) -> Background:
    """Node arrays from the segments' steps, then the crossing reports."""
    kern = kernel(model)
    parts = []
    for chart, t, y in nodes:
        phi, isk, _ = chart_map(kern, chart, y[0], np)
        parts.append(point(model, t, phi, isk, y[1], y[2]))
    cat = {k: (np.concatenate([getattr(p, k) for p in parts]) if parts else np.empty(0))
           for k in ("N", "phi", "chi", "dchi_dN", "H", "eps1", "eps2")}
    bg = Background(valid=not why, reason=why, N_start=float(N_start), N_end=float(N_end),
                    crossings=(), model=model, segments=tuple(segs), **cat)
    if not cross:
        return bg
    return replace(bg, crossings=tuple(_crossing(bg, i, Nc) for i, Nc in cross))


# ----- pole reports -----
def _edge(f, nodes: np.ndarray, values: np.ndarray, k: int, step: int) -> float:
    """Where f (negative at node k) first turns non-negative, stepping through the nodes
    by ``step`` (±1); the bracket from the node values is refined with brentq."""
    j = k
    while 0 <= j + step < nodes.size and values[j + step] < 0.0:
        j += step
    if not 0 <= j + step < nodes.size:
        return float(nodes[j])
    a, b = sorted((nodes[j], nodes[j + step]))
    return brentq(f, a, b, xtol=1e-10)


def _crossing(bg: Background, index: int, N_c: float) -> PoleCrossing:
    """The USR window (ε2 < −3) and the near-pole window (|φ − φᵢ| < wᵢ) at a crossing."""
    sing = kernel(bg.model).singular[index]
    k = int(np.argmin(abs(bg.N - N_c)))

    def usr(N: float) -> float:
        return float(bg.evaluate(N).eps2[0]) + 3.0

    def near(N: float) -> float:
        return abs(float(bg.evaluate(N).phi[0]) - sing.position) - sing.width

    windows = []
    for f, vals, ok in ((usr, bg.eps2 + 3.0, usr(N_c) < 0.0),
                        (near, abs(bg.phi - sing.position) - sing.width, sing.width > 0.0)):
        vals = vals.copy()
        vals[k] = -1.0
        a, b = (_edge(f, bg.N, vals, k, -1), _edge(f, bg.N, vals, k, 1)) if ok else (N_c, N_c)
        windows += [a, b, b - a]
    return PoleCrossing(index, sing.position, N_c, *windows)
