"""Compression of the spectrum shape around the peak: principal components via numpy SVD.

The shape ``s(x) = log10 P(k_peak e^x) - log10 P_peak`` of every valid training point is
one row; the rows are centred and decomposed, and each shape is kept as a few
coefficients on the leading components.  Pure functions only.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ShapeBasis:
    """Mean shape and principal components on the shape grid.

    Attributes
    ----------
    x : ndarray, shape (n_x,)
        Grid of ln(k/k_peak).
    mean : ndarray, shape (n_x,)
        Mean training shape [dex].
    components : ndarray, shape (q, n_x)
        Orthonormal principal components (rows).
    max_error : float
        Largest |reconstruction error| over the training shapes [dex].
    """

    x: np.ndarray
    mean: np.ndarray
    components: np.ndarray
    max_error: float


def fill_missing(shapes: np.ndarray) -> np.ndarray:
    """Replace nan (grid points outside the solved k range) by the nearest finite value.

    A row without any finite value becomes all zeros.
    """
    out = np.array(shapes, float, copy=True)
    idx = np.arange(out.shape[1])
    for row in out:
        good = np.isfinite(row)
        if not good.any():
            row[:] = 0.0
        elif not good.all():
            row[~good] = np.interp(idx[~good], idx[good], row[good])
    return out


def fit_basis(x: np.ndarray, shapes: np.ndarray, max_components: int,
              tolerance: float) -> ShapeBasis:
    """The fewest leading components (up to ``max_components``) reproducing all shapes.

    Parameters
    ----------
    x : ndarray, shape (n_x,)
        Shape grid ln(k/k_peak).
    shapes : ndarray, shape (n, n_x)
        Training shapes [dex] (nan filled by :func:`fill_missing`).
    max_components : int
        Upper limit on the number of components.
    tolerance : float
        Stop adding components once max |error| <= tolerance [dex].
    """
    data = fill_missing(shapes)
    mean = data.mean(0)
    centred = data - mean
    _, _, vt = np.linalg.svd(centred, full_matrices=False)
    limit = max(1, min(int(max_components), vt.shape[0]))
    error = np.inf
    for q in range(1, limit + 1):
        comps = vt[:q]
        error = float(np.max(np.abs(centred - (centred @ comps.T) @ comps), initial=0.0))
        if error <= tolerance:
            break
    return ShapeBasis(np.asarray(x, float), mean, comps, error)


def encode(basis: ShapeBasis, shapes: np.ndarray) -> np.ndarray:
    """Coefficients (n, q) of shapes (n, n_x) on the basis."""
    return (fill_missing(shapes) - basis.mean) @ basis.components.T


def decode(basis: ShapeBasis, coefficients: np.ndarray) -> np.ndarray:
    """Shapes (n, n_x) [dex] from coefficients (n, q)."""
    return basis.mean + np.atleast_2d(coefficients) @ basis.components
