"""Posterior sampling with emcee: targets, run file, convergence policy, driver, summary.

Public entry points: :func:`plan_run`, :func:`run_chain` (``scan.sampler.driver``),
:func:`summarize` (``scan.sampler.summary``), the targets in ``scan.posterior.targets``.
"""
from scan.sampler.driver import ConfigMismatchError, Progress, RunOutcome, RunPlan, plan_run, \
    run_chain
from scan.sampler.summary import posterior_samples, summarize
from scan.posterior.targets import GaussianTarget, TargetBase, build_target, prepare_target

__all__ = ["ConfigMismatchError", "GaussianTarget", "Progress", "RunOutcome", "RunPlan",
           "TargetBase", "build_target", "plan_run", "posterior_samples", "prepare_target",
           "run_chain", "summarize"]
