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
    """

    report: dict[str, Any]
    training: Path
    surrogate: Path


def train_surrogate(config, map_fn: MapFunction, *, workers: int = 1,
                    points: int | None = None, resume: bool = False,
                    progress: Progress | None = None) -> TrainOutcome:
    """Train, validate and write the surrogate of ``config`` in its run folder.

    Parameters
    ----------
    config : scan.config.schema.RunConfig
    map_fn : callable
        ``map(function, iterable)`` of an entered pool (:func:`scan.pool.choose_pool`).
    workers : int
        The pool's workers (points per batch: ``max(4, 2 * workers)``).
    points : int, optional
        Design points (default: ``surrogate.points``).
    resume : bool
        Continue an existing training store of the same model.
    progress : callable, optional
        ``progress(done, total, label)``.

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
    with RunLock(folder.surrogate, BUSY):
        emulator, train, holdout = run_training(
            folder.training, config, space, SolvePoint(config, space.keys), map_fn, plan,
            resume=resume, chunk=max(4, 2 * workers), progress=progress)
        report = validate(emulator, train, holdout, observables_for(config, space))
        write_surrogate(folder.surrogate, config, space, emulator, report,
                        identity(config, space))
    return TrainOutcome(report, folder.training, folder.surrogate)
