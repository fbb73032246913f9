"""The one table of reasons a model is not evaluated (chain blobs, grid files, verify).

A code is an index into :data:`REASONS`; files store the names beside the codes
(``reason_names``), so a reader never depends on the numbers.  ``OK`` is 0.
"""
from __future__ import annotations

from enum import IntEnum


class Reason(IntEnum):
    """Why a parameter point has no likelihood (0: it has one)."""

    OK = 0
    OUTSIDE_PRIOR = 1          # zero prior density
    OUTSIDE_SURROGATE = 2      # outside the box the surrogate was trained on
    INVALID_MODEL = 3          # the model is invalid (surrogate classifier or exact solve)
    PEAK_OUTSIDE_TABLE = 4     # the peak lies outside the precomputed observables tables
    EXCLUDED = 5               # a hard bound gives ln L = -inf
    INVALID_BACKGROUND = 6     # exact solve: the background stage failed
    INVALID_PIVOT = 7          # exact solve: no valid CMB pivot
    INVALID_SPECTRUM = 8       # exact solve: the mode stage failed
    FEATURE_AT_PIVOT = 9       # exact solve: the pole's feature sits on CMB scales
    STALLED_AT_POLE = 10       # exact solve: the field gets stuck at a pole (or creeps
    #                            through it with eps1 below the conditioning floor)


#: Reason names in code order (``REASONS[code]``), as stored in result files.
REASONS: tuple[str, ...] = tuple(r.name.lower() for r in Reason)


#: Reasons recognised by what the text of an invalid exact solve says, before its stage.
_MARKERS: tuple[tuple[str, Reason], ...] = (
    ("feature at CMB scales", Reason.FEATURE_AT_PIVOT),
    ("the field stalls before", Reason.STALLED_AT_POLE),
    ("ill-conditioned: eps1 falls", Reason.STALLED_AT_POLE),
)


def of_exact_solve(reason: str) -> Reason:
    """The reason of an invalid exact solve from its text: a feature on CMB scales or a
    stall at a pole by what it says; otherwise by its stage ("background: ..." ->
    :attr:`Reason.INVALID_BACKGROUND`); any other stage is :attr:`Reason.INVALID_MODEL`."""
    for marker, code in _MARKERS:
        if marker in reason:
            return code
    stage = reason.split(":", 1)[0].strip().upper()
    return Reason.__members__.get(f"INVALID_{stage}", Reason.INVALID_MODEL)
