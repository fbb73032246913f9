"""Posterior sampling with emcee: the chain file, convergence policy, driver, summary, bands.

Public entry points: :func:`plan_run`, :func:`run_chain` (:mod:`scan.sampler.driver`),
:func:`summarize` (:mod:`scan.sampler.summary`).  The target it samples is built by
:mod:`scan.posterior.build`.
"""
from scan.sampler.driver import (ConfigMismatchError, Progress, RunOutcome, RunPlan, plan_run,
                                 run_chain)
from scan.sampler.summary import posterior_samples, summarize

__all__ = ["ConfigMismatchError", "Progress", "RunOutcome", "RunPlan", "plan_run",
           "posterior_samples", "run_chain", "summarize"]
