"""f_PBH bounds for monochromatic masses applied to an extended mass function.

For each bound j, I_j = int d ln M f_PBH(M) / f_max,j(M) (f_PBH(M) = d f_PBH/d ln M),
the model being allowed when I_j <= 1 (Carr, Raidal, Tenkanen, Vaskonen & Veermaee 2017,
PRD 96, 023514, arXiv:1705.05567).  Outside a bound's tabulated mass range it adds 0.
Bounds combine as max_j I_j (default) or in quadrature, sum_j I_j^2 <= 1; the linear sum
is not offered as the default because it treats every bound as the same observable
(constraints.md Sec. 5c).  ``binding`` names the bound that dominates.

Observables may carry ``ln_mass_shift`` (one value per model, [ln M_sun]): model i's
masses are then ``m_msun * exp(ln_mass_shift[i])`` (how a sampled critical-collapse
coefficient K moves a mass function computed with another K, see
:func:`scan.observables.batch.with_collapse_coefficient`).  On a planned grid the
shifted integrals come from a table over the shift (:data:`SHIFT_STEP`).
"""
from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from scan.curves import Curve
from scan.likelihood.base import (GridSpectra, OnGrid, as_result, get, get_optional, interp_last,
                                  interp_weights, product_or_direct)

COMBINE: tuple[str, ...] = ("max", "quadrature")
METHODS: tuple[str, ...] = ("step", "soft_log")

#: Mass shifts the planned bounds tabulate, ln(M'/M) in [-SHIFT_MAX, SHIFT_MAX] (K/K_0
#: from 0.05 to 20), in steps of SHIFT_STEP: linear interpolation in the shift is then
#: within 1e-3 of the direct integral (measured on the demo bounds: 9e-4 at worst, where
#: a bound's tabulated range ends inside the mass function; 1e-6 median; tests); larger
#: shifts are integrated directly.
SHIFT_MAX: float = 3.0
SHIFT_STEP: float = 0.01


def carr_integral(ln_m: np.ndarray, f_per_lnm: np.ndarray, ln_m_bound: np.ndarray,
                  ln_fmax: np.ndarray) -> np.ndarray:
    """I = int d ln M f(M)/f_max(M) over the overlap of model and bound ranges.

    Parameters
    ----------
    ln_m : numpy.ndarray [ln M_sun]
        Model mass grid (increasing).
    f_per_lnm : numpy.ndarray [1]
        d f_PBH / d ln M on ``ln_m`` (batch axes first); interpolated linearly in ln M.
    ln_m_bound, ln_fmax : numpy.ndarray
        The bound, interpolated linearly in (ln M, ln f_max).
    """
    lo, hi = max(ln_m[0], ln_m_bound[0]), min(ln_m[-1], ln_m_bound[-1])
    if lo >= hi:
        return np.zeros(np.shape(f_per_lnm)[:-1])
    grid = np.concatenate(([lo], ln_m[(ln_m > lo) & (ln_m < hi)], [hi]))
    idx, w = interp_weights(ln_m, grid)
    f = interp_last(np.asarray(f_per_lnm, dtype=float), idx, w)
    inv_fmax = np.exp(-np.interp(grid, ln_m_bound, ln_fmax))
    return np.trapezoid(f * inv_fmax, grid, axis=-1)


@dataclass(frozen=True, eq=False)
class PBHBounds:
    """A set of f_PBH bounds applied together.

    Attributes
    ----------
    name : str
    bound_names : tuple of str
    ln_m : tuple of numpy.ndarray [ln M_sun]
    ln_fmax : tuple of numpy.ndarray
    combine : {"max", "quadrature"}
    method : {"step", "soft_log"}
        ln L = 0 / -inf on the combined statistic S <= 1, or -(log10 S / width)^2 / 2 above 1.
    width_dex : float [dex]
    """

    name: str
    bound_names: tuple[str, ...]
    ln_m: tuple[np.ndarray, ...]
    ln_fmax: tuple[np.ndarray, ...]
    combine: str = "max"
    method: str = "step"
    width_dex: float = 0.1

    @classmethod
    def from_curves(cls, curves: Sequence[Curve], name: str = "pbh_bounds",
                    combine: str = "max", method: str = "step",
                    width_dex: float = 0.1) -> "PBHBounds":
        """From ``upper_limit`` curves on f_PBH (x in M_sun)."""
        if combine not in COMBINE or method not in METHODS:
            raise ValueError(f"combine must be one of {COMBINE}, method one of {METHODS}")
        for c in curves:
            if c.kind != "upper_limit" or c.y_quantity != "f_pbh":
                raise ValueError(f"{c.name}: not an f_PBH upper limit")
        return cls(name, tuple(c.name for c in curves), tuple(np.log(c.x) for c in curves),
                   tuple(np.log(c.y) for c in curves), combine, method, width_dex)

    def integrals(self, m_msun: np.ndarray, f_per_lnm: np.ndarray,
                  ln_mass_shift: np.ndarray | None = None) -> np.ndarray:
        """I_j for every bound, shape (..., n_bounds).

        ``ln_mass_shift`` (shape (m,), [ln M_sun]): row i of ``f_per_lnm`` (m, n_M) is on
        the masses ``m_msun * exp(ln_mass_shift[i])``.
        """
        ln_m = np.log(np.asarray(m_msun, dtype=float))
        if ln_mass_shift is None:
            return np.stack([carr_integral(ln_m, f_per_lnm, lm, lf)
                             for lm, lf in zip(self.ln_m, self.ln_fmax)], axis=-1)
        f = np.atleast_2d(np.asarray(f_per_lnm, dtype=float))
        shifts = np.broadcast_to(np.asarray(ln_mass_shift, dtype=float), f.shape[:1])
        return np.stack([self.integrals(m_msun, row)
                         for row, m_msun in zip(f, np.exp(ln_m + shifts[:, None]))])

    def statistic(self, m_msun: np.ndarray, f_per_lnm: np.ndarray) -> float | np.ndarray:
        """max_j I_j or sum_j I_j^2: the model is allowed when it is <= 1."""
        return self.combined(self.integrals(m_msun, f_per_lnm))

    def combined(self, i: np.ndarray) -> float | np.ndarray:
        """The statistic of the integrals ``i`` (..., n_bounds)."""
        return as_result(i.max(axis=-1) if self.combine == "max" else np.sum(i**2, axis=-1))

    def binding(self, m_msun: np.ndarray, f_per_lnm: np.ndarray) -> str:
        """Name of the bound with the largest I_j (single model)."""
        return self.bound_names[int(np.argmax(self.integrals(m_msun, f_per_lnm)))]

    def loglike(self, m_msun: np.ndarray, f_per_lnm: np.ndarray) -> float | np.ndarray:
        """ln L from the combined statistic."""
        return self.loglike_of_statistic(self.statistic(m_msun, f_per_lnm))

    def loglike_of_statistic(self, s) -> float | np.ndarray:
        """ln L of the combined statistic ``s``."""
        s = np.asarray(s)
        if self.method == "step":
            return as_result(np.where(s > 1.0, -np.inf, 0.0))
        with np.errstate(divide="ignore"):
            excess = np.maximum(np.log10(s), 0.0) / self.width_dex
        return as_result(-0.5 * excess**2)

    def __call__(self, obs, nuisance=None) -> float | np.ndarray:
        shift = mass_shift_of(obs)
        i = self.integrals(get(obs, "m_msun"), get(obs, "f_pbh_per_lnm"), shift)
        return self.loglike_of_statistic(self.combined(i))

    def on_grid(self, f_hz: np.ndarray | None,
                m_msun: np.ndarray | None) -> "PBHBoundsOnGrid | None":
        """These bounds for mass functions that always come on ``m_msun`` [M_sun] (None
        without a mass grid)."""
        if m_msun is None:
            return None
        m_msun = np.asarray(m_msun, dtype=float)
        # each I_j is linear in f: its coefficients are the integrals of the unit vectors
        return PBHBoundsOnGrid(self, m_msun, self.integrals(m_msun, np.eye(m_msun.size)))


@dataclass(frozen=True, eq=False)
class PBHBoundsOnGrid(OnGrid):
    """:class:`PBHBounds` on a fixed mass grid: I_j = f @ V[:, j], one matrix product.

    The same sums as :func:`carr_integral` in another order (equal to rounding); rows
    with a non-finite f (a non-finite product: 0 * inf is NaN) are integrated directly.

    Attributes
    ----------
    term : PBHBounds
    m_msun : numpy.ndarray [M_sun]
    V : numpy.ndarray, shape (n_M, n_bounds) [1]
        Interpolation times trapezoid weights times 1/f_max of every bound.
    """

    term: PBHBounds
    m_msun: np.ndarray
    V: np.ndarray

    def integrals(self, spectra: GridSpectra) -> np.ndarray:
        """I_j for every bound, shape (..., n_bounds)."""
        shift = mass_shift_of(spectra.obs)
        if shift is None:
            return product_or_direct(spectra.f_pbh_per_lnm, self.V,
                                     lambda f: self.term.integrals(self.m_msun, f))
        return self.shifted_integrals(spectra.f_pbh_per_lnm, shift)

    def shifted_integrals(self, f: np.ndarray, shift: np.ndarray) -> np.ndarray:
        """I_j of rows ``f`` (m, n_M) on the masses ``m_msun * exp(shift)``, (m, n_bounds).

        Linear in the shift between the tabulated ones (:attr:`shifted_V`); rows with a
        shift beyond the table, or a non-finite result, are integrated directly.
        """
        f = np.atleast_2d(np.asarray(f, dtype=float))
        shift = np.broadcast_to(np.asarray(shift, dtype=float), f.shape[:1])
        t = (shift + SHIFT_MAX) / SHIFT_STEP
        inside = (t >= 0.0) & (t <= self.shifted_V.shape[0] - 1)
        a = np.clip(np.floor(np.where(inside, t, 0.0)).astype(np.intp), 0,
                    self.shifted_V.shape[0] - 2)
        w = (t - a)[:, None]
        with np.errstate(invalid="ignore"):
            out = (1.0 - w) * np.einsum("mi,mij->mj", f, self.shifted_V[a]) \
                + w * np.einsum("mi,mij->mj", f, self.shifted_V[a + 1])
        bad = ~inside | np.any(~np.isfinite(out), axis=-1)
        if np.any(bad):
            out[bad] = self.term.integrals(self.m_msun, f[bad], shift[bad])
        return out

    @functools.cached_property
    def shifted_V(self) -> np.ndarray:
        """V on the masses ``m_msun * exp(s)`` for the tabulated shifts s,
        shape (n_s, n_M, n_bounds) (built on first use: ~0.1 s)."""
        n = int(round(2 * SHIFT_MAX / SHIFT_STEP)) + 1
        eye = np.eye(self.m_msun.size)
        return np.stack([self.term.integrals(self.m_msun * np.exp(s), eye)
                         for s in np.linspace(-SHIFT_MAX, SHIFT_MAX, n)])

    def __call__(self, spectra: GridSpectra, nuisance=None) -> float | np.ndarray:
        t = self.term
        return t.loglike_of_statistic(t.combined(self.integrals(spectra)))


def mass_shift_of(obs) -> np.ndarray | None:
    """The observables' ``ln_mass_shift`` [ln M_sun] per model, or None (no shift)."""
    value = get_optional(obs, "ln_mass_shift")
    return None if value is None else np.asarray(value, dtype=float)
