"""The physics posterior target: surrogate observables against the bound curves.

For every walker ``theta = (model parameters, nuisance parameters)``:

1. the log-prior of :class:`scan.priors.PriorSet` (``-inf`` outside: reason
   ``outside_prior``);
2. the surrogate (:func:`scan.surrogate.load_surrogate`) predicts, for all walkers in one
   call, the validity, the peak, the shape of P_zeta on ``x = ln(k/k_peak)`` and n_s, r,
   N*; a point outside the surrogate's parameter box is ``outside_surrogate``, one the
   classifier calls invalid (or with non-finite emulated values) ``invalid_model``;
3. Omega_GW,0 h^2(f) from the emulated spectrum (:mod:`scan.sigw`; the radiation-era
   integral depends on k only through P(ku) P(kv), so one plan on the relative grid
   ``e^x`` serves every walker, and the transfer to today is applied at the absolute
   wavenumbers) and d f_PBH / d ln M (:mod:`scan.pbh`, one plan on an absolute ln k table
   that covers the peaks the surrogate can produce; a peak beyond it is
   ``peak_outside_table``), with the ``[observables]`` conventions;
4. ln L = :func:`scan.likelihood.total_loglike` of the ``[likelihood]`` terms with the
   nuisance parameters (``A_smbhb``); a model a bound rules out (ln L = -inf) is
   ``excluded``.

Everything is deterministic in ``theta`` (no state carried between calls), so a resumed
chain reproduces an uninterrupted one.
"""
from __future__ import annotations

import dataclasses
import functools
import math
from pathlib import Path
from typing import Any

import numpy as np

from scan.config_schema import RunConfig
from scan.errors import ConfigError
from scan.priors import PriorSet
from scan.sampler.targets import TargetBase

#: Nuisance parameters the posterior understands (name -> what it is).
NUISANCE_NAMES: dict[str, str] = {"A_smbhb": "SMBH-binary foreground amplitude of the "
                                             "PTA excess terms"}
#: Nuisance parameters that are planned but not yet supported.
UNSUPPORTED_NUISANCE: dict[str, str] = {
    "pbh.threshold": "the collapse threshold is fixed by observables.threshold (varying "
                     "it needs a PBH plan per walker; not supported yet)"}

REASONS: tuple[str, ...] = ("ok", "outside_prior", "outside_surrogate", "invalid_model",
                            "peak_outside_table", "excluded")
R_PRIOR, R_BOX, R_INVALID, R_TABLE, R_EXCLUDED = 1, 2, 3, 4, 5

#: Derived quantities stored with every chain sample (before the SNR columns).
BLOB_FIELDS: tuple[str, ...] = ("k_peak", "P_peak", "f_gw_peak", "omega_gw_h2_peak",
                                "f_pbh_total", "M_pbh_peak", "n_s", "r", "N_star",
                                "log_like")
#: Spacing of the absolute ln k table of the f_PBH plan [e-folds].
LNK_STEP = 0.05
#: Surrogate predictions used to find the range of ln k_peak the f_PBH table must cover.
RANGE_POINTS = 1024
#: Padding of that range on each side [e-folds of k].
RANGE_PAD = 3.0
_FLOOR = 1e-300


@dataclasses.dataclass(frozen=True)
class Observables:
    """The observables of one walker, as the likelihood terms read them.

    Attributes
    ----------
    f_hz : ndarray [Hz]
    omega_gw_h2 : ndarray [1]
    m_msun : ndarray [M_sun]
    f_pbh_per_lnm : ndarray [1]
    f_pbh_total : float [1]
    n_s, r, N_star, ln_1e10_as : float
    k_peak : float [Mpc^-1]
    P_peak : float [1]
    """

    f_hz: np.ndarray
    omega_gw_h2: np.ndarray
    m_msun: np.ndarray
    f_pbh_per_lnm: np.ndarray
    f_pbh_total: float
    n_s: float
    r: float
    N_star: float
    ln_1e10_as: float
    k_peak: float
    P_peak: float


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
    n_out : int
        Output frequencies of Omega_GW per walker (over ``x[0] .. x[-1] + ln 2``).
    n_mass : int
        Masses of d f_PBH / d ln M.

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
    n_out: int = 64
    n_mass: int = 64
    reasons: tuple[str, ...] = REASONS

    # ----------------------------------------------------------------- target protocol
    @property
    def names(self) -> tuple[str, ...]:  # type: ignore[override]
        """Sampled parameters: model keys, then nuisance names."""
        return self.priors.names

    @functools.cached_property
    def blob_dtype(self) -> np.dtype:  # type: ignore[override]
        """Derived fields (:data:`BLOB_FIELDS`, ``snr_<curve>``) and ``reason``."""
        fields = [(name, np.float64) for name in BLOB_FIELDS]
        fields += [(f"snr_{name}", np.float64) for name in self.snr_curves]
        return np.dtype(fields + [("reason", np.int16)])

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
        from scan import cosmo, gstar
        from scan.pbh import plan_pbh
        from scan.pipeline import conventions_of
        from scan.sigw import plan_sigw
        from scan.surrogate import load_surrogate

        surrogate = load_surrogate(self.surrogate_path, self.config)
        keys = self.priors.names[:self.priors.n_model]
        if sorted(surrogate.space.keys) != sorted(keys):
            raise ConfigError(self.config.source, "parameters",
                              f"the surrogate '{self.surrogate_path}' is over "
                              f"{list(surrogate.space.keys)}, the run varies {list(keys)}",
                              "vary the same keys as the training run, or retrain")
        order = [keys.index(k) for k in surrogate.space.keys]
        terms = build_terms(self.config, self.curve_paths)
        o = self.config.observables
        dof = gstar.load_table(o.gstar_table) if o.gstar_table else None
        x = np.asarray(surrogate.emulator.basis.x, float)
        x_out = np.linspace(x[0], x[-1] + math.log(2.0), self.n_out)
        sigw = plan_sigw(np.exp(x), k_out=np.exp(x_out), dof=dof, n_eff=o.n_eff)
        lo, hi = _peak_range(surrogate)
        lnk_table = np.arange(math.floor((lo + x[0]) / LNK_STEP) * LNK_STEP,
                              hi + x[-1] + LNK_STEP, LNK_STEP)
        k_table = np.exp(lnk_table)
        m_hi = float(cosmo.horizon_mass_msun(k_table[0], dof, o.n_eff))
        m_lo = float(cosmo.horizon_mass_msun(k_table[-1], dof, o.n_eff)) * 1e-3
        pbh = plan_pbh(k_table, np.geomspace(m_lo, m_hi, self.n_mass), conventions_of(self.config),
                       dof=dof, n_eff=o.n_eff)
        snr_terms = {t.name: t for t in terms if t.name in self.snr_curves}
        self.__dict__["_loaded"] = dict(
            surrogate=surrogate, order=np.array(order), terms=terms, x=x, x_out=x_out,
            sigw=sigw, pbh=pbh, lnk_table=lnk_table, peak_range=(lo, hi), dof=dof,
            snr=[snr_terms[name] for name in self.snr_curves])

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

    def observables(self, thetas: np.ndarray) -> tuple[np.ndarray, list[Observables | None]]:
        """Reason codes and observables of many vectors (None where not valid).

        Parameters
        ----------
        thetas : ndarray, shape (p, dim)

        Returns
        -------
        reason : ndarray of int, shape (p,)
            0, ``outside_prior``, ``outside_surrogate``, ``invalid_model`` or
            ``peak_outside_table`` (the likelihood is not evaluated here).
        obs : list
            :class:`Observables` of the points with reason 0.
        """
        data = self.loaded
        thetas = np.atleast_2d(np.asarray(thetas, float))
        reason = np.zeros(len(thetas), dtype=np.int16)
        reason[~np.isfinite(self.priors.log_prior(thetas))] = R_PRIOR
        model = thetas[:, :self.priors.n_model][:, data["order"]]
        space = data["surrogate"].space
        with np.errstate(invalid="ignore", divide="ignore"):
            u = space.to_unit(model)
        bounded = np.array([k != "gaussian" for k in space.kinds])
        in_box = np.all(np.isfinite(u) & ((u >= 0.0) & (u <= 1.0) | ~bounded), axis=1)
        reason[(reason == 0) & ~in_box] = R_BOX
        obs: list[Observables | None] = [None] * len(thetas)
        todo = np.flatnonzero(reason == 0)
        if not todo.size:
            return reason, obs
        pred = data["surrogate"].predict(model[todo])
        scalars = np.column_stack([pred.ln_k_peak, pred.log10_P_peak, pred.n_s, pred.log10_r,
                                   pred.N_star])
        ok = pred.valid & np.all(np.isfinite(scalars), axis=1) \
            & np.all(np.isfinite(pred.shape), axis=1)
        reason[todo[~ok]] = R_INVALID
        lo, hi = data["peak_range"]
        in_table = (pred.ln_k_peak >= lo) & (pred.ln_k_peak <= hi)
        reason[todo[ok & ~in_table]] = R_TABLE
        ln_as = self.config.pivot.ln_1e10_As
        for j in np.flatnonzero(ok & in_table):
            obs[todo[j]] = self._one(pred.ln_k_peak[j], pred.log10_P_peak[j], pred.shape[j],
                                     pred.n_s[j], pred.log10_r[j], pred.N_star[j], ln_as)
        return reason, obs

    def _one(self, ln_k_peak, log10_p_peak, shape, n_s, log10_r, n_star,
             ln_as) -> Observables:
        from scan import cosmo

        data = self.loaded
        o = self.config.observables
        log10_p = log10_p_peak + np.asarray(shape, float)
        k_out = np.exp(ln_k_peak + data["x_out"])
        omega = np.asarray(cosmo.gw_transfer_h2(k_out, data["dof"], o.n_eff)) \
            * data["sigw"].omega_gw(10.0 ** log10_p)
        log_p_table = np.interp(data["lnk_table"], ln_k_peak + data["x"], log10_p,
                                left=-np.inf, right=-np.inf)
        pbh = data["pbh"].evaluate(10.0 ** log_p_table)
        return Observables(f_hz=np.asarray(cosmo.k_to_f(k_out)), omega_gw_h2=omega,
                           m_msun=data["pbh"].M, f_pbh_per_lnm=np.asarray(pbh.f_pbh),
                           f_pbh_total=float(pbh.f_pbh_total), n_s=float(n_s),
                           r=float(10.0 ** log10_r), N_star=float(n_star),
                           ln_1e10_as=float(ln_as), k_peak=float(math.exp(ln_k_peak)),
                           P_peak=float(10.0 ** log10_p_peak))

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
        from scan.likelihood import total_loglike

        thetas = np.atleast_2d(np.asarray(thetas, float))
        reason, obs = self.observables(thetas)
        log_prior = self.priors.log_prior(thetas)
        log_p = np.full(len(thetas), -np.inf)
        blobs = np.zeros(len(thetas), dtype=self.blob_dtype)
        for name in self.blob_dtype.names[:-1]:
            blobs[name] = np.nan
        for i, ob in enumerate(obs):
            if ob is None:
                continue
            like, _ = total_loglike(self.terms, ob, self.nuisance_of(thetas[i]))
            self._fill(blobs[i:i + 1], ob, like)
            if like == -math.inf:
                reason[i] = R_EXCLUDED
            else:
                log_p[i] = log_prior[i] + like
        blobs["reason"] = reason
        return log_p, blobs

    def _fill(self, row: np.ndarray, ob: Observables, like: float) -> None:
        top = int(np.argmax(ob.omega_gw_h2))
        row["k_peak"], row["P_peak"] = ob.k_peak, ob.P_peak
        row["f_gw_peak"], row["omega_gw_h2_peak"] = ob.f_hz[top], ob.omega_gw_h2[top]
        row["f_pbh_total"] = ob.f_pbh_total
        if np.any(ob.f_pbh_per_lnm > 0):
            row["M_pbh_peak"] = ob.m_msun[int(np.argmax(ob.f_pbh_per_lnm))]
        row["n_s"], row["r"], row["N_star"], row["log_like"] = ob.n_s, ob.r, ob.N_star, like
        for name, term in zip(self.snr_curves, self.loaded["snr"]):
            row[f"snr_{name}"] = float(term.snr(ob.f_hz, ob.omega_gw_h2))


def _peak_range(surrogate) -> tuple[float, float]:
    """ln k_peak range the f_PBH table covers: a fixed quasi-random sample of the
    surrogate's box (valid predictions), padded by :data:`RANGE_PAD` e-folds."""
    from scipy.stats import qmc

    u = qmc.Sobol(surrogate.space.dim, scramble=True, seed=0).random(RANGE_POINTS)
    u = np.clip(u, 1e-6, 1.0 - 1e-6)
    pred = surrogate.predict(surrogate.space.from_unit(u))
    ln_k = pred.ln_k_peak[pred.valid & np.isfinite(pred.ln_k_peak)]
    if not ln_k.size:
        ln_k = pred.ln_k_peak[np.isfinite(pred.ln_k_peak)]
    return float(ln_k.min()) - RANGE_PAD, float(ln_k.max()) + RANGE_PAD


# --------------------------------------------------------------------------- config side
def curve_paths_of(config: RunConfig) -> tuple[str, ...]:
    """The curve and scalar-bound files of ``[likelihood]`` (checked to exist).

    Raises
    ------
    ConfigError
        A listed file or the directory does not exist, or nothing is found.
    """
    section = config.likelihood
    if section.curves:
        for i, name in enumerate(section.curves):
            path = Path(name)
            if not path.is_file() or path.suffix not in (".csv", ".toml"):
                raise ConfigError(config.source, f"likelihood.curves[{i}]",
                                  f"'{name}' is not a .csv curve or .toml scalar-bound file",
                                  "give an existing file, relative to the working directory")
        return tuple(section.curves)
    folder = Path(section.directory)
    if not folder.is_dir():
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' is not a folder",
                          "give an existing folder of bound curves (e.g. constraints/demo), "
                          "relative to the working directory, or list likelihood.curves")
    paths = tuple(str(p) for p in sorted(folder.glob("*.csv")) + sorted(folder.glob("*.toml")))
    if not paths:
        raise ConfigError(config.source, "likelihood.directory",
                          f"'{section.directory}' has no *.csv or *.toml files",
                          "point it at a folder of bound curves")
    return paths


def build_terms(config: RunConfig, paths: tuple[str, ...]) -> list:
    """The likelihood terms of the files ``paths`` with the ``[likelihood]`` options.

    Upper limits on Omega_GW h^2 take the method of ``[[likelihood.methods]]`` when
    listed; the CMB priors are included once when ``cmb_priors`` is true and left out
    otherwise.

    Raises
    ------
    ConfigError
        A ``[[likelihood.methods]]`` entry names no Omega_GW upper-limit curve.
    """
    from scan.curves import load_curve
    from scan.curves.scalars import load_scalar_bounds
    from scan.likelihood import (PBHBounds, UpperLimit, bicep_keck_2021_r,
                                 planck2018_pivot_priors, term_for_curve, terms_from_scalars)

    section = config.likelihood
    curves = [load_curve(p) for p in paths if p.endswith(".csv")]
    methods = {m.curve: m.method for m in section.methods}
    upper = {c.name for c in curves if c.kind == "upper_limit" and c.y_quantity != "f_pbh"}
    for i, m in enumerate(section.methods):
        if m.curve not in upper:
            raise ConfigError(config.source, f"likelihood.methods[{i}].curve",
                              f"'{m.curve}' is not an Omega_GW h^2 upper-limit curve of this "
                              "run", f"use one of {sorted(upper)}" if upper else
                              "remove the entry")
    terms: list = []
    for c in curves:
        if c.y_quantity == "f_pbh":
            continue
        if c.name in methods:
            terms.append(UpperLimit.from_curve(c, method=methods[c.name]))
        else:
            terms.append(term_for_curve(c, section.sensitivity_mode))
    pbh = [c for c in curves if c.y_quantity == "f_pbh"]
    if pbh:
        terms.append(PBHBounds.from_curves(pbh, combine=section.pbh_combine))
    for p in paths:
        if p.endswith(".toml"):
            terms.extend(terms_from_scalars(load_scalar_bounds(p)))
    cmb = [*planck2018_pivot_priors(), bicep_keck_2021_r()]
    cmb_names = {t.name for t in cmb}
    terms = [t for t in terms if t.name not in cmb_names]
    if section.cmb_priors:
        terms.extend(cmb)
    return terms


def posterior_target(config: RunConfig, priors: PriorSet) -> PosteriorTarget:
    """The ``posterior`` target of a config, checked and prepared in this process.

    Raises
    ------
    ConfigError
        No model parameters, an unknown or unsupported nuisance name, missing curve
        files or surrogate, or a surrogate over other parameters.
    """
    from scan.likelihood import Sensitivity
    from scan.surrogate import surrogate_path

    if priors.n_model == 0:
        raise ConfigError(config.source, "parameters", "the posterior needs varied model "
                          "parameters", "add [[parameters]] tables (and train a surrogate)")
    for i, name in enumerate(priors.names[priors.n_model:]):
        if name in UNSUPPORTED_NUISANCE:
            raise ConfigError(config.source, f"nuisance[{i}].name",
                              f"'{name}': {UNSUPPORTED_NUISANCE[name]}",
                              "remove this [[nuisance]] table")
        if name not in NUISANCE_NAMES:
            raise ConfigError(config.source, f"nuisance[{i}].name",
                              f"'{name}' is not a nuisance parameter of the likelihood",
                              "use one of: " + ", ".join(
                                  f"{k} ({v})" for k, v in NUISANCE_NAMES.items()))
    paths = curve_paths_of(config)
    surrogate = config.likelihood.surrogate or str(surrogate_path(config))
    if not Path(surrogate).is_file():
        raise ConfigError(config.source, "likelihood.surrogate",
                          f"surrogate file '{surrogate}' not found",
                          "run 'zetascan train CONFIG' first, or set likelihood.surrogate")
    terms = build_terms(config, paths)
    snr = tuple(t.name for t in terms if isinstance(t, Sensitivity) and t.form == "noise")
    target = PosteriorTarget(config=config, priors=priors, surrogate_path=surrogate,
                             curve_paths=paths, snr_curves=snr)
    target.prepare()
    return target
