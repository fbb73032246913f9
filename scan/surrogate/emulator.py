"""The emulator: validity, peak, shape and CMB observables for many parameter vectors at once.

Three kernel regressors (:mod:`scan.surrogate.gp`) on unit-cube inputs:

* ``classifier`` — kernel regression of the labels (+1 valid, -1 invalid) over all
  training points; its sign is the predicted validity and its size a margin (near 0 at
  the boundary).  A least-squares kernel classifier: same code, same speed as the
  regressors, and a smooth margin that tells refinement where the boundary is.
* ``peak`` — ln k_peak and log10 P_peak over the valid points;
* ``shape`` — the principal-component coefficients of the shape
  (:mod:`scan.surrogate.shape`).  Kept apart from ``peak``: with one shared kernel the
  length scales chose themselves for the (many) shape coefficients and log10 P_peak —
  the quantity f_PBH is exponentially sensitive to — was 2.4-3.5x less accurate
  (median error) on the stand-in of the tests;
* ``cmb`` — n_s, log10 r, log10 V0, N* over the valid points; these depend mostly on
  the potential and vary slowly, so they get their own (longer) length scales;
* ``wall`` (only when a pole is given by a wall coordinate) — ln w_w, the pole's width
  at its wall, over every point where it is known (valid or not: it does not depend on
  the wall coordinate); a width prior stated for that coordinate needs it
  (:mod:`scan.config.width_prior`);
* ``high_peak`` (when it beats the global shape block there) — a shape regressor fitted
  only on the models with the highest peaks, blended in where the peak block predicts one
  (:mod:`scan.surrogate.highpeak`: plateaus and other shapes the bulk does not have).

Each block's kernel is Matérn-5/2 or Gaussian, whichever has the lower leave-one-out
error (``kernel = "auto"``): which kernel wins depends on the target's smoothness, so it
is measured per block rather than fixed.  Likewise measured: whether a block gets the
bottleneck coordinate of :mod:`scan.surrogate.bottleneck` as an extra input (singular at
the boundary to models that get stuck; its softening is chosen on the peak block, the
other blocks take it or not by their own leave-one-out error).
Predicting 64 vectors costs four (64 × n) kernel blocks and four small matrix products;
all functions here are pure.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.observables.pbh.map_fit import NG_LEVEL
from scan.surrogate.bottleneck import Bottleneck, augment, candidates
from scan.surrogate.gp import KERNELS, GPFit, fit_best, predict_gp, predictive_sd
from scan.surrogate.highpeak import HighPeak, blend, fit_high_peak
from scan.surrogate.shape import ShapeBasis, decode, encode, fit_basis
from scan.surrogate.threads import single_blas_thread

PEAK_COLUMNS = ("ln_k_peak", "log10_P_peak")
CMB_COLUMNS = ("n_s", "log10_r", "log10_V0", "N_star")
#: Column of ln w_w in ``TrainingSet.scalars`` (absent from six-column sets).
WALL_COLUMN = len(PEAK_COLUMNS) + len(CMB_COLUMNS)
#: Columns of the delta-N map's capped logarithmic fit (lambda, ln(slope_max - 1)), absent
#: from sets made before them (:data:`scan.surrogate.record.SCALARS`).
NG_COLUMNS = slice(WALL_COLUMN + 1, WALL_COLUMN + 3)


@dataclass(frozen=True)
class TrainingSet:
    """Training data as arrays (see :class:`scan.surrogate.record.TrainingRecord`).

    Attributes
    ----------
    u : ndarray, shape (n, d)
        Unit-cube coordinates of the points.
    valid : ndarray of bool, shape (n,)
    scalars : ndarray, shape (n, 7)
        ln_k_peak, log10_P_peak, n_s, log10_r, log10_V0, N_star (nan if invalid) and
        ln_wall_width (nan without a wall coordinate; sets of six columns have none).
    shapes : ndarray, shape (n, n_x)
        Shapes on the grid ``x`` [dex].
    x : ndarray, shape (n_x,)
        Shape grid ln(k/k_peak).
    """

    u: np.ndarray
    valid: np.ndarray
    scalars: np.ndarray
    shapes: np.ndarray
    x: np.ndarray


@dataclass(frozen=True)
class EmulatorSettings:
    """Fit settings (from the ``[surrogate]`` config section)."""

    kernel: str = "auto"
    nugget: float = 1e-10
    iterations: int = 60
    shape_components: int = 8
    shape_tolerance: float = 1e-3


@dataclass(frozen=True)
class Emulator:
    """A fitted emulator (plain arrays; stored by :mod:`scan.surrogate.store`).

    ``classifier`` is None when all training points had the same label
    (``constant_valid`` then gives it).  ``bottleneck`` is the extra input of the blocks
    named in ``bottleneck_blocks`` (None and () when no block gained from it).  ``wall``
    emulates ln w_w (None when the training points had no wall coordinate).
    ``high_peak`` refines the shape where the peak is high (None: not fitted).
    """

    classifier: GPFit | None
    constant_valid: bool
    peak: GPFit
    shape: GPFit
    cmb: GPFit
    basis: ShapeBasis
    bottleneck: Bottleneck | None = None
    bottleneck_blocks: tuple[str, ...] = ()
    wall: GPFit | None = None
    high_peak: HighPeak | None = None
    ng: GPFit | None = None

    def inputs(self, block: str, u: np.ndarray) -> np.ndarray:
        """The inputs of regressor ``block`` at unit-cube points ``u`` (p, d)."""
        return augment(u, self.bottleneck if block in self.bottleneck_blocks else None)


@dataclass(frozen=True)
class Prediction:
    """Emulated values for p parameter vectors.

    Attributes
    ----------
    valid : ndarray of bool, shape (p,)
    margin : ndarray, shape (p,)
        Classifier output (> 0 valid; |margin| << 1 near the boundary).
    ln_k_peak : ndarray [ln(Mpc^-1)]
    log10_P_peak : ndarray [dex]
    shape : ndarray, shape (p, n_x)
        log10 P - log10 P_peak on ``x`` [dex].
    x : ndarray, shape (n_x,)
        ln(k/k_peak).
    n_s, log10_r, log10_V0, N_star : ndarray
        CMB quantities (log10 V0 in dex of M_p^4).
    ln_wall_width : ndarray [ln(M_p)]
        ln w_w of the pole given by a wall coordinate (nan without a ``wall`` block).
    ng_log_lambda, ng_slope_max : ndarray [1] or None
        The model's delta-N map as the capped logarithmic map (``ng`` block; None
        without one; nan where the emulated log10 P_peak is below
        :data:`scan.observables.pbh.map_fit.NG_LEVEL`: Gaussian there).
    """

    valid: np.ndarray
    margin: np.ndarray
    ln_k_peak: np.ndarray
    log10_P_peak: np.ndarray
    shape: np.ndarray
    x: np.ndarray
    n_s: np.ndarray
    log10_r: np.ndarray
    log10_V0: np.ndarray
    N_star: np.ndarray
    ln_wall_width: np.ndarray | None = None
    ng_log_lambda: np.ndarray | None = None
    ng_slope_max: np.ndarray | None = None

    def spectrum(self) -> tuple[np.ndarray, np.ndarray]:
        """``(k, P_zeta)`` on the shape grid, each (p, n_x) [Mpc^-1], [-]."""
        k = np.exp(self.ln_k_peak[:, None] + self.x[None, :])
        return k, 10.0 ** (self.log10_P_peak[:, None] + self.shape)


def _complete(rows: np.ndarray) -> np.ndarray:
    return np.all(np.isfinite(rows), axis=1)


def fit_emulator(data: TrainingSet, settings: EmulatorSettings = EmulatorSettings()) -> Emulator:
    """Fit the classifier, the peak, shape and CMB blocks (with or without the bottleneck),
    with one BLAS thread (:mod:`scan.surrogate.threads`: on a loaded 2-core machine the
    small solves ran ~25x slower with the default pool, measured on the high-peak tests).

    Raises
    ------
    ValueError
        If fewer than 3 valid points have complete targets.
    """
    with single_blas_thread():
        return _fit_emulator(data, settings)


def _fit_emulator(data: TrainingSet, settings: EmulatorSettings) -> Emulator:
    """:func:`fit_emulator` inside its thread limit."""
    kernels = KERNELS if settings.kernel == "auto" else (settings.kernel,)
    opts = dict(kernels=kernels, noise_floor=settings.nugget, iterations=settings.iterations)
    labels = np.where(data.valid, 1.0, -1.0)
    classifier = None
    if 0 < data.valid.sum() < len(labels):
        classifier = fit_best(data.u, labels, **opts)
    good = data.valid & _complete(data.scalars[:, :2])
    if good.sum() < 3:
        raise ValueError(f"only {int(good.sum())} valid training points; need at least 3")
    basis = fit_basis(data.x, data.shapes[good], settings.shape_components,
                      settings.shape_tolerance)
    tried = candidates(data.u, data.valid)
    peak, bottleneck = _fit_block(data.u[good], data.scalars[good, :2], [None, *tried], opts)
    coefs = encode(basis, data.shapes[good])
    shape, shape_bn = _fit_block(data.u[good], coefs, [None, bottleneck], opts)
    cmb_cols = data.scalars[:, 2:WALL_COLUMN]
    cmb_rows = data.valid & _complete(cmb_cols)
    cmb_rows = cmb_rows if cmb_rows.sum() >= 3 else good
    cmb, cmb_bn = _fit_block(data.u[cmb_rows], np.nan_to_num(cmb_cols[cmb_rows]),
                             [None, bottleneck], opts)
    blocks = tuple(name for name, bn in (("peak", bottleneck), ("shape", shape_bn),
                                         ("cmb", cmb_bn)) if bn is not None)
    high_peak = fit_high_peak(data.u[good], data.scalars[good, 1], coefs, shape, opts)
    return Emulator(classifier, bool(data.valid.all()), peak, shape, cmb, basis,
                    bottleneck if blocks else None, blocks, _fit_wall(data, opts), high_peak,
                    _fit_ng(data, opts))


def _fit_ng(data: TrainingSet, opts: dict) -> GPFit | None:
    """The delta-N map block (lambda, ln(slope_max - 1)) over the valid points where the
    map was computed (None if fewer than 3: trained without ``non_gaussianity = 'model'``)."""
    if data.scalars.shape[1] < NG_COLUMNS.stop:
        return None
    known = data.valid & _complete(data.scalars[:, NG_COLUMNS])
    if known.sum() < 3:
        return None
    return fit_best(data.u[known], data.scalars[known, NG_COLUMNS], **opts)


def _fit_wall(data: TrainingSet, opts: dict) -> GPFit | None:
    """The ln w_w block over every point where it is known (None if fewer than 3)."""
    if data.scalars.shape[1] <= WALL_COLUMN:
        return None
    known = np.isfinite(data.scalars[:, WALL_COLUMN])
    if known.sum() < 3:
        return None
    return fit_best(data.u[known], data.scalars[known, WALL_COLUMN:WALL_COLUMN + 1], **opts)


def _fit_block(u: np.ndarray, y: np.ndarray, inputs: list[Bottleneck | None],
               opts: dict) -> tuple[GPFit, Bottleneck | None]:
    """The best (lowest leave-one-out error) fit over the candidate extra inputs."""
    unique = [None] + [bn for bn in inputs if bn is not None]
    fits = [(fit_best(augment(u, bn), y, **opts), bn) for bn in unique]
    return min(fits, key=lambda pair: pair[0].loo_score)


def classify(emulator: Emulator, u: np.ndarray) -> np.ndarray:
    """Classifier margin at unit-cube points (p, d): > 0 predicted valid."""
    u = np.atleast_2d(u)
    if emulator.classifier is None:
        return np.full(len(u), 1.0 if emulator.constant_valid else -1.0)
    return predict_gp(emulator.classifier, u)[:, 0]


def predict_unit(emulator: Emulator, u: np.ndarray) -> Prediction:
    """Emulate at unit-cube points ``u`` (p, d)."""
    u = np.atleast_2d(np.asarray(u, float))
    margin = classify(emulator, u)
    peak = predict_gp(emulator.peak, emulator.inputs("peak", u))
    cmb = predict_gp(emulator.cmb, emulator.inputs("cmb", u))
    shape = predict_gp(emulator.shape, emulator.inputs("shape", u))
    shape = blend(emulator.high_peak, u, peak[:, 1], shape)
    return Prediction(valid=margin > 0, margin=margin, ln_k_peak=peak[:, 0],
                      log10_P_peak=peak[:, 1], shape=decode(emulator.basis, shape),
                      x=emulator.basis.x, n_s=cmb[:, 0], log10_r=cmb[:, 1],
                      log10_V0=cmb[:, 2], N_star=cmb[:, 3],
                      ln_wall_width=(predict_gp(emulator.wall, u)[:, 0] if emulator.wall
                                     is not None else np.full(len(u), np.nan)),
                      **_predict_ng(emulator.ng, u, peak[:, 1]))


def _predict_ng(fit: GPFit | None, u: np.ndarray, log10_p: np.ndarray) -> dict:
    """The emulated capped logarithmic map (nan below ``NG_LEVEL``; {} without a block)."""
    if fit is None:
        return {}
    ng = predict_gp(fit, u)
    below = ~(log10_p >= NG_LEVEL)
    return {"ng_log_lambda": np.where(below, np.nan, ng[:, 0]),
            "ng_slope_max": np.where(below, np.nan, 1 + np.exp(ng[:, 1]))}


def peak_sd(emulator: Emulator, u: np.ndarray) -> np.ndarray:
    """Relative predictive standard deviation of the peak block at ``u`` (p, d)."""
    return predictive_sd(emulator.peak, emulator.inputs("peak", u))


def loo_error_score(emulator: Emulator, data: TrainingSet) -> np.ndarray:
    """Cross-validated error of each training point, largest standardised LOO residual.

    Invalid points (not in the regressors) get 0.  Shape (n,).
    """
    score = np.zeros(len(data.u))
    good = data.valid & _complete(data.scalars[:, :2])
    loo = np.hstack([np.abs(fit.loo) / fit.scale for fit in (emulator.peak, emulator.shape)])
    score[good] = loo.max(1)
    return score
