"""Evaluate blocks of grid points: observables, ln L per term, verdicts, derived values.

Observables come from the surrogate (:meth:`PosteriorTarget.observables`, one call per
block) or from exact solves (:func:`scan.posterior.exact.exact_outcome`, i.e.
:func:`scan.pipeline.solve_config`, one per point; a spectrum without an interior peak
counts as ``invalid_spectrum``).  With ``profile``, each point first maximises the total
ln L over the free parameters: the fixed values are the first candidate, then a bounded
Powell search (:func:`scipy.optimize.minimize`) in the free parameters' unit-cube
coordinates from every start of the plan; the best point seen is kept.  An invalid or
excluded model is a flat penalty to the search, so it only ranks models it can evaluate.

:class:`GridWorker` is picklable (loaded data are dropped and rebuilt per process).  Pools
install one prepared worker per process with :func:`install_worker` and map
:class:`RunBlock` over the blocks, so the surrogate is loaded once per process.
"""
from __future__ import annotations

import dataclasses
import math
import uuid
from typing import Any

import numpy as np

from scan.config.schema import RunConfig
from scan.grid.plan import GridPlan
from scan.grid.verdict import NOT_EVALUATED, is_relative, point_verdict, term_kind
from scan.likelihood import total_loglike
from scan.posterior.exact import exact_outcome
from scan.posterior.reasons import REASONS, Reason, of_exact_solve
from scan.likelihood.from_config import build_terms

#: Reason codes of the ``reason`` dataset are :data:`scan.posterior.reasons.REASONS`
#: (-1: not evaluated yet).
#: Derived quantities per point, with their units.
DERIVED: dict[str, str] = {"k_peak": "Mpc^-1", "P_peak": "1", "f_pbh_total": "1",
                           "f_gw_peak": "Hz", "omega_gw_h2_peak": "1"}
#: Objective of the profile search for a model that is excluded (ln L = -inf) / invalid.
EXCLUDED_PENALTY, INVALID_PENALTY = 1e100, 2e100


def derived_values(obs: Any) -> np.ndarray:
    """The :data:`DERIVED` quantities of one model's observables."""
    omega = np.asarray(obs.omega_gw_h2)
    top = int(np.argmax(omega))
    return np.array([obs.k_peak, obs.P_peak, obs.f_pbh_total, np.asarray(obs.f_hz)[top],
                     omega[top]], dtype=float)


@dataclasses.dataclass(frozen=True)
class BlockResult:
    """Everything stored for the n points of one block.

    Attributes
    ----------
    points : ndarray of int, shape (n,)
        Flat grid indices.
    reason : ndarray of int16, shape (n,)
        Index into :data:`REASONS`.
    params : ndarray, shape (n, n_model)
        The model parameters used (profiled or fixed) [parameter units].
    derived : ndarray, shape (n, len(DERIVED))
        :data:`DERIVED` in its units; NaN for invalid models.
    log_like : ndarray, shape (n,)
        Total ln L (NaN for invalid models).
    status, term_log_like, snr : ndarray, shape (n, n_terms)
        Per term: status code (int8; detections are set over the whole grid by the
        writer), ln L and SNR (NaN unless a noise-form sensitivity curve).
    """

    points: np.ndarray
    reason: np.ndarray
    params: np.ndarray
    derived: np.ndarray
    log_like: np.ndarray
    status: np.ndarray
    term_log_like: np.ndarray
    snr: np.ndarray


class GridWorker:
    """Evaluate one block of a plan (see the module docstring).

    Parameters
    ----------
    plan : GridPlan
    config : RunConfig
        The run config (exact solves; curve files).
    target : PosteriorTarget, optional
        The surrogate-driven target (``plan.source == "surrogate"``).
    curve_paths : tuple of str
        Curve and scalar-bound files (exact source: the terms are built from them).
    """

    def __init__(self, plan: GridPlan, config: RunConfig, target: Any = None,
                 curve_paths: tuple[str, ...] = ()) -> None:
        self.plan, self.config, self.target = plan, config, target
        self.curve_paths = tuple(curve_paths)
        self.token = uuid.uuid4().hex

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state.pop("_terms", None)
        return state

    def prepare(self) -> None:
        """Load the surrogate or the terms once in this process (idempotent)."""
        if "_terms" in self.__dict__:
            return
        if self.target is not None:
            self.target.prepare()
            self._terms = list(self.target.terms)
        else:

            self._terms = build_terms(self.config, self.curve_paths)

    @property
    def terms(self) -> list:
        """The likelihood terms (prepared on first use)."""
        self.prepare()
        return self._terms

    def nuisance(self) -> dict[str, float]:
        """The fixed nuisance values (name -> value)."""
        names = self.plan.priors.names[self.plan.n_model:]
        return {name: float(v) for name, v in zip(names, self.plan.base[self.plan.n_model:])}

    # -------------------------------------------------------------- observables
    def observables(self, thetas: np.ndarray) -> tuple[np.ndarray, list]:
        """Reason codes (:data:`REASONS`) and observables (None where invalid)."""
        if self.plan.source == "surrogate":
            codes, obs = self.target.observables(thetas)
            names = self.target.reasons
            reason = np.array([REASONS.index(names[c]) if names[c] in REASONS
                               else Reason.INVALID_MODEL for c in codes], np.int16)
            return reason, list(obs)

        reason = np.zeros(len(thetas), dtype=np.int16)
        obs: list = []
        for k, theta in enumerate(thetas):
            outcome = exact_outcome(self.config, theta)
            obs.append(outcome.observables)
            if outcome.observables is None:
                reason[k] = of_exact_solve(outcome.reason)
        return reason, obs

    def _objective(self, theta: np.ndarray) -> float:
        """-ln L of one vector; flat penalties for excluded and invalid models."""

        reason, obs = self.observables(theta[None, :])
        if reason[0] != 0:
            return INVALID_PENALTY
        like = total_loglike(self.terms, obs[0], self.nuisance())[0]
        return EXCLUDED_PENALTY if like == -math.inf else -like

    # -------------------------------------------------------------- profile search
    def profile(self, theta: np.ndarray) -> np.ndarray:
        """``theta`` with the free parameters at the best total ln L found.

        The fixed values themselves are the first candidate, so the result is never
        worse than them; then a bounded Powell search from every start of the plan.
        """
        from scipy.optimize import minimize

        plan = self.plan
        best = {"value": self._objective(theta), "theta": np.array(theta, dtype=float)}

        def objective(u: np.ndarray) -> float:
            candidate = plan.with_free(theta, u)
            value = self._objective(candidate)
            if value < best["value"]:
                best.update(value=value, theta=candidate)
            return value

        bounds = [(0.0, 1.0)] * len(plan.free)
        for start in plan.starts:
            minimize(objective, start, method="Powell", bounds=bounds,
                     options={"maxfev": plan.max_evaluations, "xtol": 1e-3, "ftol": 1e-6})
        return best["theta"]

    # -------------------------------------------------------------- one block
    def __call__(self, points: np.ndarray) -> BlockResult:
        """Evaluate the points of one block."""

        plan, terms = self.plan, self.terms
        points = np.asarray(points, dtype=np.int64)
        thetas = plan.thetas(points)
        if plan.profile:
            thetas = np.array([self.profile(theta) for theta in thetas])
        reason, obs = self.observables(thetas)
        n, t = len(points), len(terms)
        derived = np.full((n, len(DERIVED)), np.nan)
        log_like = np.full(n, np.nan)
        status = np.full((n, t), NOT_EVALUATED, dtype=np.int8)
        term_ll, snr = np.full((n, t), np.nan), np.full((n, t), np.nan)
        nuisance = self.nuisance()
        for k, ob in enumerate(obs):
            if ob is None:
                continue
            log_like[k], per_term = total_loglike(terms, ob, nuisance)
            derived[k] = derived_values(ob)
            for m, term in enumerate(terms):
                term_ll[k, m] = per_term[term.name]
                code, snr[k, m] = point_verdict(term, ob, per_term[term.name])
                status[k, m] = NOT_EVALUATED if is_relative(term_kind(term)) else code
        return BlockResult(points, reason, thetas[:, :plan.n_model].copy(), derived, log_like,
                           status, term_ll, snr)


# ------------------------------------------------------------------ per-process registry
_INSTALLED: dict[str, GridWorker] = {}


def install_worker(worker: GridWorker) -> None:
    """Pool initializer: prepare ``worker`` in this process and register it (replacing
    the worker of an earlier grid, so a long-lived process keeps one surrogate)."""
    worker.prepare()
    _INSTALLED.clear()
    _INSTALLED[worker.token] = worker


class RunBlock:
    """Picklable ``block -> BlockResult`` calling the worker installed in this process."""

    def __init__(self, token: str) -> None:
        self.token = token

    def __call__(self, points: np.ndarray) -> BlockResult:
        try:
            worker = _INSTALLED[self.token]
        except KeyError:
            raise RuntimeError("no grid worker installed in this process; create the pool "
                               "with initializer=install_worker") from None
        return worker(points)
