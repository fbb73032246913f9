"""The exact integration: automatic start, chart right-hand sides, events, restarts,
validity (see the package docstring for the equations)."""
from __future__ import annotations

import math
from dataclasses import replace
from functools import lru_cache

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq

from scan.background.compiled import activate, encode, field_of
from scan.background.crossing import crossing_report
from scan.background.integrate import (EVENT_NAMES, EXHAUSTED, REACHED, DenseSegment,
                                       integrate_segment)
from scan.background.types import (Background, Chart, Segment, chart_map, chart_of, charts, point,
                                   to_chart)
from scan.errors import ConfigError
from scan.models import Model, kernel
from scan.ode import TABLEAU

#: Floor of ε1 below which a background is flagged invalid as classically ill-conditioned
#: (inflation.md §5.5).  Below it π = √(2ε1) < 1.4e-20, and the pole coordinate moves by
#: less than ``_ATOL_S`` per step, so the creep through the pole is set by tolerances, not
#: by the equations.  Measured on the reference model (Starobinsky V, K = 1 + c/|φ − 4.2|,
#: φ_start = 6): for c ≤ 0.0363, min ε1 ≥ 2.3e-44 and N_end − N_cross agrees to 1.4e-8
#: e-folds between rtol 1e-10 and 1e-11; for c ≥ 0.0364, min ε1 ≤ 5e-64 and the same
#: quantity jumps between ~2, ~6 and ~133 e-folds with the tolerance (or the field "stops"
#: on the pole).  The floor sits in that gap, on the conservative side; the models it
#: rejects have P_ζ ~ H²/(8π²ε1) far in the stochastic regime anyway.
EPS1_FLOOR = 1e-40



def solve_background(model: Model, *, phi_start: float | None = None,
                     velocity_start: float | None = None, N_start: float = 0.0,
                     n_max: float = 300.0, rtol: float = 1e-10, min_efolds: float = 0.0,
                     efolds_auto: float = 75.0, allow_no_end: bool = False,
                     max_restarts: int = 64, max_rhs_calls: int = 200_000,
                     eps1_floor: float = EPS1_FLOOR) -> Background:
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
    eps1_floor : float
        Invalid (ill-conditioned) if ε1 falls below it at any step (:data:`EPS1_FLOOR`).

    Returns
    -------
    Background
        ``valid=False`` with a ``reason`` for: a pole with power ≥ 2, the field stopping
        (π = 0) before a pole, no end within ``n_max``, fewer than ``min_efolds``,
        non-finite values, integrator failure, exhausted guards, or ε1 below ``eps1_floor``.

    Raises
    ------
    ConfigError
        If the start cannot be chosen automatically or lies on a pole.
    """
    return _run(model, phi_start=phi_start, velocity_start=velocity_start, N_start=N_start,
               n_max=n_max, rtol=rtol, min_efolds=min_efolds, efolds_auto=efolds_auto,
               allow_no_end=allow_no_end, max_restarts=max_restarts,
               max_rhs_calls=max_rhs_calls, eps1_floor=eps1_floor)


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
#: The failure message of a step size below the float spacing (as solve_ivp words it).
MESSAGE_FAILED = "Required step size is less than spacing between numbers."



def _segment_events(kern, chart: Chart, has_poles: bool, N0: float, y0, m):
    """(enabled, sign at the start, nudge) of the five events of a segment (see
    :mod:`scan.background.integrate`); an event vanishing at the (re)start reads its sign
    just after N0 there, so a restart does not re-trigger it."""
    ahead = math.copysign(1.0, y0[1]) if y0[1] != 0.0 else -math.copysign(
        1.0, kern.dV(chart_map(kern, chart, y0[0], math)[0], math))
    enabled = np.array([True, chart.pole >= 0, math.isfinite(chart.lo),
                        math.isfinite(chart.hi), has_poles])
    signs = np.array([-1.0, ahead, ahead, ahead, ahead])
    phi0 = field_of(float(y0[0]), chart.pole, m)
    g0 = np.array([0.5 * y0[1] ** 2 - 1.0, y0[0], phi0 - chart.lo, phi0 - chart.hi, y0[1]])
    with np.errstate(invalid="ignore"):
        nudge = enabled & (np.abs(g0) <= 1e-12 * (1.0 + np.abs(g0)))
    return enabled, signs, nudge


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
         efolds_auto, allow_no_end, max_restarts, max_rhs_calls, eps1_floor) -> Background:
    kern = kernel(model)
    for s in kern.singular:
        if s.power >= 2.0:
            return _invalid(model, N_start, f"pole at phi = {s.position:g} has power "
                            f"{s.power:g} >= 2: infinite field distance, it cannot be crossed")
    phi0 = auto_phi_start(model, float(efolds_auto)) if phi_start is None else float(phi_start)
    chart, y0 = _initial_state(model, phi0, velocity_start)
    if not np.all(np.isfinite(y0)):
        return _invalid(model, N_start, f"non-finite initial state at phi = {phi0:g}")
    budget, N0, N_lim = int(max_rhs_calls), float(N_start), float(N_start) + float(n_max)
    m = encode(model)
    activate(model)
    segs, nodes, cross, end, why = [], [], [], math.nan, ""
    while not why:
        if len(segs) > max_restarts:
            why = f"more than {max_restarts} restarts (chattering at N = {N0:.6g})"
            break
        enabled, signs, nudge = _segment_events(kern, chart, bool(kern.singular), N0, y0, m)
        atol = np.array([_ATOL_S if chart.pole >= 0 else 1e-14, 1e-30, 1e-12])
        try:
            status, hit, t, y, t_old, h, y_old, F, budget = integrate_segment(
                N0, N_lim, np.asarray(y0, dtype=float), float(rtol), atol, chart.pole, m,
                np.array([chart.lo, chart.hi]), enabled, signs, nudge, budget, TABLEAU)
        except (ZeroDivisionError, OverflowError, FloatingPointError) as err:
            # e.g. V = 0 exactly, or cosh overflowing in a pole chart: the model, not a bug
            why = (f"non-finite values in the right-hand side after N = {N0:.6g} "
                   f"({type(err).__name__}: {err})")
            break
        if status == EXHAUSTED:
            why = f"more than {max_rhs_calls} right-hand-side calls (stalled near N = {N0:.6g})"
            break
        y = y.T.copy()
        if status < 0 or not np.all(np.isfinite(y)):
            why = (f"non-finite values or integrator failure after N = {N0:.6g}: "
                   f"{MESSAGE_FAILED if status < 0 else 'non-finite state'}")
            break
        segs.append(Segment(N0, float(t[-1]), chart, DenseSegment(t_old, h, y_old, F)))
        first = 0 if not nodes else 1  # a restart repeats the previous end point
        nodes.append((chart, t[first:], y[:, first:]))
        if status == REACHED:
            if not allow_no_end:
                why = (f"inflation did not end within n_max = {n_max:g} e-folds "
                       f"(eps1 = {0.5 * y[1, -1] ** 2:.3g} at N = {N_lim:g})")
            break
        name = EVENT_NAMES[hit]
        moving = math.copysign(1.0, y0[1])
        N0, y0 = float(t[-1]), y[:, -1].copy()
        if name == "end":
            end = N0
            break
        if name == "stop":
            why = _stop_reason(model, chart, N0, y0, moving)
        elif name == "cross":
            cross.append((chart.pole, N0))
            y0[0] = y[0, -1] = 0.0  # exactly on the pole (the root finder leaves ~1e-15)
        else:
            phi_b = chart.lo if name == "lo" else chart.hi
            chart = _neighbour(model, chart, name)
            y0[0] = to_chart(model, chart, phi_b)
    if not why and math.isfinite(end) and end - N_start < min_efolds:
        why = (f"too few e-folds: inflation lasts {end - N_start:.4g} < {min_efolds:g} "
               f"required (start higher up the potential)")
    why = _conditioning(nodes, eps1_floor, why)
    return _assemble(model, segs, nodes, N_start, end, why, cross)


def _conditioning(nodes, floor: float, why: str) -> str:
    """Reason for an ill-conditioned solution (min ε1 over the steps below ``floor``).

    Only the steps after ε1 first exceeds √floor count: ε1 must *fall* below the floor
    (a start at rest, π = 0, passes through tiny ε1 while accelerating and is well posed).

    It replaces a reason found later in the same run (a stop on the pole, no end, too few
    e-folds): those outcomes depend on the tolerance once ε1 is below the floor.
    """
    if not nodes or why.startswith(("non-finite", "more than")):
        return why
    pi = np.abs(np.concatenate([y[1] for _, _, y in nodes]))
    if why.startswith("the field stops"):
        pi = pi[:-1]  # the stop event itself has π = 0
    above = np.flatnonzero(pi > math.sqrt(2.0 * math.sqrt(floor)))  # ε1 > √floor
    if not above.size:
        return why
    pi_min = float(np.min(pi[above[0]:]))
    eps1_min = 0.5 * pi_min * pi_min
    if eps1_min >= floor:
        return why
    return (f"ill-conditioned: eps1 falls to {eps1_min:.2g} < {floor:g} (the field creeps "
            f"through ultra-slow roll; e-folds depend on the tolerance and P_zeta is deep in "
            f"the stochastic regime)" + (f"; then: {why}" if why else ""))


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
    return replace(bg, crossings=tuple(crossing_report(bg, i, Nc) for i, Nc in cross))
