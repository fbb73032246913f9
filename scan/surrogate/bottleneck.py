"""The bottleneck coordinate: an extra emulator input that is singular at the validity boundary.

Why
---
Models that enhance P_zeta by slowing the inflaton (a kinetic pole, an inflection point)
have, next to them in parameter space, models whose inflaton gets stuck and never ends
inflation.  Between the two the flow has a saddle-node ("ghost") bottleneck: for
dx/dN = r + x^2 the time to pass is int dx/(r + x^2) = pi/sqrt(r), so the e-folds spent
in the feature grow like (distance to the boundary)^(-1/2) (Strogatz 2015, *Nonlinear
Dynamics and Chaos*, 2nd ed., section 4.3).  The e-folds in the feature set where the
peak sits (ln k_peak) and how high it is (log10 P_peak), so both are singular functions of
the parameters near the boundary — which a stationary kernel can only follow by shortening
its length scales everywhere.  Measured on the pole scan (``configs/pole_scan.toml``,
96 held-out exact solves): the 95th percentile of |d ln k_peak| went from 0.017 to 0.002
and of |d log10 P_peak| from 0.0075 to 0.001 dex when the peak block got this input.

What
----
The boundary is located as a plane in the unit cube by a (lightly regularised) logistic
regression of the validity labels; ``s(u)`` is the signed distance to it (> 0 on the
valid side).  The extra input is

    tau(u) = sqrt(eps / (max(s(u) - s_min, 0) + eps))   in (0, 1],

with s_min the smallest distance of a valid training point and the softening ``eps`` a
hyperparameter chosen by the leave-one-out error (:mod:`scan.surrogate.emulator`), as is
whether to use tau at all (a model without such a boundary simply gets no extra input).
All functions here are pure.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.optimize

#: Softenings eps (unit-cube distance) tried by the emulator fit.
SOFTENINGS: tuple[float, ...] = (0.003, 0.01, 0.03, 0.1)
#: Fewest points of each label needed to place a boundary.
MIN_PER_LABEL = 3
_RIDGE = 1e-6


@dataclass(frozen=True)
class Bottleneck:
    """The coordinate tau(u) (see the module docstring).

    Attributes
    ----------
    normal : ndarray, shape (d,)
        Unit normal of the boundary plane in the unit cube, pointing to the valid side.
    offset : float
        ``s(u) = u @ normal + offset``.
    s_min : float
        Smallest ``s`` of a valid training point.
    softening : float
        eps [unit-cube distance].
    """

    normal: np.ndarray
    offset: float
    s_min: float
    softening: float

    def distance(self, u: np.ndarray) -> np.ndarray:
        """Signed distance s(u) to the boundary plane, shape (p,) (> 0: valid side)."""
        return np.atleast_2d(u) @ self.normal + self.offset

    def coordinate(self, u: np.ndarray) -> np.ndarray:
        """tau(u), shape (p,): 1 at and beyond the boundary, falling off inside."""
        excess = np.maximum(self.distance(u) - self.s_min, 0.0)
        return np.sqrt(self.softening / (excess + self.softening))


def augment(u: np.ndarray, bottleneck: Bottleneck | None) -> np.ndarray:
    """Emulator inputs: ``u`` (p, d), with tau(u) appended as a last column if given."""
    u = np.atleast_2d(np.asarray(u, float))
    if bottleneck is None:
        return u
    return np.hstack([u, bottleneck.coordinate(u)[:, None]])


def boundary_plane(u: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, float] | None:
    """The plane that best separates valid from invalid points (logistic regression).

    Parameters
    ----------
    u : ndarray, shape (n, d)
        Unit-cube points.
    valid : ndarray of bool, shape (n,)

    Returns
    -------
    (normal, offset) or None
        Unit normal (pointing to the valid side) and offset of ``s = u @ normal + offset``;
        None with fewer than :data:`MIN_PER_LABEL` points of either label.
    """
    u = np.atleast_2d(np.asarray(u, float))
    label = np.asarray(valid, bool).astype(float)
    if min(label.sum(), (1 - label).sum()) < MIN_PER_LABEL:
        return None
    design = np.hstack([np.ones((len(u), 1)), u])

    def loss(coef: np.ndarray) -> tuple[float, np.ndarray]:
        z = design @ coef
        prob = 0.5 * (1.0 + np.tanh(0.5 * z))          # the logistic function, overflow-free
        value = np.sum(np.logaddexp(0.0, z) - label * z) + _RIDGE * coef[1:] @ coef[1:]
        grad = design.T @ (prob - label)
        grad[1:] += 2.0 * _RIDGE * coef[1:]
        return float(value), grad

    coef = scipy.optimize.minimize(loss, np.zeros(design.shape[1]), jac=True,
                                   method="BFGS").x
    norm = float(np.linalg.norm(coef[1:]))
    if not np.isfinite(norm) or norm == 0.0:
        return None
    return coef[1:] / norm, float(coef[0] / norm)


def candidates(u: np.ndarray, valid: np.ndarray,
               softenings: tuple[float, ...] = SOFTENINGS) -> list[Bottleneck]:
    """One :class:`Bottleneck` per softening (empty if no boundary can be placed)."""
    plane = boundary_plane(u, valid)
    if plane is None:
        return []
    normal, offset = plane
    s_min = float(np.min(np.atleast_2d(u)[np.asarray(valid, bool)] @ normal + offset))
    return [Bottleneck(normal, offset, s_min, float(eps)) for eps in softenings]
