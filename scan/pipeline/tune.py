"""The width solver: a pole's width (and position) for a target peak, by exact solves.

``log10 P_peak`` grows monotonically with the width of a pole at fixed position, up to a
wall where the model stops being valid (the field stalls at the pole, P_ζ reaches the
stochastic limit, or the feature reaches the CMB pivot); ln k_peak falls monotonically
with the position (a pole higher up the potential is crossed earlier).  Each target is
therefore one monotone root: bracket it (growing steps in ln w, or in φᵢ from the
slow-roll e-fold rate), then a safeguarded Illinois (regula falsi) iteration inside the
bracket with bisection when it stalls.  Invalid models above the wall count as "too
wide"; models without an interior peak as "too narrow".

The command line (``zetascan tune``) only parses, calls :func:`tune_pole` and writes the
config text of :func:`tuned_config_text`.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np

from scan.config.schema import RunConfig
from scan.errors import ZetascanError
from scan.models.types import width_from_sharpness
from scan.pipeline.roots import Unreachable, illinois
from scan.pipeline.solve import model_of, solve_config

#: Default tolerance on log10 P_peak [dex]: the acceptance asks 0.01 dex; the peak itself
#: is refined to ``modes.refine_tol`` = 1e-3 relative (4e-4 dex), so 0.005 dex is met
#: without chasing the refinement's own noise.
HEIGHT_TOL_DEX = 0.005
#: Default tolerance on ln k_peak (a 1 % shift of the peak wavenumber).
LNK_TOL = 0.01
#: Default budget of exact solves (the acceptance: at most 25).
MAX_SOLVES = 25
#: A valid spectrum without an interior peak that stays below this many times A_s is
#: featureless (the pole is too narrow to matter); one that rises above it has its
#: maximum at an edge of the k grid, i.e. on the pivot side: past the wall (common practice).
FEATURELESS = 10.0

class TuneError(ZetascanError):
    """The target cannot be reached; ``result`` holds the closest solve."""

    def __init__(self, message: str, result: "TuneResult") -> None:
        super().__init__(message)
        self.result = result


@dataclasses.dataclass(frozen=True)
class Trial:
    """One exact solve of the search.

    Attributes
    ----------
    width, position : float
        The pole's width and position [M_p].
    valid : bool
    reason : str
    log10_P_peak : float
        nan without an interior peak or when invalid.
    k_peak : float
        [Mpc^-1]; nan without an interior peak.
    featureless : bool
        Valid, and P_ζ nowhere above :data:`FEATURELESS` × A_s (too narrow a pole); a valid
        spectrum with its maximum at an edge of the k grid is not featureless.
    """

    width: float
    position: float
    valid: bool
    reason: str
    log10_P_peak: float
    k_peak: float
    featureless: bool = False

    @property
    def has_peak(self) -> bool:
        """Valid with an interior peak."""
        return self.valid and math.isfinite(self.log10_P_peak)


@dataclasses.dataclass(frozen=True)
class TuneResult:
    """What the solver found.

    Attributes
    ----------
    config : RunConfig
        The config with the pole's width (and position) found (width given, no
        sharpness or wall ratio).
    pole : int
        The pole's config number.
    best : Trial
        The solve closest to the target(s).
    trials : tuple of Trial
        Every exact solve, in order (``len(trials)`` is the number of solves).
    """

    config: RunConfig
    pole: int
    best: Trial
    trials: tuple[Trial, ...]

    @property
    def solves(self) -> int:
        """Number of exact solves."""
        return len(self.trials)


def with_pole(config: RunConfig, pole: int, *, width: float | None = None,
              position: float | None = None) -> RunConfig:
    """``config`` with pole ``pole`` given by ``width`` (sharpness or wall coordinate dropped)
    and/or moved."""
    poles = list(config.model.poles)
    entry = poles[pole]
    poles[pole] = dataclasses.replace(
        entry, width=entry.width if width is None else float(width),
        sharpness=None if width is not None else entry.sharpness,
        wall_ratio=None if width is not None else entry.wall_ratio,
        wall_distance=None if width is not None else entry.wall_distance,
        position=entry.position if position is None else float(position))
    return dataclasses.replace(config, model=dataclasses.replace(config.model,
                                                                 poles=tuple(poles)))


def pole_state(config: RunConfig, pole: int) -> tuple[float, float, float]:
    """(width, position, power) of a configured pole (width from sharpness if needed)."""
    p = model_of(config).poles[pole]
    return p.width, p.position, p.power


class _Solver:
    """Exact solves of one pole's (width, position), counted and remembered."""

    def __init__(self, config: RunConfig, pole: int, max_solves: int) -> None:
        self.config, self.pole, self.max_solves = config, pole, max_solves
        self.trials: list[Trial] = []
        self.last: Trial | None = None

    def __call__(self, width: float, position: float) -> Trial:
        known = next((t for t in self.trials if (t.width, t.position) == (width, position)),
                     None)
        if known is not None:           # the same model again: no new solve
            self.last = known
            return known
        if len(self.trials) >= self.max_solves:
            raise Unreachable
        result = solve_config(with_pole(self.config, self.pole, width=width,
                                        position=position), with_observables=False)
        s = result.spectrum
        peak = result.valid and s is not None and s.P_peak > 0 and math.isfinite(s.k_peak)
        flat = bool(result.valid and not peak and s is not None
                    and float(np.max(s.P_zeta)) < FEATURELESS * s.A_s)
        trial = Trial(width, position, result.valid, result.reason,
                      math.log10(s.P_peak) if peak else math.nan,
                      s.k_peak if peak else math.nan, flat)
        self.trials.append(trial)
        self.last = trial
        return trial


def _height_value(trial: Trial, target: float) -> float:
    """Signed miss in dex: -inf without a peak (too narrow), +inf past the wall."""
    if trial.has_peak:
        return trial.log10_P_peak - target
    return -math.inf if trial.featureless else math.inf


def _bracket_height(solve: _Solver, x0: float, position: float, target: float,
                    tol: float) -> tuple[float, float, float, float] | float:
    """A bracket (a, fa, b, fb) in x = ln w around the target, or x if a solve hit it.

    Steps grow geometrically (ln 2, ln 4, ...) away from the start; a secant estimate
    from the last two peaks is used when it is shorter.  Past a wall (invalid) the
    bracket is the wall itself, bisected in :func:`_root` like any other end.
    """
    def f(x: float) -> float:
        return _height_value(solve(math.exp(x), position), target)

    fx = f(x0)
    if abs(fx) <= tol:
        return x0
    direction = 1.0 if fx < 0 else -1.0
    step, x, last = math.log(2.0), x0, (x0, fx)
    while True:
        nxt = x + direction * step
        if math.isfinite(fx) and math.isfinite(last[1]) and last[0] != x:
            slope = (fx - last[1]) / (x - last[0])
            if slope > 0:
                guess = x - 1.2 * fx / slope
                if 0 < (guess - x) * direction < step:
                    nxt = guess
        fn = f(nxt)
        if abs(fn) <= tol:
            return nxt
        if (fn < 0) != (fx < 0):
            return (x, fx, nxt, fn) if fx < 0 else (nxt, fn, x, fx)
        last, x, fx = (x, fx), nxt, fn
        step *= 2.0
        if step > math.log(1e6):
            raise Unreachable


def _tune_height(solve: _Solver, width: float, position: float, target: float,
                 tol: float) -> None:
    found = _bracket_height(solve, math.log(width), position, target, tol)
    if isinstance(found, tuple):
        illinois(lambda x: _height_value(solve(math.exp(x), position), target), *found, tol)


def _efolds_per_phi(config: RunConfig, position: float) -> float:
    """Slow-roll dN/dφ = V/V' at ``position`` with K = 1 [e-folds per M_p] (positive)."""
    model = model_of(config).with_canonical_kinetics()
    return abs(float(model.V(position)) / float(model.dV(position)))


def _tune_position(solve: _Solver, config: RunConfig, pole: int, ln_k: float,
                   tol: float) -> None:
    """Move the pole at fixed sharpness (the height barely moves) until ln k_peak = ln_k."""
    width, position, power = pole_state(config, pole)
    base = model_of(config).with_canonical_kinetics()
    sharp = (1.0 - 0.5 * power) * abs(float(base.dV(position)) / float(base.V(position))) / width

    def g(x: float) -> float:
        t = solve(width_from_sharpness(base, x, power, sharp), x)
        if not t.valid:
            return math.nan
        return -(math.log(t.k_peak) - ln_k) if t.has_peak else math.nan

    x, gx = position, g(position)
    if abs(gx) <= tol:
        return
    if not math.isfinite(gx):
        raise Unreachable
    step = -gx / _efolds_per_phi(config, position)  # Δ ln k ≈ −(dN/dφ) Δφᵢ
    while True:
        nxt = x + step
        gn = g(nxt)
        if abs(gn) <= tol:
            return
        if not math.isfinite(gn):
            raise Unreachable
        if (gn < 0) != (gx < 0):
            a, fa, b, fb = (x, gx, nxt, gn) if gx < 0 else (nxt, gn, x, gx)
            illinois(g, a, fa, b, fb, tol)
            return
        x, gx, step = nxt, gn, 2.0 * step


def tune_pole(config: RunConfig, *, pole: int = 0, peak_height: float | None = None,
              peak_k: float | None = None, height_tol: float = HEIGHT_TOL_DEX,
              lnk_tol: float = LNK_TOL, max_solves: int = MAX_SOLVES,
              rounds: int = 3) -> TuneResult:
    """Find a pole's width for a target peak height (and its position for a target k).

    Parameters
    ----------
    config : RunConfig
        The model; the pole's current width (or sharpness) and position start the search.
    pole : int
        The pole's config number (``model.poles[pole]``).
    peak_height : float, optional
        Target log10 P_peak (width search at fixed position).
    peak_k : float, optional
        Target k_peak [Mpc^-1] (position search at fixed sharpness, then the width again).
    height_tol : float
        Tolerance on log10 P_peak [dex].
    lnk_tol : float
        Tolerance on ln k_peak.
    max_solves : int
        Budget of exact solves (background, modes; no observables).
    rounds : int
        Alternations of the two searches when both targets are given.

    Returns
    -------
    TuneResult
        Its ``config`` carries the width (and position) found.

    Raises
    ------
    ZetascanError
        For a pole number that does not exist or no target.
    TuneError
        When a target cannot be reached: the message names the reason (the wall met, or
        the budget) and the closest value reached; ``err.result`` holds every solve.
    """
    poles = config.model.poles
    if not 0 <= pole < len(poles):
        raise ZetascanError(f"--pole {pole}: the config has {len(poles)} pole(s) in "
                            f"[[model.poles]] (numbered from 0 in the order listed)")
    if peak_height is None and peak_k is None:
        raise ZetascanError("give a target: --peak-height LOG10P and/or --peak-k / --peak-f")
    solve = _Solver(config, pole, max_solves)
    current = config
    try:
        for _ in range(rounds if peak_k is not None and peak_height is not None else 1):
            if peak_k is not None:
                _tune_position(solve, current, pole, math.log(peak_k), lnk_tol)
                current = _adopt(config, pole, solve.last)
            if peak_height is not None:
                width, position, _ = pole_state(current, pole)
                _tune_height(solve, width, position, peak_height, height_tol)
                current = _adopt(config, pole, solve.last)
            if _reached(solve.last, peak_height, peak_k, height_tol, lnk_tol):
                break
    except Unreachable:
        pass
    best = _closest(solve.trials, peak_height, peak_k)
    result = TuneResult(_adopt(config, pole, best), pole, best, tuple(solve.trials))
    if best is None or not _reached(best, peak_height, peak_k, height_tol, lnk_tol):
        raise TuneError(unreachable_message(result, peak_height, peak_k), result)
    return result


def _adopt(config: RunConfig, pole: int, trial: Trial | None) -> RunConfig:
    if trial is None:
        return config
    return with_pole(config, pole, width=trial.width, position=trial.position)


def _reached(t: Trial | None, height: float | None, k: float | None, htol: float,
             ktol: float) -> bool:
    if t is None or not t.has_peak:
        return False
    ok_h = height is None or abs(t.log10_P_peak - height) <= htol
    ok_k = k is None or abs(math.log(t.k_peak / k)) <= ktol
    return ok_h and ok_k


def _closest(trials, height: float | None, k: float | None) -> Trial | None:
    """The valid solve with a peak nearest the targets (dex + |Δ ln k|)."""
    def miss(t: Trial) -> float:
        return ((abs(t.log10_P_peak - height) if height is not None else 0.0)
                + (abs(math.log(t.k_peak / k)) if k is not None else 0.0))
    peaks = [t for t in trials if t.has_peak]
    return min(peaks, key=miss) if peaks else None


def unreachable_message(result: TuneResult, height: float | None, k: float | None) -> str:
    """Why the target was not reached, and the closest value."""
    walls = [t for t in result.trials if not t.has_peak and not t.featureless]
    below = all(t.log10_P_peak < height for t in result.trials if t.has_peak) \
        if height is not None else False
    if walls and (height is None or below):
        last = walls[-1]
        if result.best is not None and height is not None:
            last_reason = f"; P_peak saturates at 10^{result.best.log10_P_peak:.3f} next to it"
        else:
            last_reason = ""
        why = ("the model turns invalid first (" + last.reason + ")" if not last.valid else
               "the maximum of P_zeta moves to the edge of the k grid (the pivot side) first"
               ) + last_reason
    elif height is not None and below:
        why = "P_peak saturates below the target as the width grows"
    else:
        why = f"not reached within {result.solves} exact solves"
    best = result.best
    closest = ("no valid solve had a peak" if best is None else
               f"closest: log10 P_peak = {best.log10_P_peak:.4f} at k = {best.k_peak:.4g} "
               f"Mpc^-1 with width = {best.width:.8g}, position = {best.position:.8g}")
    target = " and ".join(x for x in (f"log10 P_peak = {height:g}" if height is not None
                                      else "", f"k_peak = {k:g} Mpc^-1" if k is not None
                                      else "") if x)
    return (f"target {target} for pole {result.pole} cannot be reached: {why}; {closest} "
            f"({result.solves} exact solves)")
