"""Shared pieces of the likelihood terms: model observables, interpolation, return types.

A term is a small frozen object with a ``name`` and ``__call__(obs, nuisance=None)``
returning ln L.  ``obs`` is any object (or mapping) with the attributes it needs:

* ``f_hz`` [Hz] and ``omega_gw_h2`` [1] — today's GW spectrum (shape (n,) or, for many
  models on one frequency grid, (n_models, n));
* ``m_msun`` [M_sun] and ``f_pbh_per_lnm`` [1] — d f_PBH / d ln M;
* scalars ``n_s``, ``ln_1e10_as``, ``r`` at the pivot k* = 0.05 Mpc^-1.

Each term also offers ``loglike(x, y, ...)`` on plain arrays, vectorised over leading axes.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

#: Smallest value taken before a logarithm (a zero spectrum is "nothing there").
TINY: float = 1e-300


@dataclass(frozen=True, eq=False)
class ModelObservables:
    """A minimal observables record (any object with these attributes works)."""

    f_hz: np.ndarray | None = None
    omega_gw_h2: np.ndarray | None = None
    m_msun: np.ndarray | None = None
    f_pbh_per_lnm: np.ndarray | None = None
    n_s: float | None = None
    ln_1e10_as: float | None = None
    r: float | None = None


def get(obs: Any, key: str) -> Any:
    """``obs.key`` or ``obs[key]``; a clear KeyError naming the term's need otherwise."""
    value = obs.get(key) if isinstance(obs, Mapping) else getattr(obs, key, None)
    if value is None:
        raise KeyError(f"the observables have no '{key}'")
    return value


def nuisance_value(nuisance: Mapping[str, Any] | None, key: str, default: float) -> Any:
    """A nuisance parameter (scalar or array over models), or ``default``."""
    if nuisance is None or key not in nuisance:
        return default
    return nuisance[key]


def as_result(value: np.ndarray) -> float | np.ndarray:
    """A Python float for a single model, the array for many."""
    value = np.asarray(value, dtype=float)
    return float(value) if value.ndim == 0 else value


def interp_weights(x_src: np.ndarray, x_dst: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Left indices and weights for linear interpolation of samples at ``x_src``."""
    idx = np.clip(np.searchsorted(x_src, x_dst, side="right") - 1, 0, len(x_src) - 2)
    w = (x_dst - x_src[idx]) / (x_src[idx + 1] - x_src[idx])
    return idx, w


def interp_last(y: np.ndarray, idx: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Apply ``interp_weights`` along the last axis of ``y`` (batch axes kept)."""
    return y[..., idx] * (1.0 - w) + y[..., idx + 1] * w


def log10_model_at(x_model: np.ndarray, y_model: np.ndarray,
                   x_at: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """log10 y_model at ``x_at`` (log-log interpolation) and the mask of points inside."""
    lx = np.log10(x_model)
    lat = np.log10(x_at)
    inside = (lat >= lx[0]) & (lat <= lx[-1])
    ly = np.log10(np.maximum(y_model, TINY))
    idx, w = interp_weights(lx, lat)
    return interp_last(ly, idx, w), inside
