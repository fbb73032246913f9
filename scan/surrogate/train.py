"""Training orchestration: plan points, solve them in parallel, append, refine, fit.

No printing: progress goes to a callback (the command line draws it).  The solve
callable and the ``map`` are injected, so the same code runs the exact solver through a
process or MPI pool and, in the tests, an analytic stand-in in-process.
"""
from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from functools import partial
from pathlib import Path

import numpy as np

from scan.errors import InputFileError
from scan.surrogate import design
from scan.surrogate.emulator import (Emulator, EmulatorSettings, TrainingSet, classify,
                                     fit_emulator, loo_error_score, peak_sd, predict_unit)
from scan.surrogate.identity import identity
from scan.surrogate.record import SCALARS, TrainingRecord, cmb_feature, shape_grid
from scan.surrogate.space import ParameterSpace
from scan.store import RunLock
from scan.surrogate.store import (BUSY, StoreWriter, check_identity, create_store, read_plan,
                                  read_points)
from scan.surrogate.threads import single_blas_thread

Solve = Callable[[np.ndarray], TrainingRecord]
MapFunction = Callable[[Callable, Iterable], Iterable]
#: ``progress(done, total, label)``: called after every appended batch.
Progress = Callable[[int, int, str], None]
CANDIDATES_PER_POINT = 64
#: Candidates per peak hold-out point: a high peak is a thin sliver of a wide box (in the
#: wide pole box f_PBH > 1e-10 needs log10 P_peak >~ -1.1, ~1 % of the box).
PEAK_CANDIDATES_PER_POINT = 256
#: Candidates per emulator call when choosing peak round points (bounds the kernel matrix).
PREDICT_BATCH = 16384


@dataclass(frozen=True)
class TrainingPlan:
    """How many points of each kind (from ``[surrogate]``, ``--points`` overriding)."""

    points: int
    holdout: int
    peak_holdout: int
    peak_holdout_min: float
    refine_rounds: int
    refine_points: int
    boundary_fraction: float
    seed: int
    peak_holdout_max: float | None = None
    peak_rounds: int = 0
    peak_points: int = 0
    peak_points_min: float = -1.5
    peak_points_max: float | None = None
    peak_variance_fraction: tuple[float, ...] = ()

    def variance_fraction(self, round_index: int) -> float:
        """Share of peak round ``round_index`` placed by predictive sd (last one repeats)."""
        shares = self.peak_variance_fraction
        return float(shares[min(round_index, len(shares) - 1)]) if shares else 0.0

    @classmethod
    def from_config(cls, config, points: int | None = None) -> "TrainingPlan":
        """The plan of a run config."""
        s = config.surrogate
        return cls(points if points is not None else s.points, s.holdout, s.peak_holdout,
                   s.peak_holdout_min, s.refine_rounds, s.refine_points, s.boundary_fraction,
                   config.run.seed, s.peak_holdout_max, s.peak_rounds if s.peak_points else 0,
                   s.peak_points, s.peak_points_min, s.peak_points_max,
                   tuple(s.peak_variance_fraction))


def settings_of(config) -> EmulatorSettings:
    """Emulator fit settings of the ``[surrogate]`` section."""
    s = config.surrogate
    return EmulatorSettings(kernel=s.kernel, nugget=s.nugget, iterations=s.fit_iterations,
                            shape_components=s.shape_components,
                            shape_tolerance=s.shape_tolerance)


def open_store(path: Path, config, space: ParameterSpace, resume: bool) -> None:
    """Create the store, or check that an existing one (``resume``) is of this model."""
    ident = identity(config, space)
    if path.exists():
        if not resume:
            raise InputFileError(str(path), "a training store already exists; pass --resume "
                                 "to continue it, or remove the file to start again")
        check_identity(path, ident)
    else:
        x = shape_grid(config.surrogate.shape_span, config.surrogate.shape_points)
        create_store(path, config, space, x, ident)


class IndexedSolve:
    """Picklable wrapper: ``(index, theta) -> (index, record)``."""

    def __init__(self, solve: Solve) -> None:
        self.solve = solve

    def __call__(self, item: tuple[int, np.ndarray]) -> tuple[int, TrainingRecord]:
        index, theta = item
        return index, self.solve(theta)


def plan_stage_counts(writer: StoreWriter, space: ParameterSpace, plan: TrainingPlan,
                      stages: np.ndarray, seqs: np.ndarray) -> None:
    """Extend the design and hold-out stages to the requested sizes (never shrink)."""
    have = int(np.sum(stages == design.STAGE_DESIGN))
    if plan.points > have:
        u = design.sobol_points(space.dim, have, plan.points - have, plan.seed)
        writer.add_plan(u, design.STAGE_DESIGN, np.arange(have, plan.points))
    have = int(np.sum(stages == design.STAGE_HOLDOUT))
    if plan.holdout > have:
        u = design.holdout_points(space.dim, plan.holdout, plan.seed)[have:]
        writer.add_plan(u, design.STAGE_HOLDOUT, np.arange(have, plan.holdout))


def solve_pending(path: Path, writer: StoreWriter, space: ParameterSpace, solve: Solve,
                  map_fn: MapFunction, chunk: int, progress: Progress | None,
                  label: str) -> None:
    """Solve every planned point not yet in the store, appending batch by batch."""
    u, _, _ = read_plan(path)
    done = set(read_points(path).index.tolist())
    todo = [i for i in range(len(u)) if i not in done]
    theta = space.from_unit(u[todo]) if todo else np.zeros((0, space.dim))
    items = list(zip(todo, theta))
    worker = IndexedSolve(solve)
    finished = len(done)
    if progress:
        progress(finished, len(u), label)
    for start in range(0, len(items), chunk):
        results = list(map_fn(worker, items[start:start + chunk]))
        writer.append([i for i, _ in results], [r for _, r in results])
        finished += len(results)
        if progress:
            progress(finished, len(u), label)


def training_set(path: Path, space: ParameterSpace, x: np.ndarray,
                 stages: tuple[int, ...] | None = None, holdout: bool = False) -> TrainingSet:
    """Finished points as arrays: training stages (default) or the hold-out set."""
    u, stage, _ = read_plan(path)
    pts = read_points(path)
    is_holdout = np.isin(stage[pts.index], design.HOLDOUT_STAGES)
    keep = is_holdout if holdout else ~is_holdout
    if stages is not None:
        keep &= np.isin(stage[pts.index], stages)
    # stores written before the CMB-scale rule: apply it to the stored tilt (column n_s)
    valid = pts.valid[keep] & ~cmb_feature(pts.scalars[keep, SCALARS.index("n_s")])
    return TrainingSet(u[pts.index[keep]], valid, pts.scalars[keep], pts.shape[keep], x)


def propose_refinement(emulator: Emulator, data: TrainingSet, plan: TrainingPlan,
                       round_index: int) -> np.ndarray:
    """Unit-cube points of refinement round ``round_index`` (see :mod:`design`)."""
    dim = data.u.shape[1]
    cand = design.candidate_points(dim, CANDIDATES_PER_POINT * plan.refine_points,
                                   plan.seed, round_index)
    margin = classify(emulator, cand)
    loo = loo_error_score(emulator, data)
    nearest = np.argmin(((cand[:, None, :] - data.u[None, :, :]) ** 2).sum(-1), axis=1)
    sd = peak_sd(emulator, cand)
    score = sd * np.maximum(loo[nearest], loo[loo > 0].mean() if np.any(loo > 0) else 1.0)
    score = np.where(margin > -0.5, score, 0.0)  # errors only matter where valid
    return design.refine_points(data.u, score, margin, cand, plan.refine_points,
                                plan.boundary_fraction)


def high_peak_points(emulator: Emulator, dim: int, count: int, low: float,
                     high: float | None, seed: int, stream: tuple[int, ...]) -> np.ndarray:
    """Up to ``count`` random unit-cube points where ``emulator`` predicts a valid model with
    ``low <=`` log10 P_peak ``<= high`` (:func:`design.peak_holdout_points`); candidates
    and picks come from the random ``stream`` (``stream + (1,)`` and ``stream + (2,)``)."""
    cand = design.peak_candidates(dim, PEAK_CANDIDATES_PER_POINT * count, seed, (*stream, 1))
    return design.peak_holdout_points(cand, predict_unit(emulator, cand).log10_P_peak,
                                      classify(emulator, cand), low, count, seed, high,
                                      (*stream, 2))


def plan_peak_holdout(path: Path, writer: StoreWriter, space: ParameterSpace,
                      emulator: Emulator, plan: TrainingPlan) -> None:
    """Plan the peak hold-out points where the final ``emulator`` predicts a valid model
    with a high peak; a store holding fewer than ``plan.peak_holdout`` (a larger count on
    resume) gets the rest, drawn from streams of their own."""
    _, stages, _ = read_plan(path)
    have = int(np.sum(stages == design.STAGE_HOLDOUT_PEAK))
    if plan.peak_holdout <= have:
        return
    stream = (design.STAGE_HOLDOUT,) if have == 0 else (design.STAGE_HOLDOUT, 3, have)
    new = high_peak_points(emulator, space.dim, plan.peak_holdout - have,
                           plan.peak_holdout_min, plan.peak_holdout_max, plan.seed, stream)
    if len(new):
        writer.add_plan(new, design.STAGE_HOLDOUT_PEAK, np.arange(have, have + len(new)))


def plan_peak_round(path: Path, writer: StoreWriter, space: ParameterSpace, x: np.ndarray,
                    settings: EmulatorSettings, plan: TrainingPlan, round_index: int) -> None:
    """Plan peak training round ``round_index`` once: refit on every training point so far
    and draw ``plan.peak_points`` where that emulator predicts a high valid peak."""
    stage = design.STAGE_PEAK + round_index
    _, stages, _ = read_plan(path)
    if np.any(stages == stage):
        return
    data = training_set(path, space, x)
    emulator = fit_emulator(data, settings)
    share = plan.variance_fraction(round_index)
    # the sliver's thin ends (p -> 1) hold few candidates: 8x more when sd chooses
    per_point = PEAK_CANDIDATES_PER_POINT * (8 if share > 0 else 1)
    cand = design.peak_candidates(space.dim, per_point * plan.peak_points, plan.seed,
                                  (stage, 1))
    window = np.concatenate([
        design.in_peak_window(pred.log10_P_peak, pred.margin, plan.peak_points_min,
                              plan.peak_points_max)
        for pred in map(partial(predict_unit, emulator), np.array_split(
            cand, max(1, len(cand) // PREDICT_BATCH)))])
    sd = peak_sd(emulator, cand[window]) if share > 0 else None
    new = design.peak_round_points(cand, window, sd, data.u, plan.peak_points, share,
                                   plan.seed, (stage, 2))
    if len(new):
        writer.add_plan(new, stage, np.arange(len(new)))


def run_training(path: Path, config, space: ParameterSpace, solve: Solve, map_fn: MapFunction,
                 plan: TrainingPlan, *, resume: bool = False, chunk: int = 8,
                 progress: Progress | None = None) -> tuple[Emulator, TrainingSet, TrainingSet]:
    """Train a surrogate; return the final emulator, its training set and the hold-out set.

    Parameters
    ----------
    path : Path
        The training store (``<output_dir>/<name>/training.h5``).
    config : RunConfig
    space : ParameterSpace
    solve : callable
        ``solve(theta) -> TrainingRecord`` (picklable if ``map_fn`` uses processes).
    map_fn : callable
        A ``map(function, iterable)`` (serial, process pool or MPI pool).
    plan : TrainingPlan
    resume : bool
        Continue an existing store (checked against the config).
    chunk : int
        Points per batch sent to ``map_fn`` and appended together.
    progress : callable, optional
        ``progress(done, total, label)``.
    """
    with single_blas_thread():
        return _run_training(path, config, space, solve, map_fn, plan, resume, chunk, progress)


def _run_training(path, config, space, solve, map_fn, plan, resume, chunk, progress):
    path = Path(path)
    with RunLock(path, BUSY) as lock:
        return _train_locked(path, lock, config, space, solve, map_fn, plan, resume, chunk,
                             progress)


def _train_locked(path, lock, config, space, solve, map_fn, plan, resume, chunk, progress):
    open_store(path, config, space, resume)
    x = shape_grid(config.surrogate.shape_span, config.surrogate.shape_points)
    settings = settings_of(config)
    with StoreWriter(path, lock) as writer:
        _, stages, seqs = read_plan(path)
        plan_stage_counts(writer, space, plan, stages, seqs)
        solve_pending(path, writer, space, solve, map_fn, chunk, progress, "design")
        for r in range(plan.refine_rounds):
            _, stages, _ = read_plan(path)
            if not np.any(stages == design.STAGE_REFINE + r):
                data = training_set(path, space, x)
                emulator = fit_emulator(data, settings)
                new = propose_refinement(emulator, data, plan, r)
                writer.add_plan(new, design.STAGE_REFINE + r, np.arange(len(new)))
            solve_pending(path, writer, space, solve, map_fn, chunk, progress,
                          f"refine {r + 1}/{plan.refine_rounds}")
        for r in range(plan.peak_rounds):  # before the peak hold-out set is placed
            plan_peak_round(path, writer, space, x, settings, plan, r)
            solve_pending(path, writer, space, solve, map_fn, chunk, progress,
                          f"peak {r + 1}/{plan.peak_rounds}")
        data = training_set(path, space, x)
        _check_enough_valid(path, data)
        emulator = fit_emulator(data, settings)  # the final fit also places the peak hold-out
        plan_peak_holdout(path, writer, space, emulator, plan)
        solve_pending(path, writer, space, solve, map_fn, chunk, progress, "held-out peaks")
    return emulator, data, training_set(path, space, x, holdout=True)


def _check_enough_valid(path: Path, data: TrainingSet) -> None:
    """A prior box with (almost) only invalid models is a user error: say why they failed."""
    if int(data.valid.sum()) >= 3:
        return
    reasons = read_points(path).reason
    common = max(set(reasons), key=reasons.count) if reasons else "none"
    raise InputFileError(str(path), f"only {int(data.valid.sum())} of {len(data.valid)} "
                         f"training points are valid models (most common reason: {common}); "
                         "narrow the [[parameters]] priors or fix the model config")


def serial_map(function: Callable, items: Iterable) -> Iterator:
    """The built-in ``map`` (one process)."""
    return map(function, items)
