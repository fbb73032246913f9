"""``zetascan verify``: exact solves of posterior samples against the surrogate posterior.

For M samples drawn (without replacement, seed ``run.seed``) from the thinned,
post-burn-in chain of a surrogate posterior run:

1. the surrogate posterior ln q and its blobs are recomputed with the run's target
   (:meth:`~scan.posterior.target.PosteriorTarget.log_and_blobs`);
2. each sample is solved exactly (an injectable ``exact(theta) -> ExactOutcome``, by
   default :class:`scan.posterior.exact.ExactSolve`, through a :mod:`scan.pool` pool, each
   kept on disk as it finishes: :mod:`scan.verify.partial`)
   and scored by the *same* likelihood code (``target.score``): ln p and blobs;
3. per derived quantity the surrogate error ``Δ = exact - surrogate`` on the samples
   valid on both sides — in log10 for positive quantities (:data:`LOG_FIELDS`,
   ``snr_*``, and any unknown field that is positive throughout), absolute for the
   others (:data:`ABSOLUTE_FIELDS`, ``log_like``, ``lnL_*``) — as median / 95th
   percentile / max of |Δ|, with the median of Δ as the bias; integer fields (e.g. an
   index of the binding constraint) are reported as the fraction that agrees;
4. importance weights ``w ∝ exp(ln p - ln q)`` (priors cancel: ln p - ln q = Δ ln L);
   samples where the exact model is invalid or excluded get weight 0 and are counted
   by reason; Kish's ESS and ESS/M (:mod:`scan.verify.importance`);
5. the 16 / 50 / 84 % quantiles of every parameter and derived quantity, unweighted
   (surrogate values, equal weights) next to reweighted (exact values, weights w), in
   the error scale of each quantity (log10 for positive ones).

**Flag rule** (``biased``): the run is flagged when

* ESS/M < ``ess_fraction`` (default 0.8; invalid or excluded exact models count
  against it, since the surrogate put posterior mass where the exact posterior has
  none), or
* for any parameter or derived quantity (not the log-likelihood fields), the reweighted
  median moves from the unweighted one by more than ``shift`` (default 0.5) times the
  unweighted 68 % half-width ``(q84 - q16) / 2`` (f_PBH total and the peak mass are
  skipped when f_PBH stays below :data:`NEGLIGIBLE_FPBH`, an SNR when it stays below
  :data:`NEGLIGIBLE_SNR`: no PBHs or no detection, no bias), or
* no sample has a positive weight (then nothing can be reweighted).

Reweighting is only trustworthy where the surrogate posterior covers the exact one; a
large ESS/M says the two agree on the samples drawn, not that the tails agree.
"""
from __future__ import annotations

import dataclasses
import math
import re
from collections import Counter
from collections.abc import Sequence
from typing import Any

import numpy as np

from scan.observables.pbh.conventions import NEGLIGIBLE_FPBH
from scan.posterior.reasons import of_exact_solve
from scan.surrogate.validate import error_stats
from scan.verify.importance import kish_ess, median_shift, normalised_weights, weighted_quantiles

DEFAULT_SAMPLES = 200
#: Fewer samples than this say nothing about ESS/M (common practice).
MIN_SAMPLES = 10
#: Positive derived quantities compared in log10.
LOG_FIELDS: frozenset[str] = frozenset({"k_peak", "P_peak", "f_gw_peak", "omega_gw_h2_peak",
                                        "f_pbh_total", "M_pbh_peak", "r"})
#: Derived quantities compared as absolute differences.
ABSOLUTE_FIELDS: frozenset[str] = frozenset({"n_s", "N_star"})
#: Quantiles of the posterior summaries.
QUANTILES: dict[str, float] = {"q16": 0.16, "median": 0.5, "q84": 0.84}


@dataclasses.dataclass(frozen=True)
class Thresholds:
    """The flag rule's thresholds (see the module docstring).

    Attributes
    ----------
    ess_fraction : float [1]
        Flag when ESS/M is below this.
    shift : float [1]
        Flag when a reweighted median moves by more than this many 68 % half-widths.
    """

    ess_fraction: float = 0.8
    shift: float = 0.5


@dataclasses.dataclass(frozen=True)
class Evaluated:
    """Both posteriors at the drawn samples.

    Attributes
    ----------
    thetas : ndarray, shape (m, dim)
    log_p_surrogate, log_p_exact : ndarray, shape (m,) [1]
        Unnormalised log posteriors (-inf where invalid or excluded).
    blobs_surrogate, blobs_exact : structured ndarray, shape (m,)
        The target's blob records.
    exact_reason : tuple of str
        Why the exact model is invalid ("" when valid).
    exact_notes : ndarray of bool, shape (m,)
        The exact observables stage raised warnings (e.g. a truncated table).
    """

    thetas: np.ndarray
    log_p_surrogate: np.ndarray
    blobs_surrogate: np.ndarray
    log_p_exact: np.ndarray
    blobs_exact: np.ndarray
    exact_reason: tuple[str, ...]
    exact_notes: np.ndarray


def draw_indices(available: int, samples: int, seed: int) -> np.ndarray:
    """``samples`` distinct indices of ``available`` chain samples, sorted.

    Uses ``numpy.random.default_rng(seed).choice(..., replace=False)``.
    """
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(int(available), size=int(samples), replace=False))


def score_outcomes(target: Any, thetas: np.ndarray, outcomes: Sequence[Any]) -> Evaluated:
    """Both posteriors at ``thetas`` given their exact outcomes (no exact solve here).

    Parameters
    ----------
    target : PosteriorTarget
    thetas : ndarray, shape (m, dim)
    outcomes : sequence of ExactOutcome, length m
        The exact side of each row of ``thetas`` (solved now, or read back from the
        partial results of :mod:`scan.verify.partial`).

    Returns
    -------
    Evaluated
    """

    thetas = np.atleast_2d(np.asarray(thetas, float))
    log_q, blobs_q = target.log_and_blobs(thetas)
    obs = [o.observables for o in outcomes]
    reason = np.array([0 if o.observables is not None else of_exact_solve(str(o.reason))
                       for o in outcomes], dtype=np.int16)
    log_p, blobs_p = target.score(thetas, reason, obs)
    return Evaluated(thetas, np.asarray(log_q, float), blobs_q, np.asarray(log_p, float),
                     blobs_p, tuple(str(o.reason) for o in outcomes),
                     np.array([bool(o.notes) for o in outcomes], dtype=bool))


# ----------------------------------------------------------------------- comparisons
def reason_key(text: str) -> str:
    """An invalid-model reason with its numbers masked (``#``), for counting by kind."""
    return re.sub(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?", "#", text).strip() or "invalid"


def is_likelihood_field(name: str) -> bool:
    """``log_like`` and the per-term ``lnL_*`` fields."""
    return name == "log_like" or name.startswith("lnL_")


def scale_of(name: str, *values: np.ndarray) -> str:
    """``"log10"`` or ``"absolute"``: how a derived quantity is compared and summarised."""
    if name in ABSOLUTE_FIELDS or is_likelihood_field(name):
        return "absolute"
    if name in LOG_FIELDS or name.startswith("snr_"):
        return "log10"
    finite = np.concatenate([np.asarray(v, float).ravel() for v in values])
    finite = finite[np.isfinite(finite)]
    return "log10" if finite.size and bool(np.all(finite > 0)) else "absolute"


def on_scale(values: np.ndarray, scale: str) -> np.ndarray:
    """The values in their comparison scale (log10: NaN for values <= 0)."""
    x = np.asarray(values, float)
    if scale != "log10":
        return x
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(x > 0, np.log10(np.where(x > 0, x, 1.0)), np.nan)


def _error_row(delta: np.ndarray, scale: str) -> dict[str, Any]:
    row = error_stats(delta)
    d = delta[np.isfinite(delta)]
    return {"scale": scale, **row, "bias": float(np.median(d)) if d.size else math.nan}


def _summary(values: np.ndarray, weights: np.ndarray | None) -> dict[str, float]:
    q = weighted_quantiles(values, weights, list(QUANTILES.values()))
    return {key: float(v) for key, v in zip(QUANTILES, q)}


def _zero_weights(ev: Evaluated, reason_names: Sequence[str]) -> Counter:
    """Why each zero-weight sample has weight 0 (counted by kind)."""
    counts: Counter = Counter()
    terms = [n for n in ev.blobs_exact.dtype.names if n.startswith("lnL_")]
    for i in range(len(ev.thetas)):
        if not np.isfinite(ev.log_p_surrogate[i]):
            code = int(ev.blobs_surrogate["reason"][i])
            counts[f"surrogate now: {reason_names[code]}"] += 1
        elif ev.exact_reason[i]:
            counts[reason_key(ev.exact_reason[i])] += 1
        elif not np.isfinite(ev.log_p_exact[i]):
            bound = [t[4:] for t in terms if ev.blobs_exact[t][i] == -np.inf]
            counts["excluded" + (f" by {', '.join(bound)}" if bound else "")] += 1
    return counts


def compare(ev: Evaluated, names: Sequence[str], reason_names: Sequence[str],
            thresholds: Thresholds = Thresholds(),
            stored_log_prob: np.ndarray | None = None) -> tuple[dict[str, Any], np.ndarray]:
    """The verification report of evaluated samples and their normalised weights.

    Parameters
    ----------
    ev : Evaluated
    names : sequence of str
        Parameter names (columns of ``ev.thetas``).
    reason_names : sequence of str
        The target's reason names (``reason`` codes of the blobs).
    thresholds : Thresholds
    stored_log_prob : ndarray, optional
        The chain's stored ln q at the samples (to report how well it is reproduced).

    Returns
    -------
    report : dict
        Plain values (see ``zetascan verify --json``).
    weights : ndarray, shape (m,) [1]
        Normalised importance weights (all 0 when no sample has weight).
    """
    m = len(ev.thetas)
    both = np.isfinite(ev.log_p_surrogate) & np.isfinite(ev.log_p_exact)
    log_w = np.where(both, ev.log_p_exact - np.where(both, ev.log_p_surrogate, 0.0), -np.inf)
    w = normalised_weights(log_w)
    ess = kish_ess(w)
    ok = (ev.blobs_surrogate["reason"] == 0) & (ev.blobs_exact["reason"] == 0)
    report: dict[str, Any] = {
        "samples": m, "valid_exact": int(np.sum([not r for r in ev.exact_reason])),
        "positive_weight": int(np.sum(w > 0)), "ess": ess, "ess_fraction": ess / m,
        "thresholds": dataclasses.asdict(thresholds),
        "zero_weight": dict(sorted(_zero_weights(ev, reason_names).items())),
        "exact_notes": int(np.sum(ev.exact_notes)),
        "log_like_difference": _error_row(np.where(both, log_w, np.nan), "absolute"),
        "errors": {}, "log_like_terms": {}, "agreement": {}, "parameters": {},
        "derived": {}}
    if stored_log_prob is not None:
        d = np.abs(np.asarray(stored_log_prob, float) - ev.log_p_surrogate)
        report["stored_log_prob_max_abs_diff"] = float(np.nanmax(d)) if m else math.nan
    for i, name in enumerate(names):
        report["parameters"][name] = _summaries(ev.thetas[:, i], ev.thetas[:, i], w, "absolute")
    for name in ev.blobs_exact.dtype.names:
        if name == "reason":
            continue
        q, p = ev.blobs_surrogate[name], ev.blobs_exact[name]
        if not np.issubdtype(ev.blobs_exact.dtype[name], np.floating):
            report["agreement"][name] = float(np.mean(q[ok] == p[ok])) if ok.any() else math.nan
            continue
        scale = scale_of(name, q[ok], p[ok])
        delta = np.where(ok, on_scale(p, scale) - on_scale(q, scale), np.nan)
        if name == "log_like":
            continue
        if is_likelihood_field(name):
            report["log_like_terms"][name] = _error_row(delta, scale)
            continue
        report["errors"][name] = _error_row(delta, scale)
        report["derived"][name] = _summaries(np.where(ev.blobs_surrogate["reason"] == 0, q,
                                                      np.nan), p, w, scale)
    report["flags"] = flags(report, thresholds)
    report["biased"] = bool(report["flags"])
    return report, w


def _summaries(surrogate: np.ndarray, exact: np.ndarray, w: np.ndarray,
               scale: str) -> dict[str, Any]:
    """Unweighted (surrogate values) and reweighted (exact values) quantiles and shift."""
    unweighted = _summary(on_scale(surrogate, scale), None)
    reweighted = _summary(on_scale(exact, scale), w) if w.sum() > 0 else \
        {key: math.nan for key in QUANTILES}
    return {"scale": scale, "unweighted": unweighted, "reweighted": reweighted,
            "shift": median_shift(unweighted, reweighted)}


def flags(report: dict[str, Any], thresholds: Thresholds) -> list[str]:
    """The reasons a report is flagged (empty: not biased); the rule is in the module doc."""
    out = []
    if report["positive_weight"] == 0:
        out.append(f"no sample has a positive weight: the exact model is invalid or "
                   f"excluded at all {report['samples']} samples "
                   f"({_counts(report['zero_weight'])})")
        return out
    if report["ess_fraction"] < thresholds.ess_fraction:
        out.append(f"ESS/M = {report['ess_fraction']:.3f} < {thresholds.ess_fraction:g}")
    negligible_pbh = _pbh_negligible(report)
    for group in ("parameters", "derived"):
        for name, row in report[group].items():
            if group == "derived" and name in PBH_FIELDS and negligible_pbh:
                continue
            if group == "derived" and name.startswith("snr_") and _below(row, NEGLIGIBLE_SNR):
                continue
            if np.isfinite(row["shift"]) and abs(row["shift"]) > thresholds.shift:
                out.append(f"reweighted median of {name} moved by {row['shift']:+.2f} x its "
                           f"68% half-width (limit {thresholds.shift:g})")
    return out


#: Derived quantities that only mean something where PBHs are not negligible.
PBH_FIELDS: tuple[str, ...] = ("f_pbh_total", "M_pbh_peak")
#: A posterior whose f_PBH total stays below NEGLIGIBLE_FPBH (84 % quantile, both sides;
#: :mod:`scan.observables.pbh.conventions`) makes no PBHs to speak of, so where its (meaningless) peak
#: mass falls is not a bias of the posterior.


#: An SNR below this on both sides (84 % quantile) is no detection either way: where it
#: moves is rounding in the far tail of the spectrum, not a bias (thresholds are ~10).
NEGLIGIBLE_SNR = 0.01


def _pbh_negligible(report: dict[str, Any]) -> bool:
    row = report["derived"].get("f_pbh_total")
    return bool(row) and _below(row, NEGLIGIBLE_FPBH)


def _below(row: dict[str, Any], limit: float) -> bool:
    """True if the 84 % quantile of both sides is below ``limit`` (on the row's scale)."""
    tops = [side.get("q84") for side in (row.get("unweighted"), row.get("reweighted"))
            if isinstance(side, dict)]
    tops = [t for t in tops if t is not None and np.isfinite(t)]
    if row.get("scale") == "log10":
        limit = math.log10(limit)
    return bool(tops) and max(tops) < limit


def _counts(counts: dict[str, int]) -> str:
    return ", ".join(f"{k}: {v}" for k, v in counts.items()) or "none"


def jsonable(value: Any) -> Any:
    """The report with non-finite floats as None and numpy scalars as Python values."""
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value
