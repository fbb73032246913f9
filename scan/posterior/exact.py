"""Exact solves of posterior samples, as the posterior target's observables.

``zetascan verify`` re-solves chain samples with the full pipeline
(:func:`scan.pipeline.solve_config`) and scores them with the *same* likelihood code as
the surrogate (:meth:`scan.posterior.target.PosteriorTarget.score`).  This module turns
one parameter vector into that target's :class:`~scan.posterior.target.Observables`:

* the model parameters (the first ``n_model`` entries of ``theta``) are set in the
  config with :func:`scan.config.priors.apply_parameters`; the nuisance entries are left to the
  likelihood (the target reads them from ``theta``), except ``pbh.threshold`` and
  ``pbh.collapse_K``, which set ``observables.threshold`` and ``observables.collapse_K``
  (:func:`with_nuisance_conventions`);
* Ω_GW h²(f) and f_PBH(M) are those of the exact spectrum, computed by
  :func:`scan.observables.compute_observables` with the config's ``[observables]``
  conventions and grids (what ``zetascan solve`` reports);
* an invalid model (any stage), or a spectrum without an interior peak (the surrogate's
  training treats it as invalid too), is an :class:`ExactOutcome` with a reason.

:class:`ExactSolve` is a small picklable callable for :mod:`scan.pool` workers.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import Any

import numpy as np

from scan.config.priors import apply_parameters
from scan.config.schema import RunConfig
from scan.observables import Observables
from scan.observables.settings import require_batch_conventions, settings_of
from scan.pipeline import solve_config
from scan.pipeline.solve import wall_width
from scan.posterior.setup import COLLAPSE_K, THRESHOLD

#: Reason of a valid spectrum whose maximum lies at the edge of its k grid.
NO_PEAK = "spectrum: no interior peak in P_zeta"


@dataclasses.dataclass(frozen=True)
class ExactOutcome:
    """The exact side of one sample.

    Attributes
    ----------
    observables : Observables or None
        None when the model is invalid.
    reason : str
        Why the model is invalid ("" when valid).
    notes : tuple of str
        Warnings of the observables stage (e.g. a truncated spectrum table).
    """

    observables: Observables | None
    reason: str = ""
    notes: tuple[str, ...] = ()


def posterior_observables(obs, *, k_peak: float, P_peak: float, n_s: float, r: float,
                          N_star: float, ln_1e10_as: float) -> Observables:
    """``obs`` of one exact spectrum with its pivot scalars and P_ζ peak filled in.

    Parameters
    ----------
    obs : Observables
        Ω_GW h²(f) [Hz, 1] and f_PBH(M) [M_sun, 1] of the spectrum.
    k_peak : float [Mpc^-1]
    P_peak : float [1]
    n_s, r : float [1]
    N_star : float [e-folds]
    ln_1e10_as : float [1]

    Returns
    -------
    Observables
    """
    return obs.replace(f_pbh_total=float(obs.f_pbh_total), n_s=float(n_s), r=float(r),
                       N_star=float(N_star), ln_1e10_as=float(ln_1e10_as),
                       k_peak=float(k_peak), P_peak=float(P_peak))


def observables_from_table(config: RunConfig, k: np.ndarray, P_zeta: np.ndarray, *,
                           k_peak: float, P_peak: float, n_s: float, r: float,
                           N_star: float) -> ExactOutcome:
    """Observables of a tabulated spectrum with the config's ``[observables]`` settings.

    The same computation as :func:`scan.pipeline.observables_of` (used by
    :func:`scan.pipeline.solve_config`), for a spectrum given as arrays.

    Parameters
    ----------
    config : RunConfig
    k : ndarray [Mpc^-1]
        Increasing wavenumbers.
    P_zeta : ndarray [1]
    k_peak : float [Mpc^-1]
    P_peak : float [1]
    n_s, r : float [1]
    N_star : float [e-folds]

    Returns
    -------
    ExactOutcome
    """
    require_batch_conventions(config.observables, config.source, exact_only=True)
    obs = settings_of(config.observables).compute(k, P_zeta)
    return ExactOutcome(posterior_observables(obs, k_peak=k_peak, P_peak=P_peak, n_s=n_s,
                                              r=r, N_star=N_star,
                                              ln_1e10_as=config.pivot.ln_1e10_As),
                        "", tuple(obs.notes))


def exact_outcome(config: RunConfig, theta: np.ndarray,
                  solve: Callable[..., Any] | None = None) -> ExactOutcome:
    """Solve the model at ``theta`` exactly (model entries only; nuisance untouched).

    Parameters
    ----------
    config : RunConfig
        The run config with ``[[parameters]]``.
    theta : ndarray, shape (dim,)
        A sampled vector (model parameters, then nuisance parameters).
    solve : callable, optional
        ``solve(config, with_modes=True, with_observables=True) -> SolveResult``
        (default :func:`scan.pipeline.solve_config`).

    Returns
    -------
    ExactOutcome
        Invalid models are outcomes with a reason, never exceptions.
    """
    solve = solve_config if solve is None else solve
    sample_config = with_nuisance_conventions(apply_parameters(config, np.asarray(theta, float)),
                                              theta)
    result = solve(sample_config, with_modes=True, with_observables=True)
    if not result.valid or result.spectrum is None or result.observables is None:
        return ExactOutcome(None, result.reason or "invalid")
    s = result.spectrum
    if not (math.isfinite(s.k_peak) and math.isfinite(s.P_peak) and s.k_peak > 0
            and s.P_peak > 0):
        return ExactOutcome(None, NO_PEAK)
    ln_as = math.log(1e10 * s.A_s) if s.A_s > 0 else config.pivot.ln_1e10_As
    return ExactOutcome(posterior_observables(result.observables, k_peak=s.k_peak,
                                              P_peak=s.P_peak, n_s=s.n_s, r=s.r,
                                              N_star=s.N_star, ln_1e10_as=ln_as),
                        "", tuple(result.observables.notes))


def exact_ln_wall_width(config: RunConfig, thetas: np.ndarray,
                        wanted: list[bool] | None = None) -> np.ndarray:
    """ln w_w [ln M_p] of each sampled vector from its exact wall (NaN where not wanted).

    The width prior of a wall coordinate (:mod:`scan.config.width_prior`) needs w_w;
    each model's wall is located by :func:`scan.pipeline.solve.wall_width` (exact
    background and pivot solves, cached per model).
    """
    thetas = np.atleast_2d(np.asarray(thetas, float))
    wanted = [True] * len(thetas) if wanted is None else wanted
    return np.array([math.log(wall_width(apply_parameters(config, theta))) if want
                     else math.nan for theta, want in zip(thetas, wanted)])


def with_nuisance_conventions(config: RunConfig, theta: np.ndarray) -> RunConfig:
    """``config`` with ``observables.threshold`` and ``observables.collapse_K`` set to the
    sample's ``pbh.threshold`` and ``pbh.collapse_K`` (where sampled).

    These nuisance parameters change an observable (f_PBH), not only a likelihood term,
    so the exact side must use them too.
    """

    names = [n.name for n in config.nuisance]
    theta = np.asarray(theta, float)
    fields = {key: float(theta[len(config.parameters) + names.index(name)])
              for name, key in ((THRESHOLD, "threshold"), (COLLAPSE_K, "collapse_K"))
              if name in names}
    if not fields:
        return config
    return dataclasses.replace(config, observables=dataclasses.replace(config.observables,
                                                                       **fields))


class ExactSolve:
    """Picklable ``exact(theta) -> ExactOutcome`` for one run config (pool workers).

    Parameters
    ----------
    config : RunConfig
        The run config (rebuilt from the chain file).
    """

    def __init__(self, config: RunConfig) -> None:
        self.config = config

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        return exact_outcome(self.config, theta)

    def describe(self) -> str:
        """One line for reports and the ``verify`` group."""
        return "scan.pipeline.solve_config (exact background, modes and observables)"
