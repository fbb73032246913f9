"""``zetascan grid`` as one library call: check, plan, open the pool, evaluate, stop cleanly.

:func:`grid_run` refuses an existing grid file of another config before anything is
loaded (:func:`~scan.grid.run.check_config`), plans the run, builds the pool whose
workers install the evaluator once, and evaluates the pending blocks with SIGTERM /
Ctrl-C turned into a clean stop; the command line parses and prints.
"""
from __future__ import annotations

import dataclasses
import os
from collections.abc import Callable

from scan.config.schema import RunConfig
from scan.grid.evaluate import install_worker
from scan.grid.run import (GridOutcome, GridRun, check_config, plan_grid_run, run_grid,
                           summary_lines)
from scan.pool import choose_pool
from scan.sampler.stop import graceful_stop
from scan.store import RunFolder, check_output_file


def grid_run(config: RunConfig, *, resume: bool = False, restart: bool = False,
             processes: int | None = None, mpi: bool = False,
             on_start: Callable[[GridRun], None] | None = None,
             progress: Callable[[int, int], None] | None = None) -> GridOutcome:
    """Run, resume or restart the grid of ``config`` (see :func:`run_grid`).

    Parameters
    ----------
    config : RunConfig
    resume, restart : bool
        Continue an existing grid file / overwrite it.
    processes : int, optional
        Worker processes (default: 1 for surrogate observables, every core for exact
        solves).
    mpi : bool
        Evaluate on the MPI ranks.
    on_start : callable, optional
        ``on_start(run)`` once planned, before the first block.
    progress : callable, optional
        ``progress(done, total)`` after every group of blocks.

    Returns
    -------
    GridOutcome
        With ``stopped_by`` the signal's name when a signal stopped it, and ``summary``
        the lines of :func:`~scan.grid.run.summary_lines`.
    """
    path = RunFolder.of(config).grid
    if path.exists() and not restart:
        check_config(config, path, resume)  # before loading anything
    check_output_file(path, "grid file")
    run = plan_grid_run(config)
    if processes is None and not mpi and run.plan.source == "exact":
        processes = os.cpu_count() or 1
    pool = choose_pool(processes, mpi, initializer=install_worker, initargs=(run.worker,))
    if on_start is not None:
        on_start(run)
    with graceful_stop() as flag, pool:
        outcome = run_grid(run, pool, resume=resume, restart=restart, should_stop=flag,
                           progress=progress)
    return dataclasses.replace(outcome, stopped_by=getattr(flag, "signal_name", None),
                               summary=tuple(summary_lines(outcome.path)))
