"""Shared pieces of the likelihood terms: the :class:`Term` protocol, interpolation, return types.

A term is a small frozen object with a ``name`` and ``__call__(obs, nuisance=None)``
returning ln L (:class:`Term`).  ``obs`` is the one observables record,
:class:`scan.observables.Observables`; a term reads the fields it needs:

* ``f_hz`` [Hz] and ``omega_gw_h2`` [1] — today's GW spectrum (shape (n,) or, for many
  models on one frequency grid, (n_models, n));
* ``m_msun`` [M_sun] and ``f_pbh_per_lnm`` [1] — d f_PBH / d ln M;
* scalars ``n_s``, ``ln_1e10_as``, ``r`` at the pivot k* = 0.05 Mpc^-1.

Each term also offers ``loglike(x, y, ...)`` on plain arrays, vectorised over leading axes,
and most offer ``on_grid(f_hz, m_msun)``: the same ln L for observables that always come on
those grids, with the interpolation weights computed once (see ``scan.likelihood.grid``).
"""
from __future__ import annotations

import functools
from collections.abc import Callable, Mapping
from typing import Any, Protocol

import numpy as np

from scan.observables.record import Observables

#: Smallest value taken before a logarithm (a zero spectrum is "nothing there").
TINY: float = 1e-300
#: log10 of :data:`TINY` as ``np.log10`` gives it.
LOG10_TINY: float = float(np.log10(TINY))


class Term(Protocol):
    """What every likelihood term is: a name for reports and ln L of observables.

    ``nuisance`` maps nuisance-parameter names to values (scalars, or arrays over the
    models of a stack); a term reads only its own.  The result is a float for one model
    and an array over models for a stack.
    """

    name: str

    def __call__(self, obs: Observables,
                 nuisance: Mapping[str, Any] | None = None) -> float | np.ndarray: ...


def get(obs: Observables, key: str) -> Any:
    """``obs.key``; a clear KeyError naming the term's need where the record lacks it."""
    value = get_optional(obs, key)
    if value is None:
        raise KeyError(f"the observables have no '{key}'")
    return value


def get_optional(obs: Observables, key: str) -> Any:
    """``obs.key``, None where the observables do not have it."""
    return getattr(obs, key, None)


def nuisance_value(nuisance: Mapping[str, Any] | None, key: str, default: float) -> Any:
    """A nuisance parameter (scalar or array over models), or ``default``."""
    if nuisance is None or key not in nuisance:
        return default
    return nuisance[key]


def as_result(value: np.ndarray) -> float | np.ndarray:
    """A Python float for a single model, the array for many."""
    value = np.asarray(value, dtype=float)
    return float(value) if value.ndim == 0 else value


def product_or_direct(values: np.ndarray, weights: np.ndarray,
                      direct: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """``values @ weights``, with rows whose product is not finite recomputed by ``direct``.

    Every sample of a row enters the product, so a non-finite one shows in it (0 * inf is
    NaN); ``direct(values[bad])`` then gives those rows as the unplanned term would.
    """
    with np.errstate(invalid="ignore"):
        out = np.asarray(values @ weights)
    bad = ~np.isfinite(out)
    if out.ndim > np.ndim(values) - 1:      # a matrix of weights: one column per output
        bad = np.any(bad, axis=-1)
    if np.any(bad):
        out[bad] = direct(values[bad])
    return out


def interp_weights(x_src: np.ndarray, x_dst: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Left indices and weights for linear interpolation of samples at ``x_src``."""
    idx = np.clip(np.searchsorted(x_src, x_dst, side="right") - 1, 0, len(x_src) - 2)
    w = (x_dst - x_src[idx]) / (x_src[idx + 1] - x_src[idx])
    return idx, w


def interp_last(y: np.ndarray, idx: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Apply ``interp_weights`` along the last axis of ``y`` (batch axes kept)."""
    return y[..., idx] * (1.0 - w) + y[..., idx + 1] * w


def log10_weights(x_model: np.ndarray, x_at: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``interp_weights`` in log10 x from ``x_model`` to ``x_at``, and the mask of the
    points of ``x_at`` inside the model's range."""
    lx = np.log10(x_model)
    lat = np.log10(x_at)
    inside = (lat >= lx[0]) & (lat <= lx[-1])
    idx, w = interp_weights(lx, lat)
    return idx, w, inside


def log10_model_at(x_model: np.ndarray, y_model: np.ndarray,
                   x_at: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """log10 y_model at ``x_at`` (log-log interpolation) and the mask of points inside."""
    idx, w, inside = log10_weights(x_model, x_at)
    ly = np.log10(np.maximum(y_model, TINY))
    return interp_last(ly, idx, w), inside


class OnGrid:
    """Base of a term's planned form: named after the term it plans (``self.term``)."""

    term: Any

    @property
    def name(self) -> str:
        return self.term.name


class GridSpectra:
    """The observables of one call on a term set's planned grids, with shared work.

    Built by :meth:`scan.likelihood.grid.PlannedTerms.spectra`.  log10 Omega_GW h^2 (every
    GW term reads it) and each sensitivity curve's SNR are computed once per call, on
    first use.

    Parameters
    ----------
    obs : Observables
        Observables whose ``f_hz`` and ``m_msun`` are the planned grids.
    """

    def __init__(self, obs: Observables) -> None:
        self.obs = obs
        self._memo: dict[Any, Any] = {}

    @functools.cached_property
    def omega(self) -> np.ndarray:
        """Omega_GW h^2 on the planned frequencies [1], shape (..., n_f)."""
        return np.asarray(get(self.obs, "omega_gw_h2"), dtype=float)

    @functools.cached_property
    def log10_omega(self) -> np.ndarray:
        """log10 of Omega_GW h^2, floored at :data:`TINY` (as every term takes it).

        The same numbers as ``np.log10(np.maximum(omega, TINY))``; the logarithm is taken
        only where Omega exceeds the floor (a spectrum on a shared grid is 0 outside its
        own window, most of the grid).
        """
        omega = self.omega
        above = ~(omega <= TINY)                         # NaN stays NaN
        out = np.full(omega.shape, LOG10_TINY)
        out[above] = np.log10(omega[above])
        return out

    @functools.cached_property
    def f_pbh_per_lnm(self) -> np.ndarray:
        """d f_PBH / d ln M on the planned masses [1], shape (..., n_M)."""
        return np.asarray(get(self.obs, "f_pbh_per_lnm"), dtype=float)

    def once(self, key: Any, compute: Callable[[], Any]) -> Any:
        """``compute()``, evaluated on the first call with ``key`` only."""
        if key not in self._memo:
            self._memo[key] = compute()
        return self._memo[key]
