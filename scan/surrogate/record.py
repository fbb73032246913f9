"""One training point: what a full exact solve gives the surrogate.

The spectrum is kept as its peak (ln k_peak, log10 P_peak) plus its *shape*
``log10 P_zeta(k) - log10 P_peak`` on a fixed grid of ``x = ln(k / k_peak)``, which is what
the emulator compresses and what the observables are recomputed from.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from scan.pipeline.validity import FEATURE_REASON, TILT_LIMIT, tilt_off

#: Scalar targets of a record, in the order of :func:`scalar_targets` columns.
SCALARS: tuple[str, ...] = ("ln_k_peak", "log10_P_peak", "n_s", "log10_r", "log10_V0",
                            "N_star", "ln_wall_width", "ng_log_lambda", "ng_ln_cap")
#: Units of the scalar targets (HDF5 ``units`` attributes).
SCALAR_UNITS: dict[str, str] = {"ln_k_peak": "ln(Mpc^-1)", "log10_P_peak": "dex",
                                "n_s": "1", "log10_r": "dex", "log10_V0": "dex(M_p^4)",
                                "N_star": "1",  # e-folds
                                "ln_wall_width": "ln(M_p)", "ng_log_lambda": "1",
                                "ng_ln_cap": "1"}


def shape_grid(span: float, points: int) -> np.ndarray:
    """The shape grid ``x = ln(k/k_peak)``, ``points`` values evenly spaced in [-span, span]."""
    return np.linspace(-float(span), float(span), int(points))


@dataclass(frozen=True)
class TrainingRecord:
    """The result of one exact solve at one parameter vector.

    Attributes
    ----------
    params : ndarray, shape (d,)
        The parameter vector (physical values, in the order of the parameter space).
    valid : bool
        False if the model is invalid (the reason says why); its other fields are nan.
    reason : str
        Why the model is invalid ("" if valid).
    ln_k_peak : float
        ln of the peak wavenumber [ln(Mpc^-1)].
    log10_P_peak : float
        log10 of the peak value of P_zeta [dex].
    shape : ndarray, shape (n_x,)
        log10 P_zeta(k_peak e^x) - log10 P_peak on the shape grid [dex]; nan where the
        solved k range does not reach.
    n_s, r : float
        Scalar tilt and tensor-to-scalar ratio at the pivot.
    log10_V0 : float
        log10 of the potential scale V0 [dex(M_p^4)].
    N_star : float
        E-folds from pivot exit to the end of inflation.
    ln_wall_width : float
        ln w_w [ln(M_p)], the width at the wall of the pole given by a wall coordinate
        (:func:`scan.pipeline.solve.wall_width`); known for invalid models too, nan when
        no pole uses a wall coordinate.
    ng_log_lambda, ng_ln_cap : float [1]
        The model's delta-N map at the peak as the capped logarithmic map
        (:func:`scan.observables.pbh.map_fit.fit_capped`): lambda and ln(slope_max - 1);
        nan unless ``[observables] non_gaussianity = "model"`` and log10 P_peak >=
        :data:`scan.observables.pbh.map_fit.NG_LEVEL`.
    """

    params: np.ndarray
    valid: bool
    reason: str = ""
    ln_k_peak: float = float("nan")
    log10_P_peak: float = float("nan")
    shape: np.ndarray = field(default_factory=lambda: np.zeros(0))
    n_s: float = float("nan")
    r: float = float("nan")
    log10_V0: float = float("nan")
    N_star: float = float("nan")
    ln_wall_width: float = float("nan")
    ng_log_lambda: float = float("nan")
    ng_ln_cap: float = float("nan")

    def scalar_targets(self) -> np.ndarray:
        """The values of :data:`SCALARS` (log10 r from r)."""
        log_r = np.log10(self.r) if self.r > 0 else float("nan")
        return np.array([self.ln_k_peak, self.log10_P_peak, self.n_s, log_r, self.log10_V0,
                         self.N_star, self.ln_wall_width, self.ng_log_lambda,
                         self.ng_ln_cap], float)


#: A spectrum whose tilt at the CMB pivot is far from 1 has its feature (the stall) at CMB
#: scales.  The rule is the pipeline's (:mod:`scan.pipeline.validity`, which an exact solve
#: already applies); it is applied here again to records of stores written before it.
CMB_TILT_LIMIT = TILT_LIMIT
#: The reason given to those models.
CMB_FEATURE_REASON = (f"{FEATURE_REASON}: the pivot exits outside slow roll "
                      f"(|n_s - 1| > {TILT_LIMIT:g})")


def cmb_feature(n_s: np.ndarray) -> np.ndarray:
    """True where a (valid) spectrum's pivot tilt puts its feature at CMB scales."""
    return tilt_off(n_s)


def invalid_record(params: np.ndarray, reason: str, n_x: int) -> TrainingRecord:
    """A record of an invalid model (all targets nan)."""
    return TrainingRecord(np.asarray(params, float), False, reason or "invalid",
                          shape=np.full(n_x, np.nan))


def shape_on_grid(k: np.ndarray, P: np.ndarray, k_peak: float, P_peak: float,
                  x: np.ndarray) -> np.ndarray:
    """log10 P(k_peak e^x) - log10 P_peak by linear interpolation in (ln k, log10 P).

    Parameters
    ----------
    k, P : ndarray
        The solved spectrum [Mpc^-1], [-] (k increasing or not; sorted here).
    k_peak, P_peak : float
        Its peak [Mpc^-1], [-].
    x : ndarray
        Grid of ln(k/k_peak).

    Returns
    -------
    ndarray
        The shape [dex]; nan outside the solved k range.
    """
    k, P = np.asarray(k, float), np.asarray(P, float)
    keep = (k > 0) & (P > 0) & np.isfinite(k) & np.isfinite(P)
    order = np.argsort(k[keep])
    lnk, logp = np.log(k[keep][order]), np.log10(P[keep][order])
    target = np.log(k_peak) + np.asarray(x, float)
    out = np.interp(target, lnk, logp, left=np.nan, right=np.nan)
    return out - np.log10(P_peak)


def record_from_spectrum(params: np.ndarray, spectrum, x: np.ndarray) -> TrainingRecord:
    """Turn a solved spectrum (``scan.pipeline`` ``.spectrum``) into a record.

    Parameters
    ----------
    params : ndarray, shape (d,)
        The parameter vector that was solved.
    spectrum : object
        Has arrays ``k`` [Mpc^-1], ``P_zeta`` and scalars ``k_peak``, ``P_peak``, ``n_s``,
        ``r``, ``V0`` [M_p^4], ``N_star``, ``valid``, ``reason``.
    x : ndarray
        The shape grid ln(k/k_peak).
    """
    params = np.asarray(params, float)
    if not bool(spectrum.valid):
        return invalid_record(params, str(spectrum.reason), len(x))
    k_peak, p_peak = float(spectrum.k_peak), float(spectrum.P_peak)
    if not (np.isfinite(k_peak) and np.isfinite(p_peak) and k_peak > 0 and p_peak > 0):
        return invalid_record(params, "no interior peak in P_zeta", len(x))
    if cmb_feature(spectrum.n_s):
        return invalid_record(params, CMB_FEATURE_REASON, len(x))
    return TrainingRecord(
        params=params, valid=True, reason="", ln_k_peak=float(np.log(k_peak)),
        log10_P_peak=float(np.log10(p_peak)),
        shape=shape_on_grid(spectrum.k, spectrum.P_zeta, k_peak, p_peak, x),
        n_s=float(spectrum.n_s), r=float(spectrum.r),
        log10_V0=float(np.log10(spectrum.V0)) if spectrum.V0 > 0 else float("nan"),
        N_star=float(spectrum.N_star))
