"""Numerical settings of the mode solver (frozen, validated once)."""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ModeSettings:
    """Accuracy and validity settings.

    Attributes
    ----------
    x_in : float
        k/(aH) at which Bunch-Davies (de Sitter corrected) data are set (default 100).
    x_out : float
        k/(aH) below which a mode counts as frozen (default 1e-3; residual ~ x_out^2).
    rtol : float
        DOP853 relative tolerance.
    atol_factor : float
        Absolute tolerance = rtol * atol_factor on the per-mode rescaled variables (O(1)).
    settle_efolds : float
        E-folds integrated past the last non-attractor phase (eps2 < eps2_attractor).
    eps2_attractor : float
        eps2 below this marks a non-attractor phase (slightly below 0 to ignore noise).
    table_tol : float
        Midpoint accuracy of the background table in ln eps1 and ln H.
    p_zeta_max : float
        P_zeta at or above this marks the stochastic regime (result invalid).
    diffusion_max : float
        V0 H^2/(8 pi^2 eps1) at or above this anywhere in the range marks it too.
    """

    x_in: float = 100.0
    x_out: float = 1e-3
    rtol: float = 1e-9
    atol_factor: float = 1e-4
    settle_efolds: float = 4.0
    eps2_attractor: float = -1e-3
    table_tol: float = 1e-10
    p_zeta_max: float = 0.1
    diffusion_max: float = 1.0

    def __post_init__(self) -> None:
        if not self.x_in > 1.0:
            raise ValueError(f"x_in = {self.x_in} must exceed 1 (modes start inside the horizon)")
        if not 0.0 < self.x_out < 1.0:
            raise ValueError(f"x_out = {self.x_out} must lie in (0, 1)")
        if not 0.0 < self.rtol < 1e-3:
            raise ValueError(f"rtol = {self.rtol} must lie in (0, 1e-3)")
        if self.settle_efolds < 0.0:
            raise ValueError("settle_efolds must be >= 0")

    def tightened(self, factor: float = 2.0) -> "ModeSettings":
        """A copy with tolerances divided and x_in multiplied by ``factor`` (convergence checks)."""
        from dataclasses import replace
        return replace(self, rtol=self.rtol / factor, x_in=self.x_in * factor,
                       table_tol=self.table_tol / factor)
