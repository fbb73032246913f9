"""``zetascan evidence CONFIG``: nested runs of the model and the foreground, one file.

:func:`plan_evidence` builds the run's priors and target as ``sample`` does
(:func:`scan.posterior.build.build_target`) and its hypotheses
(:func:`scan.evidence.likelihood.likelihoods_of`); :func:`run_evidence` nested-samples
each hypothesis in its own checkpoint folder ``<run>/nested/<hypothesis>/`` and writes
``<run>/evidence.h5`` (:mod:`scan.evidence.file`).

The checkpoint folders are the run's state: ``resume=True`` continues them (a finished
hypothesis is replayed from its store without new likelihood calls); a folder made with
another config is refused.  One process at a time may write a run's checkpoints (a lock
file beside them).
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable
from pathlib import Path

from scan import store
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import InputFileError
from scan.evidence.file import BayesFactor, evidence_path, write_evidence
from scan.evidence.likelihood import NestedLikelihood, PooledLogLike, likelihoods_of
from scan.evidence.nested import (NestedProgress, NestedResult, NestedSettings,
                                  run_nested)
from scan.pool import BasePool
from scan.posterior.build import build_target

#: The checkpoint folder of a run, beside its evidence file.
NESTED_DIR = "nested"
#: The file in each checkpoint folder naming the config it was made with.
STAMP = "config_sha256.txt"


@dataclasses.dataclass(frozen=True)
class EvidencePlan:
    """A validated evidence run: config, nested prior, hypotheses and paths."""

    config: RunConfig
    priors: PriorSet
    likelihoods: dict[str, NestedLikelihood]
    path: Path

    @property
    def nested_dir(self) -> Path:
        """The checkpoint folders' parent."""
        return self.path.parent / NESTED_DIR


@dataclasses.dataclass(frozen=True)
class EvidenceOutcome:
    """What :func:`run_evidence` computed."""

    path: Path
    results: dict[str, NestedResult]
    factor: BayesFactor


def plan_evidence(config: RunConfig, path: str | Path | None = None) -> EvidencePlan:
    """Validate a config for nested sampling and build its hypotheses.

    Raises
    ------
    ConfigError
        As for ``sample`` (no parameters, missing curves or surrogate, ...), or a
        gaussian_test prior without a bounded box.
    """
    priors = PriorSet.from_config(config)
    target = build_target(config, priors)
    likelihoods = likelihoods_of(config, priors, target)
    nested_prior = next(iter(likelihoods.values())).priors
    return EvidencePlan(config, nested_prior, likelihoods,
                        Path(path) if path else evidence_path(config))


def run_evidence(plan: EvidencePlan, pool: BasePool, settings: NestedSettings, *,
                 resume: bool = False, should_stop: Callable[[], bool] = lambda: False,
                 on_progress: Callable[[str, NestedProgress], None] | None = None
                 ) -> EvidenceOutcome:
    """Nested-sample every hypothesis of ``plan`` and write the evidence file.

    Parameters
    ----------
    plan : EvidencePlan
    pool : BasePool
        An entered pool whose workers ran :func:`scan.evidence.likelihood.install`
        with ``plan.likelihoods``.
    settings : NestedSettings
    resume : bool
        Continue the checkpoints of an interrupted run of the same config.
    should_stop : callable
        Checked at each region update (:class:`scan.evidence.nested.Stopped` is raised).
    on_progress : callable, optional
        ``on_progress(hypothesis, NestedProgress)``.

    Raises
    ------
    InputFileError
        Another process is writing this run, or ``resume`` of checkpoints made with
        another config.
    Stopped
        A stop was requested (everything drawn so far is kept; resume later).
    """
    plan.nested_dir.mkdir(parents=True, exist_ok=True)
    lock = store.lock_file(plan.nested_dir / ".lock",
                           f"another 'zetascan evidence' is writing {plan.nested_dir}; "
                           "wait for it or stop it")
    try:
        results = {}
        for name, likelihood in plan.likelihoods.items():
            folder = _checkpoint(plan, name, resume)
            report = None if on_progress is None else \
                (lambda p, name=name: on_progress(name, p))
            results[name] = run_nested(PooledLogLike(name, likelihood, pool),
                                       plan.priors.from_unit, plan.priors.names, folder,
                                       settings, resume=resume, should_stop=should_stop,
                                       on_progress=report)
        factor = write_evidence(plan.path, plan.config, plan.priors.names, settings, results)
    finally:
        lock.close()
    return EvidenceOutcome(plan.path, results, factor)


def _checkpoint(plan: EvidencePlan, name: str, resume: bool) -> Path:
    """The checkpoint folder of one hypothesis, checked against the config on resume."""
    folder = plan.nested_dir / name
    stamp = folder / STAMP
    digest = store.config_hash(plan.config.effective_text)
    if resume and stamp.is_file() and stamp.read_text().strip() != digest:
        raise InputFileError(str(folder), "these checkpoints were made with another config "
                             "(config hash differs); run without --resume to start again, "
                             "or restore the config")
    folder.mkdir(parents=True, exist_ok=True)
    stamp.write_text(digest + "\n")
    return folder
