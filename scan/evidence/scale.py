"""Bayes factors in plain words: the scale of Kass & Raftery (1995).

Kass, R. E. & Raftery, A. E. 1995, "Bayes Factors", J. Am. Stat. Assoc. 90, 773,
Sec. 3.2 grade the evidence for H1 against H0 by 2 ln B_10: 0 to 2 "not worth more than
a bare mention", 2 to 6 "positive", 6 to 10 "strong", above 10 "very strong".  A negative
ln B grades the evidence for H0 the same way.
"""
from __future__ import annotations

import math

#: (upper bound of 2 ln B, words), in increasing order.
KASS_RAFTERY: tuple[tuple[float, str], ...] = (
    (2.0, "not worth more than a bare mention"), (6.0, "positive"), (10.0, "strong"),
    (math.inf, "very strong"))

#: The source, printed with every grade.
SOURCE = "Kass & Raftery 1995, J. Am. Stat. Assoc. 90, 773 (scale on 2 ln B)"


def grade(ln_b: float) -> str:
    """The Kass & Raftery words for |2 ln B| (``"undetermined"`` for NaN)."""
    if not math.isfinite(ln_b):
        return "undetermined"
    value = abs(2.0 * ln_b)
    return next(words for top, words in KASS_RAFTERY if value < top)


def kass_raftery(ln_b: float, first: str = "the model", second: str = "the foreground"
                 ) -> str:
    """One sentence: which hypothesis the evidence favours, how strongly, and the source.

    Parameters
    ----------
    ln_b : float [1]
        ln Z_first - ln Z_second.
    first, second : str
        What the two evidences are of.
    """
    if not math.isfinite(ln_b):
        return f"ln B undetermined ({SOURCE})"
    winner, loser = (first, second) if ln_b >= 0.0 else (second, first)
    return (f"2 ln B = {2.0 * ln_b:+.2f}: evidence for {winner} over {loser} is "
            f"{grade(ln_b)} ({SOURCE})")
