"""The emcee driver: start or resume a run, step, check convergence, stop cleanly.

Usage (the command line does exactly this)::

    plan = plan_run(config)
    with choose_pool(processes, mpi, vectorized=config.sampler.vectorize,
                     initializer=prepare_target, initargs=(plan.target,)) as pool:
        outcome = run_chain(plan, pool, should_stop=flag, on_progress=show)

Resumption restores emcee's random state from the run file (emcee's HDF5 backend stores
``RandomState.get_state()`` after every saved step), so a resumed run continues the same
chain, bit for bit, as an uninterrupted run with the same seed.  The walkers' initial
positions come from ``numpy.random.default_rng(seed)``; the sampler's moves from
``RandomState(seed)``.
"""
from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable
from pathlib import Path

import emcee
import numpy as np
from emcee.state import State

from scan import store
from scan.config.diff import config_diff, format_diff, resumable, stored_config
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError, InputFileError, ZetascanError
from scan.pool import BasePool
from scan.posterior.build import build_target
from scan.posterior.targets import TargetBase
from scan.sampler import runfile
from scan.sampler.convergence import Policy, assess, burn_in, estimate_tau, thinning
from scan.sampler.evaluate import Evaluator
from scan.sampler.moves import move_mixture
from scan.surrogate import emulator_digest

#: Rounds of redrawing initial walkers whose log-probability is -inf.
START_ATTEMPTS = 100
#: What to do when another process writes the chain (the lock's message names its PID).
BUSY = ("another zetascan command is running on this chain; wait for it to finish or stop "
        "it first (--restart too waits: it would delete the file under it)")


class ConfigMismatchError(ZetascanError):
    """The run file was made with a different config (the message lists the keys)."""


@dataclasses.dataclass(frozen=True)
class RunPlan:
    """A validated posterior run: config, priors, target and run-file path."""

    config: RunConfig
    priors: PriorSet
    target: TargetBase
    path: Path
    curves: dict[str, str] = dataclasses.field(default_factory=dict)
    #: :func:`scan.surrogate.emulator_digest` of the surrogate the target reads (None: the
    #: target reads none).
    surrogate: str | None = None


@dataclasses.dataclass(frozen=True)
class Progress:
    """Reported to ``on_progress`` after every step."""

    step: int
    max_steps: int
    acceptance: float
    tau_max: float | None
    n_over_tau: float | None
    steps_this_run: int
    elapsed_s: float


@dataclasses.dataclass(frozen=True)
class RunOutcome:
    """How an invocation of :func:`run_chain` ended."""

    path: Path
    status: str  # "converged", "max_steps" or "stopped"
    steps: int
    steps_this_run: int
    resumed: bool
    stopped_by: str | None
    tau: np.ndarray | None
    acceptance: float
    reason_counts: dict[str, int]


def plan_run(config: RunConfig, path: str | Path | None = None) -> RunPlan:
    """Validate a config for sampling and build its priors and target.

    Raises
    ------
    ConfigError
        Bad parameter keys, too few walkers, a target that does not fit the priors,
        missing curve files or surrogate (``sampler.target = "posterior"``).
    InputFileError
        A curve or surrogate file that cannot be used.
    """
    priors = PriorSet.from_config(config)
    target = build_target(config, priors)
    if config.sampler.walkers < 2 * priors.dim:
        raise ConfigError(config.source, "sampler.walkers",
                          f"{config.sampler.walkers} walkers for {priors.dim} parameters",
                          f"use at least 2 x {priors.dim} = {2 * priors.dim} walkers")
    path = Path(path) if path else store.RunFolder.of(config).chain
    surrogate_path = getattr(target, "surrogate_path", None)
    return RunPlan(config, priors, target, path, store.curve_digests(target.curve_paths),
                   emulator_digest(surrogate_path) if surrogate_path else None)


def _check_resumable(plan: RunPlan, stored: runfile.Stored) -> bool:
    """True if the stored config differs only in resumable keys (then it is updated)."""
    new_hash = store.config_hash(plan.config.effective_text)
    if new_hash == stored.config_sha256:
        return False
    old = stored_config(stored.config_text, stored.overrides, stored.run_name,
                        stored.base_dir)
    rows = [row for row in config_diff(old, plan.config) if not resumable(row[0])]
    if rows:
        raise ConfigMismatchError(
            f"{plan.path}: this run was started with a different config: "
            f"{format_diff(rows)} (to continue it, undo these changes; to start a new chain, "
            "pass --restart or change run.name)")
    return True


def _initial_walkers(plan: RunPlan, evaluator: Evaluator) -> State:
    """Draw the initial ensemble (prior or ball), redrawing walkers with log_p = -inf."""
    section = plan.config.sampler
    rng = np.random.default_rng(plan.config.run.seed)

    def draw(n: int) -> np.ndarray:
        if section.start == "ball":
            return plan.priors.ball(rng, n, section.ball_scale)
        return plan.priors.sample(rng, n)

    coords = draw(section.walkers)
    results = evaluator(coords)
    for _ in range(START_ATTEMPTS):
        bad = [i for i, r in enumerate(results) if not np.isfinite(r[0])]
        if not bad:
            break
        coords[bad] = draw(len(bad))
        for i, result in zip(bad, evaluator(coords[bad])):
            results[i] = result
    else:
        raise ZetascanError(f"{plan.config.source}: no valid starting point for "
                            f"{len(bad)} walkers after {START_ATTEMPTS} draws (reasons: "
                            f"{_nonzero(evaluator)}); narrow the priors or use start = ball")
    log_p = np.array([r[0] for r in results])
    blobs = np.array([tuple(r[1:]) for r in results], dtype=plan.target.blob_dtype)
    random_state = np.random.RandomState(plan.config.run.seed).get_state()
    return State(coords, log_prob=log_p, blobs=blobs, random_state=random_state)


def _nonzero(evaluator: Evaluator) -> dict[str, int]:
    return {name: int(n) for name, n in zip(evaluator.target.reasons, evaluator.counts) if n}


def _open(plan: RunPlan, restart: bool) -> runfile.Stored | None:
    """The stored run to resume, or None for a new run (after removing it on restart)."""
    if restart and plan.path.exists():
        plan.path.unlink()
    if not plan.path.exists():
        return None
    stored = runfile.read(plan.path)
    if stored.extras.names != plan.priors.names:
        raise ConfigMismatchError(f"{plan.path}: stored parameters {stored.extras.names} "
                                  f"differ from {plan.priors.names}; pass --restart")
    store.check_curves(plan.path, stored.curves, plan.curves)
    _check_surrogate(plan, stored)
    if _check_resumable(plan, stored):
        runfile.update_config(plan.path, plan.config, stored.config_sha256)
    return stored if stored.iteration > 0 else None


def _check_surrogate(plan: RunPlan, stored: runfile.Stored) -> None:
    """Refuse to continue a chain on a surrogate other than the one it started on (e.g.
    refitted by ``zetascan train --refine-from``): the two parts would sample different
    posteriors.  Chains from before the digest was recorded are not checked."""
    if stored.surrogate is None or stored.surrogate == plan.surrogate:
        return
    path = getattr(plan.target, "surrogate_path", "the surrogate")
    raise InputFileError(str(plan.path), f"the surrogate {path} was refitted since this "
                         "chain started (its emulator digest changed), and one chain must "
                         "sample one posterior; pass --restart to start a new chain on it")


def run_chain(plan: RunPlan, pool: BasePool, *, restart: bool = False,
              should_stop: Callable[[], bool] = lambda: False,
              on_progress: Callable[[Progress], None] | None = None) -> RunOutcome:
    """Start or resume the chain of ``plan`` and run it until converged, max_steps or stop.

    Parameters
    ----------
    plan : RunPlan
    pool : BasePool
        An entered pool (see :func:`scan.pool.choose_pool`).
    restart : bool
        Discard an existing run file instead of resuming it.
    should_stop : callable
        Checked after every step (a :class:`scan.sampler.stop.StopFlag`).
    on_progress : callable, optional
        Called with a :class:`Progress` after every step.

    Raises
    ------
    ConfigMismatchError
        The run file was made with a different config (and ``restart`` is False).
    InputFileError
        Another process writes this run file (the message names its PID); ``restart``
        deletes nothing then.
    """
    with store.RunLock(plan.path, BUSY):
        return _run_locked(plan, pool, restart, should_stop, on_progress)


def _run_locked(plan: RunPlan, pool: BasePool, restart: bool,
                should_stop: Callable[[], bool],
                on_progress: Callable[[Progress], None] | None) -> RunOutcome:
    """:func:`run_chain` while holding the run file's lock."""
    section, policy = plan.config.sampler, Policy.from_section(plan.config.sampler)
    stored = _open(plan, restart)
    if stored is None:
        extras = runfile.Extras(plan.priors.names, plan.priors.labels, plan.target.reasons,
                                np.zeros(len(plan.target.reasons), dtype=np.int64))
    else:
        extras = stored.extras.with_reasons(plan.target.reasons)
    evaluator = Evaluator(plan.target, pool, extras.counts)
    if stored is None:
        initial = _initial_walkers(plan, evaluator)
        runfile.create(plan.path, plan.config, extras, initial.coords, plan.curves,
                       plan.surrogate)
    extras.counts = evaluator.counts  # the same array: flushed as it grows

    backend = runfile.ChainBackend(plan.path, section.write_every, on_flush=extras.write)
    sampler = emcee.EnsembleSampler(section.walkers, plan.priors.dim, evaluator,
                                    vectorize=True, backend=backend,
                                    blobs_dtype=plan.target.blob_dtype,
                                    moves=move_mixture(section.moves))
    if stored is not None:
        initial = backend.get_last_sample()
    loop = _Loop(plan, policy, backend, extras, stored is not None)
    if stored is not None and stored.extras.status == "converged":
        return loop.outcome("converged", None)
    status, stopped_by = loop.run(sampler, initial, should_stop, on_progress)
    return loop.outcome(status, stopped_by)


class _Loop:
    """The stepping loop and its bookkeeping (kept out of :func:`run_chain`)."""

    def __init__(self, plan: RunPlan, policy: Policy, backend: runfile.ChainBackend,
                 extras: runfile.Extras, resumed: bool) -> None:
        self.plan, self.policy, self.backend, self.extras = plan, policy, backend, extras
        self.resumed = resumed
        self.start_step = self.step = int(backend.iteration)
        self.t0 = time.monotonic()

    def run(self, sampler: emcee.EnsembleSampler, initial: State,
            should_stop: Callable[[], bool],
            on_progress: Callable[[Progress], None] | None) -> tuple[str, str | None]:
        """Step until converged, max_steps or a stop request; always flush."""
        section = self.plan.config.sampler
        remaining = section.max_steps - self.step
        status, stopped_by = "max_steps", None
        if remaining <= 0:
            self._finish(status)
            return status, None
        try:
            for _ in sampler.sample(initial, iterations=remaining, progress=False,
                                    skip_initial_state_check=self.resumed):
                self.step += 1
                if self.step % section.check_every == 0 and self._check():
                    status = "converged"
                    break
                if on_progress is not None:
                    on_progress(self._progress())
                if should_stop():
                    status = "stopped"
                    stopped_by = getattr(should_stop, "signal_name", None) or "request"
                    break
        finally:
            self._finish(status)
        return status, stopped_by

    def _check(self) -> bool:
        """Flush, estimate τ, record it; True when the stopping rule is met."""
        self.backend.flush()
        chain = self.backend.get_chain()
        prev = self.extras.tau_history[-1] if self.extras.tau_history else None
        result = assess(chain, prev, self.policy)
        self.extras.tau_steps.append(self.step)
        self.extras.tau_history.append(result.tau)
        self.extras.tau = result.tau
        self.backend.flush()  # the history entry is on disk with the chain it describes
        return result.converged

    def _progress(self) -> Progress:
        tau = self.extras.tau
        accepted = self.backend.accepted_so_far()
        return Progress(self.step, self.plan.config.sampler.max_steps,
                        float(np.mean(accepted)) / max(self.step, 1),
                        None if tau is None else float(np.max(tau)),
                        None if tau is None else
                        (self.step - self.policy.judged_from(self.step)) / float(np.max(tau)),
                        self.step - self.start_step, time.monotonic() - self.t0)

    def _finish(self, status: str) -> None:
        """Final τ, burn-in and thinning; write everything."""
        extras = self.extras
        extras.status = status
        self.backend.flush()
        if self.step >= 2:
            chain = self.backend.get_chain()
            tau = estimate_tau(chain[self.policy.judged_from(len(chain)):])
            extras.tau = tau
            extras.burn_in = burn_in(tau, self.policy, len(chain))
            extras.thin = thinning(tau, self.policy)
        self.backend.flush()

    def outcome(self, status: str, stopped_by: str | None) -> RunOutcome:
        """The :class:`RunOutcome` of this invocation."""
        accepted = np.asarray(self.backend.accepted, dtype=float)
        return RunOutcome(self.plan.path, status, self.step, self.step - self.start_step,
                          self.resumed, stopped_by, self.extras.tau,
                          float(np.mean(accepted)) / max(self.step, 1),
                          {n: int(c) for n, c in zip(self.extras.reasons, self.extras.counts)})
