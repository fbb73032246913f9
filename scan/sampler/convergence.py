"""Convergence as policy: integrated autocorrelation time, stopping rule, burn-in, thinning.

τ is estimated with emcee's estimator (``emcee.autocorr.integrated_time``: the
walker-averaged autocorrelation function summed up to Sokal's automatic window, c = 5;
Foreman-Mackey et al. 2013, arXiv:1202.3665, and the emcee autocorrelation tutorial).
The rule — chain longer than ``tau_factor``·τ for every parameter and τ stable to
``tau_rtol`` between checks — is the one emcee's documentation recommends (common
practice).  With ``tau_discard`` > 0 the first share of the chain (the initial transient,
e.g. walkers drawn from a wide prior still finding a narrow ridge) is left out of the τ
estimate, the length rule counts only the rest, and the burn-in is at least that share:
an autocorrelation time is defined for a stationary chain (Sokal 1997, "Monte Carlo
methods in statistical mechanics", discards the initial transient first; emcee's
``get_autocorr_time(discard=...)``).

Burn-in looks at ln p too (:func:`settle`): after the ``burn_factor``·τ steps, a walker
whose median ln p lies below the typical set — ln p_max − χ²_d(1 − α)/2, the level a
d-dimensional Gaussian posterior's samples fall below with probability α (Wilks; common
practice) — is a stray (stuck in a poor local optimum or not yet arrived) and is dropped,
as Hou et al. 2012 (arXiv:1104.2612) drop walkers clustered at low likelihood; and the
burn-in grows until every kept walker has reached the typical set.  The growth is bounded:
a walker arriving after half of the steps that follow the τ-based burn-in has its median
below the floor and is dropped instead.
"""
from __future__ import annotations

import dataclasses
import math

import emcee
import numpy as np
from scipy.stats import chi2

from scan.config.schema import SamplerSection


@dataclasses.dataclass(frozen=True)
class Policy:
    """Stopping, burn-in and thinning parameters (see ``[sampler]``)."""

    tau_factor: float = 50.0
    tau_rtol: float = 0.01
    burn_factor: float = 2.0
    thin_factor: float = 0.5
    tau_discard: float = 0.0

    @classmethod
    def from_section(cls, section: SamplerSection) -> Policy:
        """From the ``[sampler]`` table."""
        return cls(section.tau_factor, section.tau_rtol, section.burn_factor,
                   section.thin_factor, section.tau_discard)

    def judged_from(self, steps: int) -> int:
        """First step of the part of a ``steps``-long chain that τ is estimated on (and
        that the stopping rule's length counts): the first ``tau_discard`` share is the
        initial transient, left out."""
        return int(self.tau_discard * steps)


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
    """Integrated autocorrelation time per parameter of a (steps, walkers, dim) chain.

    A walker that never moved in a parameter over the chain (possible over the short
    judged part of an early check when almost every proposal is rejected) has no
    autocorrelation function (0/0) and is left out of that parameter's average; with
    no walker moving, τ is inf (never converged).  Otherwise this is emcee's estimator.
    """
    chain = np.asarray(chain, dtype=float)
    if chain.ndim != 3:
        raise ValueError(f"expected a (steps, walkers, dim) chain, got shape {chain.shape}")
    tau = np.full(chain.shape[2], np.inf)
    for j in range(chain.shape[2]):
        moved = np.ptp(chain[:, :, j], axis=0) > 0
        if moved.any():
            tau[j] = emcee.autocorr.integrated_time(chain[:, moved, j][:, :, None], c=5,
                                                    tol=0, quiet=True)[0]
    return tau


def assess(chain: np.ndarray, previous_tau: np.ndarray | None, policy: Policy) -> Assessment:
    """Apply the stopping rule to a chain, given the τ of the previous check (or None).

    τ is estimated on the chain after :meth:`Policy.judged_from` (all of it by default),
    and that part must be longer than ``tau_factor`` x τ.
    """
    steps = int(np.shape(chain)[0])
    start = policy.judged_from(steps)
    tau = estimate_tau(np.asarray(chain)[start:])
    length_ok = bool(np.all(steps - start > policy.tau_factor * tau))
    stable = previous_tau is not None and bool(
        np.all(np.abs(np.asarray(previous_tau) - tau) < policy.tau_rtol * tau))
    return Assessment(steps, tau, length_ok, stable)


def burn_in(tau: np.ndarray, policy: Policy, steps: int = 0) -> int:
    """Steps to discard: ``burn_factor`` x the largest τ (rounded up), and at least the
    transient left out of the τ estimate (:meth:`Policy.judged_from` of ``steps``)."""
    if not np.all(np.isfinite(tau)):
        return max(int(steps), policy.judged_from(steps))  # τ unknown: trust no step
    return max(int(math.ceil(policy.burn_factor * float(np.max(tau)))),
               policy.judged_from(steps))


def thinning(tau: np.ndarray, policy: Policy) -> int:
    """Keep every n-th step: ``thin_factor`` x the smallest finite τ (at least 1)."""
    finite = np.asarray(tau, float)[np.isfinite(tau)]
    return max(1, int(policy.thin_factor * float(np.min(finite)))) if finite.size else 1


#: Probability α of the typical-set floor below which a walker's median ln p marks it a
#: stray: a walker that spends half its time where a healthy one spends 0.1 %.
STRAY_ALPHA: float = 1e-3


@dataclasses.dataclass(frozen=True)
class Settled:
    """Burn-in after the ln p check, and the walkers kept.

    Attributes
    ----------
    burn_in : int
        Steps dropped from every walker (at least the τ-based burn-in).
    kept : ndarray of bool, shape (walkers,)
        Walkers whose post-burn-in median ln p reaches the typical set.
    floor : float
        The typical-set floor ln p_max − χ²_d(1 − α)/2 (−inf when nothing to judge).
    """

    burn_in: int
    kept: np.ndarray
    floor: float

    @property
    def dropped(self) -> int:
        """Stray walkers left out."""
        return int(np.sum(~self.kept))


def typical_floor(log_prob_max: float, dim: int, alpha: float = STRAY_ALPHA) -> float:
    """ln p below which a d-dim Gaussian posterior's samples fall with probability α."""
    return float(log_prob_max - 0.5 * chi2.ppf(1.0 - alpha, dim))


def settle(log_prob: np.ndarray, burn: int, dim: int, alpha: float = STRAY_ALPHA) -> Settled:
    """Burn-in and kept walkers of a chain from its ln p (see the module docstring).

    Parameters
    ----------
    log_prob : ndarray, shape (steps, walkers)
        ln p of every stored step (−inf for rejected positions never accepted).
    burn : int
        The τ-based burn-in [steps] (:func:`burn_in`); negative counts as 0.
    dim : int
        Sampled parameters.
    alpha : float
        Probability of the typical-set floor.
    """
    log_prob = np.asarray(log_prob, float)
    burn = max(int(burn), 0)
    walkers = log_prob.shape[1] if log_prob.ndim == 2 else 0
    after = log_prob[burn:]
    finite = after[np.isfinite(after)]
    if not finite.size:
        return Settled(burn, np.ones(walkers, bool), -np.inf)
    floor = typical_floor(float(finite.max()), dim, alpha)
    kept = np.median(np.where(np.isfinite(after), after, -np.inf), axis=0) >= floor
    if not kept.any():
        return Settled(burn, np.ones(walkers, bool), floor)
    arrived = np.argmax(after[:, kept] >= floor, axis=0)  # first step in the typical set
    return Settled(burn + int(arrived.max()), kept, floor)
