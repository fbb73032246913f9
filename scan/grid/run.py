"""Start, resume or restart a grid run: plan, open the file, evaluate the pending blocks.

Usage (the command line does exactly this)::

    run = plan_grid_run(config)
    with choose_pool(processes, mpi, initializer=install_worker,
                     initargs=(run.worker,)) as pool:
        outcome = run_grid(run, pool, resume=True, should_stop=flag, progress=show)

Blocks (:meth:`scan.grid.plan.GridPlan.blocks`) go to the pool a few at a time and are
written as each group finishes; a resumed run evaluates only the blocks with points not
done, so its file equals an uninterrupted run's (same pool mode: the surrogate's matrix
products may round differently with another BLAS thread count).
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from pathlib import Path

import numpy as np

from scan.config.diff import config_diff, format_diff, stored_config
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.curves import load_curve
from scan.errors import ConfigError, InputFileError, ZetascanError
from scan.grid.evaluate import GridWorker, RunBlock
from scan.posterior.reasons import REASONS
from scan.grid.plan import GridPlan, plan_grid
from scan.grid.store import GridWriter, create_grid_file, file_digest, read_grid
from scan.grid.verdict import DETECTABLE, EXCLUDED, TermInfo, describe_terms
from scan.observables.pbh.qcd import qcd_lines
from scan.observables.sigw_kernel_table import kernel_lines
from scan.pool import BasePool
from scan.store import (LOCATION_KEYS, RunFolder, RunLock, check_curves, curve_attrs,
                        curve_digests, stored_digests)
from scan.posterior.build import posterior_target
from scan.likelihood.from_config import curve_paths_of
from scan.posterior.setup import NUISANCE_NAMES

#: Config keys that may change between invocations of one grid: they change nothing in it.
RESUMABLE_PREFIXES: tuple[str, ...] = ("sampler.", "grid.progress_every_s")
#: What to do when another process writes the grid file (the lock names its PID).
BUSY = ("another zetascan grid is writing this file; wait for it to finish or stop it "
        "first (--restart too waits: it would delete the file under it)")
#: Nuisance parameters of exact-solve grids: those read by the likelihood terms only.
EXACT_NUISANCE: tuple[str, ...] = ("A_smbhb",)


class GridMismatchError(ZetascanError):
    """The grid file was made from a different config, surrogate or curves."""


@dataclasses.dataclass(frozen=True)
class GridRun:
    """A validated grid run: config, plan, worker, constraints and file."""

    config: RunConfig
    plan: GridPlan
    worker: GridWorker
    infos: list[TermInfo]
    path: Path
    digests: dict[str, str]
    curves: dict[str, str] = dataclasses.field(default_factory=dict)


@dataclasses.dataclass(frozen=True)
class GridOutcome:
    """How an invocation of :func:`run_grid` ended."""

    path: Path
    status: str  # "complete" or "stopped"
    done: int
    total: int
    evaluated_now: int
    resumed: bool
    stopped_by: str | None = None  # "SIGTERM", "SIGINT" (set by scan.grid.command)
    summary: tuple[str, ...] = ()  # summary_lines of the file (set by scan.grid.command)


def curve_labels(paths: tuple[str, ...]) -> dict[str, str]:
    """Curve name -> ``label`` metadata of the CSV curves among ``paths``."""

    return {c.name: c.label for c in (load_curve(p) for p in paths if p.endswith(".csv"))}


def plan_grid_run(config: RunConfig, path: str | Path | None = None) -> GridRun:
    """Validate a config for ``zetascan grid`` and build everything the run needs.

    Raises
    ------
    ConfigError
        Bad ``[grid]`` keys (see :func:`scan.grid.plan.plan_grid`), nuisance names the
        likelihood does not know, missing curve files or surrogate.
    InputFileError
        A curve or surrogate file that cannot be used.
    """

    priors = PriorSet.from_config(config)
    plan = plan_grid(config, priors)
    if plan.source == "surrogate":
        target = posterior_target(config, priors)
        paths = tuple(target.curve_paths)
        worker = GridWorker(plan, config, target=target)
        digests = {"surrogate_sha256": file_digest([target.surrogate_path])}
    else:
        for i, name in enumerate(priors.names[priors.n_model:]):
            if name not in EXACT_NUISANCE:
                known = "is not a nuisance parameter of the likelihood" \
                    if name not in NUISANCE_NAMES else "is not supported with exact solves"
                raise ConfigError(config.source, f"nuisance[{i}].name", f"'{name}' {known}",
                                  "use one of: " + ", ".join(EXACT_NUISANCE))
        paths = curve_paths_of(config)
        worker = GridWorker(plan, config, curve_paths=paths)
        digests = {"surrogate_sha256": "none"}
    digests["curves_sha256"] = file_digest(list(paths))
    infos = describe_terms(worker.terms, curve_labels(paths))
    path = Path(path) if path else RunFolder.of(config).grid
    return GridRun(config, plan, worker, infos, path, digests, curve_digests(paths))


def check_config(config: RunConfig, path: str | Path, resume: bool) -> None:
    """Refuse an existing grid file that cannot be continued with ``config``.

    Cheap (no surrogate is loaded), so the command line calls it before planning.

    Raises
    ------
    InputFileError
        The file exists and ``resume`` is not given.
    GridMismatchError
        The file was made from a different config (the message lists the keys).
    """

    if not resume:
        raise InputFileError(str(path), "a grid file already exists; pass --resume to "
                             "continue it or --restart to overwrite it")
    stored = read_grid(path)
    old = stored_config(stored["config_text"], stored["overrides"],
                        str(stored["attrs"].get("run_name", config.run.name)),
                        stored["base_dir"])
    rows = [row for row in config_diff(old, config)
            if not row[0].startswith(RESUMABLE_PREFIXES) and row[0] not in LOCATION_KEYS]
    if rows:
        raise GridMismatchError(
            f"{path}: this grid was started with a different config: {format_diff(rows)} "
            "(to continue it, undo these changes; to start again, pass --restart or change "
            "run.name)")


def _check_resumable(run: GridRun) -> None:
    """Refuse a grid file made from another config, surrogate, curves or constraints."""
    check_config(run.config, run.path, resume=True)
    stored = read_grid(run.path)
    check_curves(run.path, stored_digests(stored["attrs"]), run.curves)
    for key, value in run.digests.items():
        if str(stored["attrs"].get(key)) != value:
            what = "surrogate file" if key.startswith("surrogate") else "bound-curve files"
            raise GridMismatchError(f"{run.path}: the {what} changed since this grid was "
                                    "started; pass --restart to recompute it")
    names = [info.name for info in run.infos]
    if sorted(stored["terms"]) != sorted(names):
        raise GridMismatchError(f"{run.path}: stored constraints {sorted(stored['terms'])} "
                                f"differ from {sorted(names)}; pass --restart")


def open_grid(run: GridRun, *, resume: bool, restart: bool) -> bool:
    """Create the file, or check an existing one; True when it is resumed.

    Raises
    ------
    InputFileError
        The file exists and neither ``resume`` nor ``restart`` is given.
    GridMismatchError
        ``resume`` of a file made from something else.
    """
    if run.path.exists() and restart:
        run.path.unlink()
    if run.path.exists():
        if not resume:
            check_config(run.config, run.path, resume=False)  # raises: neither flag
        _check_resumable(run)
        return True
    create_grid_file(run.path, run.config, run.plan, run.infos,
                     {**run.digests, **curve_attrs(run.curves)})
    return False


def run_grid(run: GridRun, pool: BasePool, *, resume: bool = False, restart: bool = False,
             should_stop: Callable[[], bool] = lambda: False,
             progress: Callable[[int, int], None] | None = None,
             group: int | None = None) -> GridOutcome:
    """Evaluate every pending block of ``run``, writing each group as it finishes.

    Parameters
    ----------
    run : GridRun
    pool : BasePool
        An entered pool whose initializer was :func:`scan.grid.evaluate.install_worker`
        with ``run.worker``.
    resume, restart : bool
        Continue an existing file / overwrite it.
    should_stop : callable
        Checked after every group (a :class:`scan.sampler.stop.StopFlag`).
    progress : callable, optional
        ``progress(done, total)`` after every group.
    group : int, optional
        Blocks per pool call (default: twice the pool's workers).

    Raises
    ------
    InputFileError
        Another process writes the grid file (named by its PID; ``restart`` deletes
        nothing then).
    """
    with RunLock(run.path, BUSY) as lock:
        return _run_locked(run, pool, lock, resume, restart, should_stop, progress, group)


def _run_locked(run: GridRun, pool: BasePool, lock: RunLock, resume: bool, restart: bool,
                should_stop: Callable[[], bool], progress: Callable[[int, int], None] | None,
                group: int | None) -> GridOutcome:
    """:func:`run_grid` while holding the grid file's lock."""
    resumed = open_grid(run, resume=resume, restart=restart)
    with GridWriter(run.path, run.infos, lock) as writer:
        pending = set(writer.pending.tolist())
        blocks = [b for b in run.plan.blocks() if pending.intersection(b.tolist())]
        size = group or max(1, 2 * pool.workers)
        task = RunBlock(run.worker.token)
        now, status = 0, "complete"
        if progress is not None:
            progress(int(writer.done.sum()), run.plan.size)
        for start in range(0, len(blocks), size):
            for result in pool.map(task, blocks[start:start + size]):
                writer.write(result)
                now += len(result.points)
            if progress is not None:
                progress(int(writer.done.sum()), run.plan.size)
            if should_stop() and start + size < len(blocks):
                status = "stopped"
                break
        done = int(writer.done.sum())
    return GridOutcome(run.path, status, done, run.plan.size, now, resumed)


def summary_lines(path: str | Path) -> list[str]:
    """A few lines on a grid file: valid points, then each constraint's verdict share."""
    data = read_grid(path)
    done, valid = data["done"], data["valid"]
    n_valid = int((done & valid).sum())
    lines = [f"grid {data['grid_attrs']['y_key']} (rows) x {data['grid_attrs']['x_key']} "
             f"(columns), {done.shape[0]} x {done.shape[1]} points, "
             f"{data['grid_attrs']['source']} observables: {int(done.sum())} done, "
             f"{n_valid} valid models"]
    codes, counts = np.unique(data["reason"][done & ~valid], return_counts=True)
    if len(codes):
        lines.append("invalid: " + ", ".join(f"{REASONS[c]} {n}" for c, n in zip(codes, counts)))
    for name, term in data["terms"].items():
        kind, status = str(term["attrs"]["kind"]), term["status"]
        if n_valid == 0:
            share, word = math.nan, "excluded"
        elif kind == "sensitivity":
            share, word = float((status == DETECTABLE).sum()) / n_valid, "detectable"
        else:
            share = float((status == EXCLUDED).sum()) / n_valid
            word = "disfavoured" if kind in ("detection", "prior") else "excluded"
        lines.append(f"  {term['attrs']['label']} [{kind}]: {word} at {100 * share:.1f} % "
                     "of the valid points")
    lines += qcd_lines(data["attrs"]) + kernel_lines(data["attrs"])
    lines.append(f"grid file: {path}")
    return lines


def describe_plan(run: GridRun) -> str:
    """One line for the start of a run."""
    p = run.plan
    fixed = [f"{k}={v:.4g}" for k, v in zip(p.priors.names, p.base)
             if k not in (p.x.key, p.y.key)
             and (p.priors.names.index(k) not in p.free)]
    mode = f"profiled over {', '.join(p.priors.names[k] for k in p.free)}; " if p.free else ""
    return (f"grid {len(p.y.values)} x {len(p.x.values)} over {p.y.key} x {p.x.key} "
            f"({p.source}); {mode}fixed: {', '.join(fixed) or 'nothing'} -> {run.path}")
