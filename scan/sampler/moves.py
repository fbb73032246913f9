"""The emcee proposal moves selected by ``sampler.moves``.

* ``"stretch"`` (the default, every chain before issue 14 used it): emcee's affine-invariant
  stretch move (Goodman & Weare 2010, Commun. Appl. Math. Comput. Sci. 5, 65; emcee's
  default, Foreman-Mackey et al. 2013, arXiv:1202.3665).
* ``"differential_evolution"``: at every step a move drawn from the mixture of emcee's
  differential-evolution move (probability 0.8; ter Braak 2006, Stat. Comput. 16, 239)
  and its snooker variant (0.2; ter Braak & Vrugt 2008, Stat. Comput. 18, 435), the
  mixture the emcee tutorial "Using different moves"
  (https://emcee.readthedocs.io/en/latest/tutorials/moves/) shows mixing better than the
  stretch move for lightly multimodal problems.  A differential-evolution proposal steps
  along the difference of two other walkers, so it follows a curved or ridge-like
  posterior (the p ~ 1 ridge of the wide pole box) better than a stretch along one line.

Both keep the chain bit-identical on resumption: every move draws from the sampler's one
``RandomState``, which the run file stores after every written step.
"""
from __future__ import annotations

import emcee

#: ``sampler.moves`` value -> (move class, weight) pairs of the mixture.
MOVE_SETS: dict[str, tuple[tuple[type, float], ...]] = {
    "stretch": ((emcee.moves.StretchMove, 1.0),),
    "differential_evolution": ((emcee.moves.DEMove, 0.8), (emcee.moves.DESnookerMove, 0.2)),
}


def move_mixture(name: str) -> list[tuple[emcee.moves.Move, float]]:
    """Fresh emcee move objects of the move set ``name`` with their weights.

    Parameters
    ----------
    name : str
        A key of :data:`MOVE_SETS` (``sampler.moves``; the schema checks it).

    Returns
    -------
    list of (emcee.moves.Move, float)
        What ``emcee.EnsembleSampler(..., moves=...)`` takes.
    """
    return [(cls(), weight) for cls, weight in MOVE_SETS[name]]


def describe(name: str) -> str:
    """One line naming the moves and weights, e.g. ``"DEMove 0.8 + DESnookerMove 0.2"``
    (stored with the chain)."""
    return " + ".join(f"{cls.__name__} {weight:g}" for cls, weight in MOVE_SETS[name])
