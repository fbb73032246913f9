"""A set of likelihood terms planned for observables that always come on the same grids.

A sampler's observables come on frequency and mass grids fixed for the whole run
(:mod:`scan.observables.batch`).  :func:`plan_terms` asks every term for its
``on_grid(f_hz, m_msun)`` form — the same ln L with the interpolation indices and weights,
integration nodes and linear functionals (trapezoid weights over the grid) found once —
and :meth:`PlannedTerms.loglikes` evaluates them on a :class:`GridSpectra`, which takes
log10 Omega_GW h^2 once for all terms and each SNR once for the term and its blob.
Terms without an ``on_grid`` form (the scalar priors) are called as they are.

The planned values equal the direct ``term(obs, nuisance)`` ones: bit for bit where the
operations are the same, to rounding where a sum is done as a matrix product
(``tests/test_likelihood_grid.py``).
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from scan.likelihood.base import GridSpectra, OnGrid, get


@dataclass(frozen=True, eq=False)
class DirectTerm(OnGrid):
    """A term without a planned form, called on the observables as they are."""

    term: Any

    def __call__(self, spectra: GridSpectra, nuisance: Mapping[str, Any] | None = None):
        return self.term(spectra.obs, nuisance)


@dataclass(frozen=True, eq=False)
class PlannedTerms:
    """Terms planned on the grids ``f_hz`` and ``m_msun`` (see the module docstring).

    Attributes
    ----------
    f_hz : numpy.ndarray [Hz]
        Frequencies of Omega_GW h^2.
    m_msun : numpy.ndarray or None [M_sun]
        Masses of d f_PBH / d ln M (None: f_PBH terms are not planned).
    terms : tuple
        The direct terms.
    planned : tuple
        Their planned forms, in the same order (``planned(spectra, nuisance) -> ln L``).
    """

    f_hz: np.ndarray
    m_msun: np.ndarray | None
    terms: tuple
    planned: tuple

    def covers(self, obs: Any) -> bool:
        """Whether ``obs`` comes on the planned grids (many models: 2-D arrays)."""
        try:
            f, omega = get(obs, "f_hz"), get(obs, "omega_gw_h2")
            m = None if self.m_msun is None else get(obs, "m_msun")
        except KeyError:
            return False
        return ((f is self.f_hz or np.array_equal(f, self.f_hz)) and np.ndim(omega) == 2
                and (m is self.m_msun or np.array_equal(m, self.m_msun)))

    def spectra(self, obs: Any) -> GridSpectra:
        """The per-call view of ``obs`` the planned terms read (shared work cached)."""
        return GridSpectra(obs)

    def loglikes(self, spectra: GridSpectra,
                 nuisance: Mapping[str, Any] | None = None) -> dict[str, Any]:
        """Each term's ln L (name -> float or array over models).

        Raises
        ------
        ValueError
            Two terms share a name.
        """
        out: dict[str, Any] = {}
        for planned in self.planned:
            if planned.name in out:
                raise ValueError(f"two likelihood terms are named {planned.name!r}")
            out[planned.name] = planned(spectra, nuisance)
        return out

    def snr(self, name: str, spectra: GridSpectra) -> np.ndarray:
        """SNR of the noise-form sensitivity term ``name`` (shared with its ln L)."""
        for planned in self.planned:
            if planned.name == name and hasattr(planned, "snr"):
                return planned.snr(spectra)
        raise KeyError(f"no planned sensitivity term named {name!r}")


def plan_terms(terms: Sequence, f_hz: np.ndarray,
               m_msun: np.ndarray | None = None) -> PlannedTerms:
    """Plan ``terms`` for observables on ``f_hz`` [Hz] and ``m_msun`` [M_sun].

    Parameters
    ----------
    terms : sequence
        Likelihood terms (``name``, ``__call__(obs, nuisance)``, optionally
        ``on_grid(f_hz, m_msun)``, which may return None: not plannable on these grids).
    f_hz : numpy.ndarray [Hz]
        Increasing frequencies of every Omega_GW h^2 the planned terms will see.
    m_msun : numpy.ndarray [M_sun], optional
        Increasing masses of every d f_PBH / d ln M; without them f_PBH terms are
        called directly.

    Returns
    -------
    PlannedTerms
    """
    f_hz = np.asarray(f_hz, dtype=float)
    m = None if m_msun is None else np.asarray(m_msun, dtype=float)
    planned = []
    for term in terms:
        on_grid = getattr(term, "on_grid", None)
        form = None if on_grid is None else on_grid(f_hz, m)
        planned.append(DirectTerm(term) if form is None else form)
    return PlannedTerms(f_hz=f_hz, m_msun=m, terms=tuple(terms), planned=tuple(planned))
