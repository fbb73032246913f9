"""The total log-likelihood of a list of terms, with each term's value for reports."""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any


def total_loglike(terms: Sequence, obs: Any,
                  nuisance: Mapping[str, Any] | None = None) -> tuple[float, dict[str, float]]:
    """Sum of ln L over ``terms`` and the per-term values (for "which constraint binds").

    Parameters
    ----------
    terms : sequence
        Objects with ``name`` and ``__call__(obs, nuisance) -> float``.
    obs : object or Mapping
        Model observables (see ``scan.likelihood.base``).
    nuisance : Mapping, optional
        Nuisance parameters, e.g. ``{"A_smbhb": 2e-15}``.

    Returns
    -------
    total : float
        -inf as soon as one term is -inf (all terms are still evaluated and reported).
    per_term : dict
        name -> ln L.

    Raises
    ------
    ValueError
        Two terms share a name.
    """
    per_term: dict[str, float] = {}
    for term in terms:
        if term.name in per_term:
            raise ValueError(f"two likelihood terms are named {term.name!r}")
        per_term[term.name] = float(term(obs, nuisance))
    total = math.fsum(v for v in per_term.values() if v != -math.inf)
    if any(v == -math.inf for v in per_term.values()):
        total = -math.inf
    return total, per_term


def binding_term(per_term: Mapping[str, float]) -> str | None:
    """Name of the most negative term, or None when all are zero."""
    name, value = min(per_term.items(), key=lambda kv: kv[1], default=(None, 0.0))
    return name if value < 0.0 else None
