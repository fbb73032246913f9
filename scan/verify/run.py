"""The file side of ``zetascan verify``: open a posterior run, verify it, store ``verify``.

:func:`open_run` rebuilds the run's config (the stored text and overrides), priors and
posterior target and reads the thinned post-burn-in samples; :func:`verify_run` draws,
evaluates (:mod:`scan.verify.compare`) and writes the group ``verify`` of the chain file
(replacing an earlier one; the ``mcmc`` and ``sampler`` groups are not touched):

* attributes: ``samples``, ``available``, ``seed``, ``burn_in``, ``thin``, ``ess``,
  ``ess_fraction``, ``biased``, ``flags``, the thresholds, ``exact_solver``,
  ``created_utc``;
* datasets (each with ``units``): ``index`` (into the flattened thinned samples),
  ``theta``, ``log_post_surrogate``, ``log_post_exact``, ``weight``, ``exact_reason``,
  groups ``surrogate`` and ``exact`` with one dataset per blob field, and ``report``
  (the JSON report).

Nothing is lost when the verification is killed: each exact solve is kept as it finishes
in ``<chain stem>.verify_partial.h5`` next to the chain (:mod:`scan.verify.partial`
says why there), ``resume=True`` solves only the samples it lacks, and the final group is
built from the kept outcomes in draw order, so it equals an uninterrupted run's (apart
from ``created_utc``).  The partial file is removed after the final group is written.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from scan import store
from scan.config.diff import stored_config
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError, InputFileError, ZetascanError
from scan.pool import BasePool, choose_pool
from scan.posterior.build import build_target
from scan.posterior.exact import ExactSolve
from scan.sampler import runfile
from scan.sampler.summary import posterior_samples
from scan.verify.compare import (MIN_SAMPLES, Evaluated, Thresholds, compare, draw_indices,
                                 jsonable, score_outcomes)
from scan.verify.partial import draw_of, open_partial
from scan.verify.report_file import write_group

#: What to do when another process writes the chain (the lock names its PID).
BUSY = ("another zetascan command is writing this chain (sample or verify); wait for it to "
        "finish or stop it first")


@dataclasses.dataclass(frozen=True)
class Run:
    """A posterior run opened for verification.

    Attributes
    ----------
    path : Path
        The chain file.
    config : RunConfig
    target : PosteriorTarget
        Prepared in this process.
    samples : ndarray, shape (n, dim)
        The flattened samples after burn-in and thinning.
    log_prob : ndarray, shape (n,) [1]
        Their stored surrogate log posterior.
    burn_in, thin : int [steps]
    status : str
        The sampler's status ("converged", "max_steps", "stopped", ...).
    """

    path: Path
    config: RunConfig
    target: Any
    samples: np.ndarray
    log_prob: np.ndarray
    burn_in: int
    thin: int
    status: str


def open_run(run: str | Path) -> Run:
    """Read a posterior run and rebuild its target.

    Raises
    ------
    InputFileError
        Not a chain file, or no burn-in / thinning stored (an unfinished run).
    ConfigError
        The run is not a surrogate posterior run, or its curves / surrogate are missing.
    """

    path = runfile.chain_path(run)
    stored = runfile.read(path)
    extras = stored.extras
    if extras.burn_in < 0 or extras.thin < 1:
        raise InputFileError(str(path), f"no burn-in / thinning stored (status "
                             f"'{extras.status}', {stored.iteration} steps): the run did not "
                             "finish; run 'zetascan sample CONFIG' again to complete it")
    config = dataclasses.replace(
        stored_config(stored.config_text, stored.overrides, stored.run_name,
                      stored.base_dir),
        source=f"{path} (stored config)")
    if config.sampler.target != "posterior":
        raise ConfigError(config.source, "sampler.target",
                          f"'{config.sampler.target}' is not a surrogate posterior",
                          "verify runs made with sampler.target = \"posterior\"")
    priors = PriorSet.from_config(config)
    if priors.names != extras.names:
        raise InputFileError(str(path), f"stored parameters {list(extras.names)} differ "
                             f"from the stored config's {list(priors.names)}")
    target = build_target(config, priors)
    post = posterior_samples(path)  # burn-in and stray walkers by ln p, thinning
    return Run(path, config, target, post["samples"], post["log_prob"], post["burn_in"],
               post["thin"], extras.status)


def check_samples(run: Run, samples: int) -> None:
    """Refuse fewer than :data:`MIN_SAMPLES` or more than the chain holds (ZetascanError)."""
    n = len(run.samples)
    if samples < MIN_SAMPLES:
        raise ZetascanError(f"--samples {samples}: use at least {MIN_SAMPLES} (ESS/M from "
                            "fewer samples says nothing)")
    if n < samples:
        raise InputFileError(str(run.path), f"only {n} samples after burn-in {run.burn_in} "
                             f"and thinning {run.thin}, fewer than --samples {samples}; "
                             f"use --samples {n} or fewer"
                             + ("" if n >= MIN_SAMPLES else " (at least "
                                f"{MIN_SAMPLES}: run the chain longer)"))


@dataclasses.dataclass(frozen=True)
class Verification:
    """What :func:`verify_run` computed (also stored in the ``verify`` group)."""

    report: dict[str, Any]
    evaluated: Evaluated
    weights: np.ndarray
    index: np.ndarray


def verify_run(run: Run, samples: int, pool: BasePool,
               exact: Callable[[np.ndarray], Any] | None = None,
               thresholds: Thresholds = Thresholds(),
               on_progress: Callable[[int, int], None] | None = None,
               write: bool = True, resume: bool = False,
               log: Callable[[str], None] | None = None) -> Verification:
    """Draw ``samples`` samples, solve them exactly, compare, and store the result.

    With ``write``, every finished exact solve is kept at once in the chain's partial
    results (:mod:`scan.verify.partial`), which are deleted after the final
    ``verify`` group is written; ``resume`` solves only the samples they lack.

    Parameters
    ----------
    run : Run
        From :func:`open_run`.
    samples : int
        M, the number of samples drawn without replacement (seed ``run.seed``).
    pool : BasePool
        An entered pool for the exact solves.
    exact : callable, optional
        ``exact(theta) -> ExactOutcome`` (default :class:`scan.posterior.exact.ExactSolve`
        of the run's config); its ``describe()`` identifies it (resuming needs the same).
    thresholds : Thresholds
        The flag rule.
    on_progress : callable, optional
        ``on_progress(done, total)`` after each exact solve (``done`` counts resumed ones).
    write : bool
        Keep partial results and store the ``verify`` group in the chain file (False:
        no file is written).
    resume : bool
        Continue the partial results of an interrupted verification of the same draw;
        without it, earlier partial results are discarded.
    log : callable, optional
        ``log(line)``: what happened to earlier partial results.

    Returns
    -------
    Verification

    Raises
    ------
    InputFileError
        ``resume`` of partial results of another draw (the message says what differs);
        another process writes the chain file (named by its PID).
    """

    check_samples(run, samples)
    exact = ExactSolve(run.config) if exact is None else exact
    index = draw_indices(len(run.samples), samples, run.config.run.seed)
    solver = solver_name(exact)
    if not write:
        kept: dict[int, Any] = {}
        solve_missing(pool, exact, run.samples, index, set(),
                      lambda i, _theta, outcome: kept.__setitem__(i, outcome), on_progress)
        return assemble(run, index, [kept[int(i)] for i in index], solver, thresholds)
    draw = draw_of(run, index, solver)
    with store.RunLock(run.path, BUSY), \
            open_partial(run.path, draw, run.samples.shape[1], run.config, resume,
                         log) as partial:
        solve_missing(pool, exact, run.samples, index, set(partial.rows()), partial.append,
                      on_progress)
        result = assemble(run, index, partial.outcomes(index), solver, thresholds)
        write_group(run.path, result)
        partial.remove()
    return result


def verify_command(run: str | Path, samples: int, *, processes: int | None = None,
                   mpi: bool = False, thresholds: Thresholds = Thresholds(),
                   resume: bool = False, on_start: Callable[[Run, BasePool], None] | None = None,
                   on_progress: Callable[[int, int], None] | None = None,
                   log: Callable[[str], None] | None = None,
                   opener: Callable[[str | Path], Run] | None = None) -> Verification:
    """``zetascan verify`` as one call: open the run, build the pool, :func:`verify_run`.

    ``on_start(run, pool)`` is called once the pool is up; ``opener`` opens the run
    (default :func:`open_run`, the chain; :func:`scan.evidence.reweight.open_nested` for
    the nested samples); the other arguments are :func:`verify_run`'s (``processes`` /
    ``mpi``: :func:`scan.pool.choose_pool`).
    """
    opened = (opener or open_run)(run)
    store.check_output_file(opened.path, "verification results")
    with choose_pool(processes, mpi) as pool:
        if on_start is not None:
            on_start(opened, pool)
        return verify_run(opened, samples, pool, thresholds=thresholds,
                          on_progress=on_progress, resume=resume, log=log)


def solver_name(exact: Callable[[np.ndarray], Any]) -> str:
    """The exact side's ``describe()`` (else its repr): reports and resume checks."""
    describe = getattr(exact, "describe", None)
    return str(describe()) if callable(describe) else repr(exact)


def solve_missing(pool: BasePool, exact: Callable[[np.ndarray], Any], samples: np.ndarray,
                  index: np.ndarray, done: set[int],
                  on_result: Callable[[int, np.ndarray, Any], None],
                  on_progress: Callable[[int, int], None] | None = None) -> None:
    """Solve the drawn samples not in ``done``; ``on_result(i, theta, outcome)`` each."""
    todo = [(int(i), samples[i]) for i in index if int(i) not in done]
    count = len(index) - len(todo)

    def record(i: int, outcome: Any) -> None:
        nonlocal count
        on_result(i, samples[i], outcome)
        count += 1
        if on_progress is not None:
            on_progress(count, len(index))

    solve_each(pool, exact, todo, record)


def solve_each(pool: BasePool, exact: Callable[[np.ndarray], Any],
               items: list[tuple[int, np.ndarray]],
               on_result: Callable[[int, Any], None]) -> None:
    """Solve ``(key, theta)`` items, calling ``on_result(key, outcome)`` as each finishes
    (:meth:`scan.pool.BasePool.each_as_completed`: a process or MPI pool gets every item
    at once, so no worker waits for a slow neighbour)."""
    for key, outcome in pool.each_as_completed(exact, items):
        on_result(key, outcome)


def assemble(run: Run, index: np.ndarray, outcomes: list[Any], solver: str,
             thresholds: Thresholds) -> Verification:
    """Score the outcomes (in draw order) and build the report."""
    ev = score_outcomes(run.target, run.samples[index], outcomes)
    report, weights = compare(ev, run.target.names, run.target.reasons, thresholds,
                              stored_log_prob=run.log_prob[index])
    report = {"file": str(run.path), "available": int(len(run.samples)),
              "seed": int(run.config.run.seed), "burn_in": run.burn_in, "thin": run.thin,
              "chain_status": run.status, "exact_solver": solver,
              "pbh_convention": runfile.pbh_convention(run.path), **report}
    return Verification(jsonable(report), ev, weights, index)
