"""Per-constraint verdicts of one model: allowed, excluded, disfavoured, detectable.

Each likelihood term kind has one rule, computed with the term's own methods on the same
observables that give its ln L (so a verdict can be checked point by point):

=============  ============================================  ================================
kind           terms                                         status
=============  ============================================  ================================
upper_limit    :class:`~scan.likelihood.UpperLimit`          excluded when the model exceeds
                                                             the curve anywhere in the
                                                             overlap: ``worst_log10_ratio >
                                                             0`` (whatever the ln L method)
pbh            :class:`~scan.likelihood.PBHBounds`           excluded when ``statistic > 1``
neff           :class:`~scan.likelihood.NeffBound`           excluded when int d ln f
                                                             Omega_GW h^2 over its range
                                                             exceeds ``limit``
sensitivity    :class:`~scan.likelihood.Sensitivity`         detectable when ``detectable``
                                                             (SNR >= the curve's threshold,
                                                             or the spectrum reaches a PLI
                                                             curve); SNR stored (noise form)
detection      :class:`~scan.likelihood.SplitNormalExcess`,  disfavoured when -2 (ln L -
               :class:`~scan.likelihood.DensityGridExcess`   ln L_best) > chi2_2(95 %) =
                                                             5.991, ln L_best the term's
                                                             largest ln L on the grid
prior          :class:`~scan.likelihood.GaussianPrior`       disfavoured when -2 ln L >
                                                             chi2_1(95 %) = 3.841 (outside
                                                             mean +- 1.96 sigma)
prior          :class:`~scan.likelihood.OneSidedLimit`       excluded when the value exceeds
                                                             ``limit``
=============  ============================================  ================================

The detection rule is relative (a 95 % region of the two grid parameters by Wilks'
theorem, Wilks 1938, Ann. Math. Statist. 9, 60): it says where the grid fits the excess
best, not whether the best fit is good; the stored ln L allows other choices.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from scipy.stats import chi2

from scan.likelihood import (DensityGridExcess, GaussianPrior, NeffBound, OneSidedLimit, PBHBounds,
                             Sensitivity, SplitNormalExcess, UpperLimit, integrated_omega_h2)
from scan.likelihood.base import get

KINDS: tuple[str, ...] = ("upper_limit", "pbh", "neff", "sensitivity", "detection", "prior")
NOT_EVALUATED, ALLOWED, EXCLUDED, DETECTABLE, NOT_DETECTABLE = -1, 0, 1, 2, 3
#: Meaning of the status codes (stored as the ``status_names`` attribute).
STATUS_NAMES: dict[int, str] = {NOT_EVALUATED: "not evaluated", ALLOWED: "allowed",
                                EXCLUDED: "excluded or disfavoured", DETECTABLE: "detectable",
                                NOT_DETECTABLE: "not detectable"}
#: 95 % quantiles of chi^2 with 1 and 2 degrees of freedom (3.841, 5.991).
CHI2_95_1DOF: float = float(chi2.ppf(0.95, 1))
CHI2_95_2DOF: float = float(chi2.ppf(0.95, 2))

RULES: dict[str, str] = {
    "upper_limit": "excluded when Omega_GW h^2 exceeds the curve anywhere in the overlap "
                   "(worst log10 ratio > 0)",
    "pbh": "excluded when the combined f_PBH statistic exceeds 1",
    "neff": "excluded when the integrated Omega_GW h^2 exceeds the Delta N_eff limit",
    "sensitivity": "detectable when SNR >= the curve's threshold (PLI curve: the spectrum "
                   "reaches it)",
    "detection": f"disfavoured when -2 (lnL - lnL_best) > {CHI2_95_2DOF:.4f} (chi2, 2 dof, "
                 "95 %), lnL_best the term's largest lnL on the grid",
    "prior": f"Gaussian: disfavoured when -2 lnL > {CHI2_95_1DOF:.4f} (chi2, 1 dof, 95 %); "
             "one-sided: excluded when the value exceeds the limit",
}


def term_kind(term: Any) -> str:
    """The kind (one of :data:`KINDS`) of a likelihood term.

    Raises
    ------
    TypeError
        For a term class the grid has no rule for (a programming error).
    """
    kinds = ((UpperLimit, "upper_limit"), (PBHBounds, "pbh"), (NeffBound, "neff"),
             (Sensitivity, "sensitivity"), ((SplitNormalExcess, DensityGridExcess), "detection"),
             ((GaussianPrior, OneSidedLimit), "prior"))
    for cls, kind in kinds:
        if isinstance(term, cls):
            return kind
    raise TypeError(f"no grid verdict for likelihood term {type(term).__name__}")


def is_relative(kind: str) -> bool:
    """True when the verdict needs the whole grid (detections)."""
    return kind == "detection"


def point_verdict(term: Any, obs: Any, log_like: float) -> tuple[int, float]:
    """Status and SNR of one term for one model (see the module table).

    Parameters
    ----------
    term : likelihood term
    obs : observables
        What the term reads (``f_hz``, ``omega_gw_h2``, ``m_msun``, ``f_pbh_per_lnm``, ...).
    log_like : float
        The term's ln L on ``obs`` (used by the ``prior`` rule for Gaussian priors).

    Returns
    -------
    status : int
        :data:`ALLOWED`, :data:`EXCLUDED`, :data:`DETECTABLE` or :data:`NOT_DETECTABLE`;
        detections return ALLOWED here (see :func:`relative_status`).
    snr : float
        Sensitivity curves of noise form; NaN otherwise.
    """
    kind = term_kind(term)
    snr = math.nan
    if kind == "upper_limit":
        ratio = term.worst_log10_ratio(np.asarray(get(obs, "f_hz")),
                                       np.asarray(get(obs, "omega_gw_h2")))
        bad = float(ratio) > 0.0
    elif kind == "pbh":
        bad = float(term.statistic(get(obs, "m_msun"), get(obs, "f_pbh_per_lnm"))) > 1.0
    elif kind == "neff":
        total = integrated_omega_h2(get(obs, "f_hz"), get(obs, "omega_gw_h2"), term.f_min_hz,
                                    term.f_max_hz)
        bad = float(total) > term.limit
    elif kind == "sensitivity":
        f, omega = get(obs, "f_hz"), get(obs, "omega_gw_h2")
        if term.form == "noise":
            snr = float(term.snr(f, omega))
        return (DETECTABLE if bool(term.detectable(f, omega)) else NOT_DETECTABLE), snr
    elif kind == "detection":
        bad = False
    elif isinstance(term, OneSidedLimit):
        bad = float(get(obs, term.key)) > term.limit
    else:
        bad = -2.0 * log_like > CHI2_95_1DOF
    return (EXCLUDED if bad else ALLOWED), snr


def relative_status(log_like: np.ndarray, evaluated: np.ndarray,
                    threshold: float = CHI2_95_2DOF) -> tuple[np.ndarray, float]:
    """Detection statuses over the grid: disfavoured when -2 (lnL - lnL_best) > threshold.

    Parameters
    ----------
    log_like : numpy.ndarray
        The term's ln L at every grid point (any value where not evaluated).
    evaluated : numpy.ndarray of bool
        Points with a valid, evaluated model.
    threshold : float
        Delta chi^2 (default: 95 % for the two grid parameters).

    Returns
    -------
    status : numpy.ndarray of int8
        NOT_EVALUATED, ALLOWED or EXCLUDED.
    best : float
        lnL_best, the largest finite ln L of the evaluated points (NaN if none).
    """
    log_like = np.asarray(log_like, dtype=float)
    evaluated = np.asarray(evaluated, dtype=bool)
    finite = evaluated & np.isfinite(log_like)
    status = np.full(log_like.shape, NOT_EVALUATED, dtype=np.int8)
    if not finite.any():
        status[evaluated] = EXCLUDED if evaluated.any() else NOT_EVALUATED
        return status, math.nan
    best = float(log_like[finite].max())
    with np.errstate(invalid="ignore"):
        worse = ~np.isfinite(log_like) | (-2.0 * (log_like - best) > threshold)
    status[evaluated] = np.where(worse[evaluated], EXCLUDED, ALLOWED)
    return status, best


@dataclasses.dataclass(frozen=True)
class TermInfo:
    """What the grid file records about one constraint.

    Attributes
    ----------
    name : str
        The term's name (its group under ``grid/terms``).
    kind : str
        One of :data:`KINDS`.
    label : str
        Legend text: the curve's ``label`` metadata, else the name.
    attrs : dict
        Extra group attributes: ``rule``, and ``snr_threshold`` (sensitivity) or
        ``threshold`` (detection, Gaussian prior).
    """

    name: str
    kind: str
    label: str
    attrs: dict = dataclasses.field(default_factory=dict)


def describe_terms(terms: Sequence[Any], labels: Mapping[str, str]) -> list[TermInfo]:
    """One :class:`TermInfo` per term; ``labels`` maps curve names to their labels.

    A :class:`~scan.likelihood.PBHBounds` term is labelled with its bounds' labels.
    """
    infos = []
    for term in terms:
        kind = term_kind(term)
        if isinstance(term, PBHBounds):
            label = "f_PBH: " + ", ".join(labels.get(b, b) for b in term.bound_names)
        else:
            label = labels.get(term.name, term.name)
        attrs: dict[str, Any] = {"rule": RULES[kind]}
        if kind == "sensitivity":
            attrs["snr_threshold"] = float(term.snr_threshold)
            attrs["form"] = term.form
        elif kind == "detection":
            attrs["threshold"] = CHI2_95_2DOF
        elif isinstance(term, GaussianPrior):
            attrs["threshold"] = CHI2_95_1DOF
        elif isinstance(term, OneSidedLimit):
            attrs["limit"] = float(term.limit)
        infos.append(TermInfo(term.name, kind, label, attrs))
    return infos
