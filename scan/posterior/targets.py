"""Log-probability targets: picklable callables returning ``(log_p, blob)``.

A target is a small frozen, module-level class (so it pickles to worker processes) with

* ``names`` — the sampled parameters, in order;
* ``blob_dtype`` — a numpy structured dtype of the derived quantities, whose last field
  is ``"reason"`` (an integer code: 0 for a valid model);
* ``reasons`` — the names of the reason codes (``reasons[0] == "ok"``);
* ``__call__(theta) -> (log_p, blob)`` with ``blob`` a tuple in ``blob_dtype`` order;
  an invalid model returns ``-inf`` and a non-zero reason;
* ``batch(thetas) -> list[(log_p, blob)]`` — all walkers in one call (vectorised runs);
* ``prepare()`` — load data once per worker process (idempotent).
"""
from __future__ import annotations

import dataclasses
import functools
import math

import numpy as np

REASON_OK = 0


class TargetBase:
    """Default ``batch`` and ``prepare`` of a target.

    Subclasses define ``names``, ``blob_dtype`` and ``reasons`` (see the module docstring).
    """

    names: tuple[str, ...]
    blob_dtype: np.dtype
    reasons: tuple[str, ...]
    #: Curve and scalar-bound files the target reads (part of a run's identity).
    curve_paths: tuple[str, ...] = ()

    def prepare(self) -> None:
        """Load whatever the target needs, once per process (nothing by default)."""

    def __call__(self, theta: np.ndarray) -> tuple[float, tuple]:
        raise NotImplementedError

    def batch(self, thetas: np.ndarray) -> list[tuple[float, tuple]]:
        """``[self(theta) for theta in thetas]``; override for a truly vectorised target."""
        return [self(theta) for theta in thetas]


@dataclasses.dataclass(frozen=True)
class GaussianTarget(TargetBase):
    """A multivariate normal with equal pairwise correlation, restricted to a box.

    Parameters
    ----------
    names : tuple of str
    mean, sigma : tuple of float
        Means and standard deviations.
    correlation : float
        Correlation coefficient of every pair (-1/(dim-1) < rho < 1).
    low, high : tuple of float
        The box (prior support); outside it the target is ``-inf`` with reason
        ``"outside_support"``.

    Derived blobs: ``chi2`` (the squared Mahalanobis distance, chi-squared with dim degrees
    of freedom) and ``total`` (the sum of the parameters).
    """

    names: tuple[str, ...]
    mean: tuple[float, ...]
    sigma: tuple[float, ...]
    correlation: float = 0.0
    low: tuple[float, ...] = ()
    high: tuple[float, ...] = ()
    blob_dtype: np.dtype = dataclasses.field(
        default=np.dtype([("chi2", np.float64), ("total", np.float64), ("reason", np.int16)]),
        compare=False)
    reasons: tuple[str, ...] = ("ok", "outside_support")

    def __post_init__(self) -> None:
        dim = len(self.mean)
        if dim > 1 and not -1.0 / (dim - 1) < self.correlation < 1.0:
            raise ValueError(f"correlation {self.correlation} is not positive definite "
                             f"in {dim} dimensions")

    @property
    def covariance(self) -> np.ndarray:
        """The covariance matrix."""
        s = np.asarray(self.sigma)
        dim = len(s)
        corr = np.full((dim, dim), self.correlation)
        np.fill_diagonal(corr, 1.0)
        return corr * np.outer(s, s)

    @functools.cached_property
    def _factors(self) -> tuple[np.ndarray, float]:
        chol = np.linalg.cholesky(self.covariance)
        log_det = 2.0 * float(np.sum(np.log(np.diag(chol))))
        return np.linalg.inv(chol), -0.5 * (len(self.mean) * math.log(2 * math.pi) + log_det)

    def log_and_blobs(self, thetas: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Vectorised core: log density and blob records of many vectors."""
        thetas = np.atleast_2d(np.asarray(thetas, dtype=float))
        inv_chol, norm = self._factors
        white = (thetas - np.asarray(self.mean)) @ inv_chol.T
        chi2 = np.sum(white**2, axis=-1)
        lo = np.asarray(self.low) if self.low else np.full(len(self.mean), -np.inf)
        hi = np.asarray(self.high) if self.high else np.full(len(self.mean), np.inf)
        inside = np.all((thetas >= lo) & (thetas <= hi), axis=-1)
        log_p = np.where(inside, norm - 0.5 * chi2, -np.inf)
        blobs = np.zeros(len(thetas), dtype=self.blob_dtype)
        blobs["chi2"], blobs["total"] = chi2, thetas.sum(axis=-1)
        blobs["reason"] = np.where(inside, REASON_OK, 1)
        return log_p, blobs

    def __call__(self, theta: np.ndarray) -> tuple[float, tuple]:
        log_p, blobs = self.log_and_blobs(theta)
        return float(log_p[0]), tuple(blobs[0].tolist())

    def batch(self, thetas: np.ndarray) -> list[tuple[float, tuple]]:
        log_p, blobs = self.log_and_blobs(thetas)
        return [(float(lp), tuple(b)) for lp, b in zip(log_p, blobs.tolist())]


def prepare_target(target: TargetBase) -> None:
    """Pool initializer: load the target's data once in this worker."""
    target.prepare()
