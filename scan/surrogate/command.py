"""``zetascan train`` as one library call: plan, solve, fit, validate, write the surrogate.

:func:`train_surrogate` strings the surrogate's modules together (parameter space,
training plan, the product's exact solve, the training store, validation, the surrogate
file) in the run folder of the config (:class:`scan.store.RunFolder`); the command line
only parses its options, builds the pool and prints the outcome.
"""
from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Any

from scan.store import RunFolder, RunLock, check_output_file
from scan.surrogate.adapter import SolvePoint
from scan.surrogate.from_chain import ChainRound, refine_from_chain
from scan.surrogate.identity import identity
from scan.surrogate.peak_observables import observables_for
from scan.surrogate.space import from_config
from scan.surrogate.surrogate_file import write_surrogate
from scan.surrogate.train import MapFunction, Progress, TrainingPlan, run_training
from scan.surrogate.validate import validate

#: What to do when another process trains into the same run folder.
BUSY = "another zetascan train is writing this surrogate; wait for it or stop it first"


@dataclasses.dataclass(frozen=True)
class TrainOutcome:
    """What :func:`train_surrogate` wrote.

    Attributes
    ----------
    report : dict
        The held-out validation report (:func:`scan.surrogate.validate.validate`).
    training : Path
        The training store.
    surrogate : Path
        The surrogate file.
    chain_round : ChainRound or None
        What ``refine_from`` added (None without it).
    """

    report: dict[str, Any]
    training: Path
    surrogate: Path
    chain_round: ChainRound | None = None


def train_surrogate(config, map_fn: MapFunction, *, workers: int = 1,
                    points: int | None = None, resume: bool = False,
                    progress: Progress | None = None,
                    refine_from: str | Path | None = None) -> TrainOutcome:
    """Train, validate and write the surrogate of ``config`` in its run folder.

    Parameters
    ----------
    config : scan.config.schema.RunConfig
    map_fn : callable
        ``map(function, iterable)`` of an entered pool (:func:`scan.pool.choose_pool`).
    workers : int
        The pool's workers (points per batch: ``max(4, 2 * workers)``).
    points : int, optional
        Design points (default: ``surrogate.points``); with ``refine_from``, the posterior
        points to add (default: ``surrogate.refine_points``).
    resume : bool
        Continue an existing training store of the same model.
    progress : callable, optional
        ``progress(done, total, label)``.
    refine_from : str or Path, optional
        A chain sampled on this surrogate: add one round of exact solves at its posterior
        samples to the existing store and refit (:mod:`scan.surrogate.from_chain`).

    Raises
    ------
    ZetascanError
        Bad ``[surrogate]`` or ``[[parameters]]`` keys, a store of another model, a store
        without ``resume``, another process writing the run folder's files.
    """
    folder = RunFolder.of(config)
    check_output_file(folder.training, "training store")
    space = from_config(config)
    plan = TrainingPlan.from_config(config, points)
    solve, chunk, chain_round = SolvePoint(config, space.keys), max(4, 2 * workers), None
    with RunLock(folder.surrogate, BUSY):
        if refine_from is None:
            emulator, train, holdout = run_training(
                folder.training, config, space, solve, map_fn, plan, resume=resume,
                chunk=chunk, progress=progress)
        else:
            chain_round, emulator, train, holdout = refine_from_chain(
                folder.training, config, space, refine_from,
                points if points is not None else config.surrogate.refine_points, solve,
                map_fn, chunk=chunk, progress=progress)
        report = validate(emulator, train, holdout, observables_for(config, space))
        write_surrogate(folder.surrogate, config, space, emulator, report,
                        identity(config, space))
    return TrainOutcome(report, folder.training, folder.surrogate, chain_round)
