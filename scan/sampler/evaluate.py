"""The function emcee calls: evaluate all walkers through a pool and count reasons.

emcee always runs with ``vectorize=True`` and calls :class:`Evaluator` with the
(n_walkers, dim) proposals; the evaluator hands them to the pool (one call for a
:class:`scan.pool.VectorPool`, one task per walker otherwise), tallies the invalid-model
reason codes of *every* evaluation (rejected proposals never reach the chain's blobs),
and returns emcee's ``(log_p, *blob_fields)`` tuples.
"""
from __future__ import annotations

import numpy as np

from scan.pool import BasePool
from scan.posterior.targets import TargetBase


class Evaluator:
    """Master-side log-probability of a whole ensemble.

    Parameters
    ----------
    target : TargetBase
        The picklable target.
    pool : BasePool
        An entered pool.
    counts : numpy.ndarray, optional
        Reason counts to continue from (length ``len(target.reasons)``).
    """

    def __init__(self, target: TargetBase, pool: BasePool,
                 counts: np.ndarray | None = None) -> None:
        self.target, self.pool = target, pool
        n = len(target.reasons)
        self.counts = np.zeros(n, dtype=np.int64) if counts is None else \
            np.asarray(counts, dtype=np.int64).copy()
        if self.counts.shape != (n,):
            raise ValueError(f"reason counts of shape {self.counts.shape}, expected ({n},)")
        self.reason_index = list(target.blob_dtype.names).index("reason")

    def __call__(self, coords: np.ndarray) -> list[tuple]:
        """``[(log_p, *blob), ...]`` for every walker, counting the reason codes."""
        if self.pool.vectorized:
            results = self.pool.map(self.target.batch, coords)
        else:
            results = self.pool.map(self.target, list(coords))
        out = []
        for log_p, blob in results:
            code = int(blob[self.reason_index])
            if not 0 <= code < len(self.counts):
                raise ValueError(f"target returned unknown reason code {code}")
            self.counts[code] += 1
            log_p = float(log_p)
            if np.isnan(log_p):
                raise ValueError(f"target returned NaN (reason {self.target.reasons[code]}); "
                                 "return -inf with a reason code for invalid models")
            out.append((log_p, *blob))
        return out
