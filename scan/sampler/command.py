"""``zetascan sample`` as one library call: plan the run, open the pool, run the chain.

:func:`sample_run` validates the config (:func:`~scan.sampler.driver.plan_run`), builds
the pool whose workers prepare the target once (:func:`scan.pool.choose_pool`), and runs
the chain with SIGTERM / Ctrl-C turned into a clean stop
(:func:`~scan.sampler.stop.graceful_stop`); the command line parses and prints.
"""
from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from scan.config.schema import RunConfig
from scan.pool import BasePool, choose_pool
from scan.posterior.targets import prepare_target
from scan.sampler.driver import Progress, RunOutcome, RunPlan, plan_run, run_chain
from scan.sampler.stop import graceful_stop
from scan.store import check_output_file


def sample_run(config: RunConfig, *, out: str | Path | None = None, restart: bool = False,
               processes: int | None = None, mpi: bool = False,
               on_start: Callable[[RunPlan, BasePool], None] | None = None,
               on_progress: Callable[[Progress], None] | None = None) -> RunOutcome:
    """Start or resume the posterior run of ``config`` (see :func:`run_chain`).

    Parameters
    ----------
    config : RunConfig
    out : str or Path, optional
        The chain file (default: the run folder's ``chain.h5``).
    restart : bool
        Discard an existing chain first (refused while another process writes it).
    processes : int, optional
        Worker processes for the walkers.
    mpi : bool
        Evaluate on the MPI ranks.
    on_start : callable, optional
        ``on_start(plan, pool)`` once the pool is up, before the first step.
    on_progress : callable, optional
        Called with a :class:`Progress` after every step.

    Raises
    ------
    ZetascanError
        A bad config, a changed config or curve file, another process on the chain.
    """
    plan = plan_run(config, out)
    check_output_file(plan.path, "chain file")
    pool = choose_pool(processes, mpi, vectorized=config.sampler.vectorize,
                       initializer=prepare_target, initargs=(plan.target,))
    with graceful_stop() as flag, pool:
        if on_start is not None:
            on_start(plan, pool)
        return run_chain(plan, pool, restart=restart, should_stop=flag,
                         on_progress=on_progress)
