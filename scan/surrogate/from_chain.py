"""Training points where a posterior lies: ``zetascan train CONFIG --refine-from CHAIN.h5``.

A surrogate trained over a wide prior box is least accurate exactly where a posterior may
sit (a narrow ridge such as p ~ 1 of the wide pole box).  This module closes the usual
loop of emulator-driven inference — sample on the emulator, solve exactly where the
samples are, refit, sample again:

1. read the chain's samples after burn-in, stray walkers and thinning (the one reader of
   posterior samples, :func:`scan.sampler.summary.posterior_samples`; an unconverged chain
   is fine, it only says where to look);
2. pick up to N of them, in random order and well apart from every planned point and
   from each other (:func:`scan.surrogate.design.spread_posterior_points`);
3. plan them in the training store under their own stage,
   ``STAGE_POSTERIOR + round``, and hand over to :func:`scan.surrogate.train.run_training`
   with ``resume``, which solves them, refits the emulator on every training stage and
   returns the untouched hold-out set (never trained on) for the validation report.

A store with planned but unsolved points (an interrupted run) gets no new round: those
points are solved first; run the command again to add the next round.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from scan.errors import InputFileError
from scan.sampler import runfile
from scan.sampler.summary import posterior_samples
from scan.store import RunLock
from scan.surrogate import design
from scan.surrogate.emulator import Emulator, TrainingSet
from scan.surrogate.space import ParameterSpace
from scan.surrogate.store import BUSY, StoreWriter, read_plan, read_points
from scan.surrogate.train import (
    MapFunction,
    Progress,
    Solve,
    TrainingPlan,
    open_store,
    run_training,
)


@dataclass(frozen=True)
class ChainRound:
    """What one ``--refine-from`` round planned.

    Attributes
    ----------
    stage : int or None
        The store stage of the new points (None: no new round, see ``pending``).
    planned : int
        Posterior points planned in this round.
    samples : int
        Posterior samples (inside the box) they were chosen from.
    pending : int
        Points planned earlier and still unsolved when the command started.
    """

    stage: int | None
    planned: int
    samples: int
    pending: int


def chain_samples_unit(chain: str | Path, space: ParameterSpace) -> np.ndarray:
    """Posterior samples of the surrogate's parameters in its unit cube (inside it only).

    Raises
    ------
    InputFileError
        Not a chain file, an unfinished chain (no burn-in stored), or one that does not
        sample every parameter of ``space``.
    """
    path = runfile.chain_path(chain)
    stored = runfile.read(path)
    if stored.extras.burn_in < 0 or stored.extras.thin < 1:
        raise InputFileError(str(path), "no burn-in / thinning stored (the run did not "
                             "finish); run 'zetascan sample CONFIG' again to complete it")
    post = posterior_samples(path)
    names = list(post["names"])
    missing = [key for key in space.keys if key not in names]
    if missing:
        raise InputFileError(str(path), f"the chain samples {names}, not {missing}: give a "
                             "chain sampled on this config's surrogate")
    u = space.to_unit(post["samples"][:, [names.index(key) for key in space.keys]])
    return u[np.all((u >= 0.0) & (u <= 1.0), axis=1)]


def plan_chain_round(path: Path, space: ParameterSpace, chain: str | Path, count: int,
                     seed: int) -> ChainRound:
    """Plan up to ``count`` posterior points of ``chain`` in the store ``path``.

    Raises
    ------
    InputFileError
        A chain that cannot be used (:func:`chain_samples_unit`) or with no sample inside
        the prior box.
    """
    samples = chain_samples_unit(chain, space)
    if len(samples) == 0:
        raise InputFileError(str(chain), "no posterior sample lies inside the surrogate's "
                             "prior box")
    with RunLock(path, BUSY) as lock:
        u, stages, _ = read_plan(path)
        pending = len(u) - len(read_points(path).index)
        if pending:
            return ChainRound(None, 0, len(samples), pending)
        rounds = len(np.unique(stages[stages >= design.STAGE_POSTERIOR]))
        new = design.spread_posterior_points(samples, u, count, seed, rounds)
        stage = design.STAGE_POSTERIOR + rounds
        if len(new):
            with StoreWriter(path, lock) as writer:
                writer.add_plan(new, stage, np.arange(len(new)))
    return ChainRound(stage, len(new), len(samples), 0)


def refine_from_chain(path: Path, config, space: ParameterSpace, chain: str | Path,
                      count: int, solve: Solve, map_fn: MapFunction, *, chunk: int = 8,
                      progress: Progress | None = None
                      ) -> tuple[ChainRound, Emulator, TrainingSet, TrainingSet]:
    """Add one round of posterior points to an existing store, solve them, refit.

    Parameters
    ----------
    path : Path
        The training store (it must exist: train first).
    config : RunConfig
        The config the store was made with (checked).
    space : ParameterSpace
    chain : str or Path
        A chain file (or run folder) sampled on this surrogate.
    count : int
        Posterior points to add (at most).
    solve, map_fn, chunk, progress
        As in :func:`scan.surrogate.train.run_training`.

    Returns
    -------
    (ChainRound, Emulator, TrainingSet, TrainingSet)
        The round, the refitted emulator, its training set and the hold-out set.
    """
    path = Path(path)
    if not path.exists():
        raise InputFileError(str(path), "no training store to refine; run 'zetascan train "
                             "CONFIG' first")
    open_store(path, config, space, resume=True)  # refuses a store of another model
    planned = plan_chain_round(path, space, chain, count, config.run.seed)
    # nothing but the posterior round (and points an interrupted run left) is solved: the
    # design, hold-out and refinement stages are never extended here
    plan = replace(TrainingPlan.from_config(config), points=0, holdout=0, peak_holdout=0,
                   refine_rounds=0, peak_rounds=0)
    emulator, data, holdout = run_training(path, config, space, solve, map_fn, plan,
                                           resume=True, chunk=chunk, progress=progress)
    return planned, emulator, data, holdout
