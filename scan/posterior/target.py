"""The physics posterior target: surrogate observables against the bound curves.

For every walker ``theta = (model parameters, nuisance parameters)``:

1. the log-prior of :class:`scan.config.priors.PriorSet` (``-inf`` outside: reason
   ``outside_prior``);
2. the surrogate (:func:`scan.surrogate.load_surrogate`) predicts, for all walkers in one
   call, the validity, the peak, the shape of P_zeta on ``x = ln(k/k_peak)`` and n_s, r,
   N*; a point outside the surrogate's parameter box is ``outside_surrogate``, one the
   classifier calls invalid (or with non-finite emulated values) ``invalid_model``, a
   peak beyond the planned ln k range ``peak_outside_table``;
3. Omega_GW,0 h^2(f) and d f_PBH / d ln M of all walkers at once on shared grids
   (:mod:`scan.observables.batch`), with the ``[observables]`` conventions (the collapse
   threshold per walker when ``pbh.threshold`` is a nuisance parameter; a sampled
   ``pbh.collapse_K`` rescales each walker's f_PBH(M) exactly,
   :func:`scan.observables.batch.with_collapse_coefficient`);
4. ln L = the sum of the ``[likelihood]`` terms, each evaluated once for all walkers
   with the nuisance parameters (``A_smbhb``) as arrays, planned once per process on the
   shared grids (:func:`scan.likelihood.plan_terms`); a model a bound rules out
   (ln L = -inf) is ``excluded``.  Every term's ln L is stored as blob ``lnL_<name>``
   (so summaries can say which constraint binds).

With ``omega_gw_off`` the model's Omega_GW h^2 is set to zero before the terms read it:
the GW terms see only the SMBH-binary foreground (its amplitude still sampled), while the
PBH and CMB-pivot terms still see the model — the foreground-only hypothesis of
``zetascan evidence``.

Everything is deterministic in ``theta`` (no state carried between calls), so a resumed
chain reproduces an uninterrupted one.  :meth:`PosteriorTarget.score` scores observables
computed elsewhere (exact solves, for ``zetascan verify``) through the same terms.
"""
from __future__ import annotations

import dataclasses
import functools
import math
from typing import Any

import numpy as np

from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError
from scan.likelihood.grid import plan_terms
from scan.observables import Observables
from scan.observables.batch import (batch_observables, parabolic_peak, plan_batch,
                                    with_collapse_coefficient)
from scan.observables.settings import settings_of
from scan.posterior.exact import exact_ln_wall_width
from scan.posterior.blobs import (empty_blobs, extra_fields, extra_values, finish_log_posterior,
                                  mass_at_peak, peak_range, store_blobs, total_of_terms)
from scan.posterior.reasons import REASONS, Reason
from scan.likelihood.from_config import build_terms
from scan.posterior.setup import (
    COLLAPSE_K,
    THRESHOLD,
    emulated_map,
    pbh_plan_of,
    require_emulated_map,
    threshold_range,
)
from scan.posterior.targets import TargetBase
from scan.surrogate import load_surrogate
from scan.surrogate.threads import single_blas_thread

__all__ = ["PosteriorTarget", "BLOB_FIELDS"]


#: Derived quantities stored with every chain sample (before the SNR and lnL columns).
BLOB_FIELDS: tuple[str, ...] = ("k_peak", "P_peak", "f_gw_peak", "omega_gw_h2_peak",
                                "f_pbh_total", "M_pbh_peak", "n_s", "r", "N_star",
                                "log_like")


@dataclasses.dataclass(frozen=True)
class PosteriorTarget(TargetBase):
    """log-prior + log-likelihood of the surrogate's observables (see the module docstring).

    Parameters
    ----------
    config : RunConfig
        The run config (its ``[observables]`` conventions, pivot normalisation, and the
        identity the surrogate file must match).
    priors : PriorSet
        Priors of the sampled vector (model parameters, then nuisance).
    surrogate_path : str
        The surrogate file.
    curve_paths : tuple of str
        Curve CSV and scalar-bound TOML files.
    snr_curves : tuple of str
        Names of the noise-form sensitivity curves whose SNR is stored as ``snr_<name>``.
    term_names : tuple of str
        Names of the likelihood terms, stored as ``lnL_<name>``.
    n_out : int
        Output frequencies of Omega_GW per walker (over ``x[0] .. x[-1] + ln 2``).
    n_mass : int
        Masses of d f_PBH / d ln M.
    omega_gw_off : bool
        Score every model as if its Omega_GW h^2 were zero (foreground-only hypothesis).

    Notes
    -----
    ``prepare()`` loads the surrogate, the curves and the plans once per process; they
    are dropped when the target is pickled (workers prepare their own).
    """

    config: RunConfig
    priors: PriorSet
    surrogate_path: str
    curve_paths: tuple[str, ...]
    snr_curves: tuple[str, ...] = ()
    term_names: tuple[str, ...] = ()
    n_out: int = 64
    n_mass: int = 64
    reasons: tuple[str, ...] = REASONS
    omega_gw_off: bool = False

    # ----------------------------------------------------------------- target protocol
    @property
    def names(self) -> tuple[str, ...]:  # type: ignore[override]
        """Sampled parameters: model keys, then nuisance names."""
        return self.priors.names

    @functools.cached_property
    def blob_dtype(self) -> np.dtype:  # type: ignore[override]
        """Derived fields (with ``f_pbh_total_gaussian`` beside a non-Gaussian
        ``f_pbh_total``), ``snr_<curve>``, ``lnL_<term>`` and ``reason``."""
        fields = [(name, np.float64) for name in BLOB_FIELDS + self._extras]
        fields += [(f"snr_{name}", np.float64) for name in self.snr_curves]
        fields += [(f"lnL_{name}", np.float64) for name in self.term_names]
        return np.dtype(fields + [("reason", np.int16)])

    @property
    def _extras(self) -> tuple[str, ...]:
        return extra_fields(self.config.observables)

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state.pop("_loaded", None)
        return state

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__dict__.update(state)

    def prepare(self) -> None:
        """Load the surrogate and curves and plan Omega_GW and f_PBH (once per process)."""
        if "_loaded" in self.__dict__:
            return

        surrogate = load_surrogate(self.surrogate_path, self.config)
        keys = self.priors.names[:self.priors.n_model]
        if self.priors.width_prior is not None and surrogate.emulator.wall is None:
            raise ConfigError(self.config.source, "parameters", f"the surrogate "
                              f"'{self.surrogate_path}' does not emulate ln w_w, which the "
                              "width_prior needs", "retrain it with this version")
        if sorted(surrogate.space.keys) != sorted(keys):
            raise ConfigError(self.config.source, "parameters",
                              f"the surrogate '{self.surrogate_path}' is over "
                              f"{list(surrogate.space.keys)}, the run varies {list(keys)}",
                              "vary the same keys as the training run, or retrain")
        require_emulated_map(self.config, surrogate, self.surrogate_path)
        terms = build_terms(self.config, self.curve_paths)
        settings = settings_of(self.config.observables)
        conventions, dof, n_eff = settings.conventions, settings.dof, settings.n_eff
        span = threshold_range(self.priors)
        pbh_plan = pbh_plan_of(settings, span)
        plan = plan_batch(surrogate.emulator.basis.x, peak_range(surrogate), conventions,
                          n_out=self.n_out, n_mass=self.n_mass, dof=dof, n_eff=n_eff,
                          pbh_plan=pbh_plan, sigw_kernel=settings.sigw_kernel)
        by_name = {t.name: t for t in terms}
        self.__dict__["_loaded"] = dict(
            surrogate=surrogate, order=np.array([keys.index(k) for k in surrogate.space.keys]),
            terms=terms, plan=plan, snr=[by_name[name] for name in self.snr_curves],
            planned=plan_terms(terms, plan.f_gw, np.asarray(plan.pbh.M)))

    def without_model_gw(self) -> PosteriorTarget:
        """This target with ``omega_gw_off`` (sharing what :meth:`prepare` loaded)."""
        other = dataclasses.replace(self, omega_gw_off=True)
        if "_loaded" in self.__dict__:
            other.__dict__["_loaded"] = self.__dict__["_loaded"]
        return other

    @property
    def loaded(self) -> dict[str, Any]:
        """The data of :meth:`prepare` (prepared on first use)."""
        self.prepare()
        return self.__dict__["_loaded"]

    @property
    def terms(self) -> list:
        """The likelihood terms."""
        return self.loaded["terms"]

    def __call__(self, theta: np.ndarray) -> tuple[float, tuple]:
        log_p, blobs = self.log_and_blobs(np.atleast_2d(theta))
        return float(log_p[0]), tuple(blobs[0].tolist())

    def batch(self, thetas: np.ndarray) -> list[tuple[float, tuple]]:
        """All walkers in one surrogate call."""
        log_p, blobs = self.log_and_blobs(thetas)
        return [(float(lp), tuple(b)) for lp, b in zip(log_p, blobs.tolist())]

    # ----------------------------------------------------------------- the computation
    def nuisance_of(self, theta: np.ndarray) -> dict[str, float]:
        """The nuisance dict of one sampled vector (name -> value)."""
        n = self.priors.n_model
        return {name: float(v) for name, v in zip(self.priors.names[n:], theta[n:])}

    def predict(self, thetas: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                   Observables | None]:
        """Reason codes and the batched observables of the evaluable points.

        Returns
        -------
        reason : ndarray of int16, shape (p,)
            0, ``outside_prior``, ``outside_surrogate``, ``invalid_model`` or
            ``peak_outside_table`` (the likelihood is not evaluated here).
        rows : ndarray of int, shape (m,)
            Indices of the points with reason 0, in the order of ``batch``.
        batch : Observables or None
            Their observables (None when m = 0).
        """
        return self._predict(np.atleast_2d(np.asarray(thetas, float)))[:3]

    def _predict(self, thetas: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                    Observables | None, np.ndarray]:
        """:meth:`predict` of 2-D ``thetas``, and their log-prior."""
        data = self.loaded
        log_prior = self.priors.log_prior(thetas)
        reason = np.zeros(len(thetas), dtype=np.int16)
        reason[~np.isfinite(log_prior)] = Reason.OUTSIDE_PRIOR
        model = thetas[:, :self.priors.n_model][:, data["order"]]
        space = data["surrogate"].space
        with np.errstate(invalid="ignore", divide="ignore"):
            u = space.to_unit(model)
        bounded = np.array([k != "gaussian" for k in space.kinds])
        in_box = np.all(np.isfinite(u) & ((u >= 0.0) & (u <= 1.0) | ~bounded), axis=1)
        reason[(reason == 0) & ~in_box] = Reason.OUTSIDE_SURROGATE
        todo = np.flatnonzero(reason == 0)
        if not todo.size:
            return reason, todo, None, log_prior
        pred = data["surrogate"].predict(model[todo])
        if self.priors.width_prior is not None:  # ln w_w emulated: the width prior mapped
            log_prior = self.priors.log_prior_mapped(thetas, _at(todo, pred.ln_wall_width,
                                                                 len(thetas)))
            reason[todo[~np.isfinite(log_prior[todo])]] = Reason.OUTSIDE_PRIOR
        scalars = np.column_stack([pred.ln_k_peak, pred.log10_P_peak, pred.n_s, pred.log10_r,
                                   pred.N_star])
        in_prior = reason[todo] == 0
        ok = pred.valid & np.all(np.isfinite(scalars), axis=1) \
            & np.all(np.isfinite(pred.shape), axis=1) & in_prior
        reason[todo[~ok & in_prior]] = Reason.INVALID_MODEL
        lo, hi = data["plan"].peak_range
        in_table = (pred.ln_k_peak >= lo) & (pred.ln_k_peak <= hi)
        reason[todo[ok & ~in_table]] = Reason.PEAK_OUTSIDE_TABLE
        keep = ok & in_table
        if not keep.any():
            return reason, todo[:0], None, log_prior
        rows = todo[keep]
        batch = batch_observables(data["plan"], pred.ln_k_peak[keep], pred.log10_P_peak[keep],
                                  pred.shape[keep], pred.n_s[keep], 10.0 ** pred.log10_r[keep],
                                  pred.N_star[keep], self.config.pivot.ln_1e10_As,
                                  self._nuisance_column(thetas, rows, THRESHOLD),
                                  emulated_map(self.config, pred, keep))
        k_values = self._nuisance_column(thetas, rows, COLLAPSE_K)
        if k_values is not None:
            batch = with_collapse_coefficient(batch, k_values / self.config.observables.collapse_K)
        return reason, rows, batch, log_prior

    def _nuisance_column(self, thetas: np.ndarray, rows: np.ndarray, name: str
                         ) -> np.ndarray | None:
        """The sampled nuisance ``name`` of ``thetas[rows]``, or None if not sampled."""
        if name not in self.priors.names[self.priors.n_model:]:
            return None
        return thetas[rows, self.priors.names.index(name)]

    def observables(self, thetas: np.ndarray) -> tuple[np.ndarray, list[Observables | None]]:
        """Reason codes and per-point :class:`Observables` (None where not valid)."""
        thetas = np.atleast_2d(np.asarray(thetas, float))
        reason, rows, batch = self.predict(thetas)
        obs: list[Observables | None] = [None] * len(thetas)
        for j, i in enumerate(rows):
            obs[i] = batch.row(j)
        return reason, obs

    @single_blas_thread()   # small products: a BLAS pool only waits (surrogate/threads.py)
    def log_and_blobs(self, thetas: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Vectorised core: log posterior (unnormalised) and blob records.

        Parameters
        ----------
        thetas : ndarray, shape (p, dim)

        Returns
        -------
        log_p : ndarray, shape (p,)
            log-prior + ln L; ``-inf`` for every non-zero reason.
        blobs : ndarray of ``blob_dtype``, shape (p,)
            NaN derived fields where the model was not evaluated.
        """
        thetas = np.atleast_2d(np.asarray(thetas, float))
        reason, rows, batch, log_prior = self._predict(thetas)
        blobs = empty_blobs(self.blob_dtype, len(thetas))
        log_p = np.full(len(thetas), -np.inf)
        if batch is not None:
            n = self.priors.n_model
            nuisance = {name: thetas[rows, n + j]
                        for j, name in enumerate(self.priors.names[n:])}
            per_term, snr = self._scores(batch, nuisance, len(rows))
            total = total_of_terms(per_term, len(rows))
            store_blobs(blobs, rows, per_term, total, snr, dict(
                k_peak=batch.k_peak, P_peak=batch.P_peak, f_gw_peak=batch.f_gw_peak,
                omega_gw_h2_peak=batch.omega_gw_h2_peak, f_pbh_total=batch.f_pbh_total,
                M_pbh_peak=mass_at_peak(batch.m_msun, batch.f_pbh_per_lnm,
                                        batch.ln_mass_shift),
                n_s=batch.n_s, r=batch.r, N_star=batch.N_star, **extra_values(self._extras, batch)))
            finish_log_posterior(log_p, reason, rows, total, log_prior, Reason.EXCLUDED)
        blobs["reason"] = reason
        return log_p, blobs

    def score(self, thetas: np.ndarray, reason: np.ndarray, obs: list[Observables | None],
              ln_wall_width: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """log posterior and blobs of given per-point observables (surrogate or exact).

        Parameters
        ----------
        thetas : ndarray, shape (p, dim)
        reason : ndarray of int, shape (p,)
            Reason codes so far (0 where ``obs`` is given); not modified.
        obs : list of Observables or None, length p
            Per-point observables, each on its own frequency and mass grids.
        ln_wall_width : ndarray, shape (p,), optional
            ln w_w [ln M_p] for a width prior (default: the exact wall of each point
            with observables, :func:`scan.posterior.exact.exact_ln_wall_width`).

        Returns
        -------
        log_p, blobs
            As :meth:`log_and_blobs`.
        """
        thetas = np.atleast_2d(np.asarray(thetas, float))
        reason = np.array(reason, dtype=np.int16)
        blobs = empty_blobs(self.blob_dtype, len(thetas))
        log_p = np.full(len(thetas), -np.inf)
        if self.priors.width_prior is not None and ln_wall_width is None:
            ln_wall_width = exact_ln_wall_width(self.config, thetas, [o is not None for o in obs])
        log_prior = self.priors.log_prior_mapped(thetas, ln_wall_width)
        for i, ob in enumerate(obs):
            if ob is None:
                continue
            per_term, snr = self._scores(ob, self.nuisance_of(thetas[i]), 1)
            total = total_of_terms(per_term, 1)
            rows = np.array([i])
            ln_f, ln_omega = parabolic_peak(np.log(ob.f_hz),
                                            np.log(np.maximum(ob.omega_gw_h2, 1e-300)))
            store_blobs(blobs, rows, per_term, total, snr, dict(
                k_peak=ob.k_peak, P_peak=ob.P_peak, f_gw_peak=math.exp(ln_f),
                omega_gw_h2_peak=math.exp(ln_omega), f_pbh_total=ob.f_pbh_total,
                M_pbh_peak=mass_at_peak(ob.m_msun, np.atleast_2d(ob.f_pbh_per_lnm)),
                n_s=ob.n_s, r=ob.r, N_star=ob.N_star, **extra_values(self._extras, ob)))
            finish_log_posterior(log_p, reason, rows, total, log_prior, Reason.EXCLUDED)
        blobs["reason"] = reason
        return log_p, blobs

    # ----------------------------------------------------------------- helpers
    def _scores(self, obs: Any, nuisance: dict, m: int
                ) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
        """Each term's ln L and each stored SNR for m points, shape (m,).

        Observables on the planned shared grids go through the planned terms
        (:mod:`scan.likelihood.grid`: weights found once, shared log10 Omega and SNRs);
        others (one point on its own grids) through the terms themselves.  Two terms
        with one name are refused.
        """
        planned = self.loaded["planned"]
        if self.omega_gw_off:
            obs = obs.replace(omega_gw_h2=np.zeros_like(obs.omega_gw_h2))
        if planned.covers(obs):
            spectra = planned.spectra(obs)
            values = planned.loglikes(spectra, nuisance)
            snr = {name: planned.snr(name, spectra) for name in self.snr_curves}
        else:
            values = {}
            for term in self.terms:
                if term.name in values:
                    raise ValueError(f"two likelihood terms are named {term.name!r}")
                values[term.name] = term(obs, nuisance)
            f_hz, omega = obs.f_hz, np.atleast_2d(obs.omega_gw_h2)
            snr = {name: term.snr(f_hz, omega)
                   for name, term in zip(self.snr_curves, self.loaded["snr"])}
        per_term = {name: np.broadcast_to(np.asarray(v, float), (m,))
                    for name, v in values.items()}
        return per_term, snr


def _at(rows: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    """``values`` placed at ``rows`` of an array of ``n`` NaNs."""
    out = np.full(n, np.nan)
    out[rows] = values
    return out
