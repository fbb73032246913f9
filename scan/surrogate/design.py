"""Where to solve: the space-filling design, the held-out set, adaptive refinement.

All points live in the unit cube (see :mod:`scan.surrogate.space`).  Every point has a
*stage* (``STAGE_DESIGN``, ``STAGE_HOLDOUT``, ``STAGE_HOLDOUT_PEAK``,
``STAGE_REFINE + round``, ``STAGE_PEAK + round`` or ``STAGE_POSTERIOR + round``) and a
sequence number within it; all choices are deterministic given ``run.seed`` and the
solved points, so a resumed run plans exactly what the interrupted one planned (the
store also records every plan before it is solved).
"""
from __future__ import annotations

import warnings

import numpy as np
from scipy.spatial import cKDTree
from scipy.stats import qmc

STAGE_DESIGN = 0
STAGE_HOLDOUT = 1
STAGE_REFINE = 2  # + round number
#: Held-out points placed after training where the emulator predicts a high peak (where
#: f_PBH is not negligible): a uniform hold-out set almost never lands there.
STAGE_HOLDOUT_PEAK = -1
#: Training points placed the way the peak hold-out points are (where the emulator predicts
#: a valid model with a high peak, the thin sliver where f_PBH matters), with their own
#: random stream, + the round number; planned before the peak hold-out set.
STAGE_PEAK = 500
#: Every stage whose points are never used for training.
HOLDOUT_STAGES = (STAGE_HOLDOUT, STAGE_HOLDOUT_PEAK)
#: Training points drawn from a posterior chain (``zetascan train --refine-from``), + the
#: round number (far above the ``STAGE_REFINE + round`` of any plausible refine_rounds).
STAGE_POSTERIOR = 1000


def _rng(seed: int, *stream: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence([int(seed), *map(int, stream)]))


def sobol_points(dim: int, start: int, count: int, seed: int) -> np.ndarray:
    """Points ``start .. start+count-1`` of the scrambled Sobol sequence of ``seed``.

    The sequence is the same for every call with the same ``dim`` and ``seed``, so a
    design can be extended later without changing its first points.
    """
    engine = qmc.Sobol(dim, scramble=True, seed=_rng(seed, STAGE_DESIGN))
    if start:
        engine.fast_forward(start)
    with warnings.catch_warnings():  # balance warnings for counts that are not 2^m
        warnings.simplefilter("ignore", UserWarning)
        return engine.random(count) if count else np.zeros((0, dim))


def holdout_points(dim: int, count: int, seed: int) -> np.ndarray:
    """Independent uniform points for validation.

    Plain random (not quasi-random) draws, so the validation errors estimate the error
    at a typical point of the prior, the way a sampler will query the surrogate.
    """
    return _rng(seed, STAGE_HOLDOUT).random((count, dim))


def in_peak_window(predicted_log10_p: np.ndarray, margin: np.ndarray, low: float,
                   high: float | None = None) -> np.ndarray:
    """Which candidates the emulator predicts valid (``margin > 0``) with ``low <=``
    log10 P_peak ``<= high`` (no upper bound if ``high`` is None)."""
    keep = (margin > 0) & (predicted_log10_p >= low)
    return keep if high is None else keep & (predicted_log10_p <= high)


def peak_holdout_points(candidates: np.ndarray, predicted_log10_p: np.ndarray,
                        margin: np.ndarray, threshold: float, count: int,
                        seed: int, high: float | None = None,
                        stream: tuple[int, ...] = (STAGE_HOLDOUT, 2)) -> np.ndarray:
    """Points where the emulator predicts a valid model with a high peak.

    Random draws (uniform) among the ``candidates`` predicted valid (``margin > 0``) with
    ``threshold <=`` log10 P_peak ``<= high``: as held-out points the errors there estimate
    the surrogate's error where f_PBH matters, and the emulator only chooses *where* to
    look (the exact solves judge).  The training stage ``STAGE_PEAK`` draws the same way
    from its own random ``stream``.

    Returns
    -------
    ndarray, shape (m, d)
        ``m = min(count, number of such candidates)`` points.
    """
    eligible = np.flatnonzero(in_peak_window(predicted_log10_p, margin, threshold, high))
    pick = _rng(seed, *stream).permutation(eligible)[:count]
    return candidates[np.sort(pick)]


def peak_round_points(candidates: np.ndarray, in_window: np.ndarray, sd: np.ndarray,
                      existing: np.ndarray, count: int, variance_fraction: float, seed: int,
                      stream: tuple[int, ...]) -> np.ndarray:
    """Points of one peak training round among the ``candidates`` ``in_window``.

    ``round(count * variance_fraction)`` go where the predictive sd of the peak (``sd``,
    given for the candidates in the window) is largest, kept apart from each other and
    from the ``existing`` points (:func:`greedy_spread`); the rest are random draws in the
    window, like the peak hold-out points.

    Returns
    -------
    ndarray, shape (m, d)
        ``m = min(count, number of candidates in the window)`` points.
    """
    eligible = np.flatnonzero(in_window)
    n_var = min(int(round(count * variance_fraction)), len(eligible))
    scale = spacing(len(existing) + count, candidates.shape[1])
    by_sd = eligible[greedy_spread(np.asarray(sd, float), candidates[eligible], existing,
                                   n_var, scale)] if n_var else np.zeros(0, int)
    rest = np.setdiff1d(eligible, by_sd)
    drawn = _rng(seed, *stream).permutation(rest)[:count - n_var]
    return candidates[np.concatenate([by_sd, np.sort(drawn)])]


def min_distances(points: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Distance from each row of ``points`` to the nearest row of ``reference``."""
    if len(reference) == 0:
        return np.full(len(points), np.inf)
    d2 = ((points[:, None, :] - reference[None, :, :]) ** 2).sum(-1)
    return np.sqrt(d2.min(1))


def spacing(n_points: int, dim: int) -> float:
    """Typical distance between neighbouring design points, ``n^(-1/d)`` (unit cube)."""
    return float(max(n_points, 1)) ** (-1.0 / dim)


def greedy_spread(scores: np.ndarray, candidates: np.ndarray, existing: np.ndarray,
                  count: int, scale: float) -> np.ndarray:
    """Pick ``count`` candidates of high score that keep apart from each other and the data.

    Each pick maximises ``score * min(1, d / scale)`` with ``d`` the distance to the
    nearest existing or already picked point.  Returns indices into ``candidates``.
    """
    dist = min_distances(candidates, existing)
    chosen: list[int] = []
    for _ in range(min(count, len(candidates))):
        value = scores * np.minimum(1.0, dist / scale)
        value[chosen] = -np.inf
        best = int(np.argmax(value))
        chosen.append(best)
        dist = np.minimum(dist, np.sqrt(((candidates - candidates[best]) ** 2).sum(1)))
    return np.array(chosen, int)


def refine_points(train_u: np.ndarray, error_score: np.ndarray, margin: np.ndarray,
                  candidates: np.ndarray, count: int, boundary_fraction: float) -> np.ndarray:
    """New unit-cube points: part along the validity boundary, part where errors are large.

    Parameters
    ----------
    train_u : ndarray, shape (n, d)
        Points already planned for training.
    error_score : ndarray, shape (c,)
        Expected emulator error at each candidate (e.g. predictive sd times the
        cross-validated error of the nearest training point) [arbitrary units].
    margin : ndarray, shape (c,)
        Classifier output at each candidate (sign: valid > 0; near 0: the boundary).
    candidates : ndarray, shape (c, d)
        Random candidate points.
    count : int
        Points to return.
    boundary_fraction : float
        Share of ``count`` given to the boundary (used only if both classes exist).

    Returns
    -------
    ndarray, shape (count, d)
    """
    scale = spacing(len(train_u) + count, train_u.shape[1])
    n_boundary = int(round(count * boundary_fraction)) if np.any(np.abs(margin) < 1) else 0
    closeness = np.exp(-(margin / 0.25) ** 2)
    picks_b = greedy_spread(closeness, candidates, train_u, n_boundary, scale)
    taken = np.vstack([train_u, candidates[picks_b]])
    rest = np.setdiff1d(np.arange(len(candidates)), picks_b)
    picks_e = greedy_spread(error_score[rest] + 1e-300, candidates[rest], taken,
                            count - len(picks_b), scale)
    return np.vstack([candidates[picks_b], candidates[rest][picks_e]])


def peak_candidates(dim: int, count: int, seed: int,
                    stream: tuple[int, ...] = (STAGE_HOLDOUT, 1)) -> np.ndarray:
    """Random candidates for :func:`peak_holdout_points` (deterministic per ``stream``)."""
    return _rng(seed, *stream).random((count, dim))


def candidate_points(dim: int, count: int, seed: int, round_index: int) -> np.ndarray:
    """Random candidates for refinement round ``round_index`` (deterministic)."""
    return _rng(seed, STAGE_REFINE, round_index).random((count, dim))


def posterior_spacing(samples: np.ndarray, existing: np.ndarray, count: int) -> float:
    """Typical distance between training points inside the posterior once ``count`` are
    added: ``(V / (n_in + count))^(1/d)``, with V the volume of the box holding the central
    98 % of ``samples`` in every coordinate and n_in the ``existing`` points inside it
    (unit cube).  The design's own :func:`spacing` would be far larger than a narrow
    posterior and would let no sample through."""
    lo, hi = np.quantile(samples, [0.01, 0.99], axis=0)
    volume = float(np.prod(np.maximum(hi - lo, 1e-6)))
    inside = int(np.all((existing >= lo) & (existing <= hi), axis=1).sum()) if len(existing) \
        else 0
    return (volume / max(inside + count, 1)) ** (1.0 / samples.shape[1])


def spread_posterior_points(samples: np.ndarray, existing: np.ndarray, count: int,
                            seed: int, round_index: int) -> np.ndarray:
    """Up to ``count`` posterior samples, in random order, that keep apart from the data.

    Samples are visited in a random order (so the picks follow the posterior density) and
    kept when no existing or already kept point lies within half of
    :func:`posterior_spacing`.

    Parameters
    ----------
    samples : ndarray, shape (s, d)
        Posterior samples in the unit cube (after burn-in and thinning).
    existing : ndarray, shape (n, d)
        Every point already planned in the store (training and hold-out).
    count : int
    seed, round_index : int
        Make the choice deterministic.

    Returns
    -------
    ndarray, shape (m, d)
        ``m <= count`` points (fewer when the posterior is already densely covered).
    """
    min_distance = 0.5 * posterior_spacing(samples, existing, count)
    to_existing = cKDTree(existing).query(samples)[0] if len(existing) else \
        np.full(len(samples), np.inf)
    kept: list[int] = []
    for i in _rng(seed, STAGE_POSTERIOR, round_index).permutation(len(samples)):
        if len(kept) == count:
            break
        if to_existing[i] < min_distance:
            continue
        if kept and np.min(np.linalg.norm(samples[kept] - samples[i], axis=1)) < min_distance:
            continue
        kept.append(int(i))
    return samples[kept]
