"""Convergence as policy: integrated autocorrelation time, stopping rule, burn-in, thinning.

τ is estimated with emcee's estimator (``emcee.autocorr.integrated_time``: the
walker-averaged autocorrelation function summed up to Sokal's automatic window, c = 5;
Foreman-Mackey et al. 2013, arXiv:1202.3665, and the emcee autocorrelation tutorial).
The rule — chain longer than ``tau_factor``·τ for every parameter and τ stable to
``tau_rtol`` between checks — is the one emcee's documentation recommends (common
practice).
"""
from __future__ import annotations

import dataclasses
import math

import emcee
import numpy as np

from scan.config.schema import SamplerSection


@dataclasses.dataclass(frozen=True)
class Policy:
    """Stopping, burn-in and thinning parameters (see ``[sampler]``)."""

    tau_factor: float = 50.0
    tau_rtol: float = 0.01
    burn_factor: float = 2.0
    thin_factor: float = 0.5

    @classmethod
    def from_section(cls, section: SamplerSection) -> Policy:
        """From the ``[sampler]`` table."""
        return cls(section.tau_factor, section.tau_rtol, section.burn_factor,
                   section.thin_factor)


@dataclasses.dataclass(frozen=True)
class Assessment:
    """One convergence check."""

    steps: int
    tau: np.ndarray
    length_ok: bool
    stable: bool

    @property
    def converged(self) -> bool:
        """Long enough and stable."""
        return self.length_ok and self.stable

    @property
    def n_over_tau(self) -> float:
        """Chain length over the largest τ."""
        return self.steps / float(np.max(self.tau))


def estimate_tau(chain: np.ndarray) -> np.ndarray:
    """Integrated autocorrelation time per parameter of a (steps, walkers, dim) chain."""
    chain = np.asarray(chain, dtype=float)
    if chain.ndim != 3:
        raise ValueError(f"expected a (steps, walkers, dim) chain, got shape {chain.shape}")
    return np.atleast_1d(emcee.autocorr.integrated_time(chain, c=5, tol=0, quiet=True))


def assess(chain: np.ndarray, previous_tau: np.ndarray | None, policy: Policy) -> Assessment:
    """Apply the stopping rule to a chain, given the τ of the previous check (or None)."""
    tau = estimate_tau(chain)
    steps = int(np.shape(chain)[0])
    length_ok = bool(np.all(steps > policy.tau_factor * tau))
    stable = previous_tau is not None and bool(
        np.all(np.abs(np.asarray(previous_tau) - tau) < policy.tau_rtol * tau))
    return Assessment(steps, tau, length_ok, stable)


def burn_in(tau: np.ndarray, policy: Policy) -> int:
    """Steps to discard: ``burn_factor`` x the largest τ (rounded up)."""
    return int(math.ceil(policy.burn_factor * float(np.max(tau))))


def thinning(tau: np.ndarray, policy: Policy) -> int:
    """Keep every n-th step: ``thin_factor`` x the smallest τ (at least 1)."""
    return max(1, int(policy.thin_factor * float(np.min(tau))))
