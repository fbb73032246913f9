"""A prior on a pole's physical width while sampling its wall coordinate.

A pole given by its wall coordinate c (``wall_ratio`` ρ = λ/λ_w, or ``wall_distance``
δ = ρ − 1) has the width w = w_w/ρ(c), with w_w the width at the wall (λ = λ_w; it
depends on the pole's position and power and on the other poles, never on c).  A
``[[parameters]]`` entry of c with a ``width_prior`` table samples c inside the entry's
own box but states the prior on w: the density in c is the change of variables

    π_c(c) = π_w(w_w/ρ(c)) |∂w/∂c|,    |∂w/∂c| = w_w |dρ/dc| / ρ²,

which needs w_w (the exact solve's, or the surrogate's emulated ln w_w).  For a
log-uniform π_w on [a, b] it is 1/(ρ ln(b/a)) for a ≤ w ≤ b: the bounds move with w_w.
The entry's own prior only sets the box and how points are spread in it (unit-cube
transforms, training designs, nested sampling); :meth:`MappedWidthPrior.log_ratio` is
what replaces its density in the posterior.  Mass of π_w outside the box counts as zero
likelihood (no renormalisation per w_w), so an evidence uses the normalised width prior.
"""
from __future__ import annotations

import dataclasses
import re
from typing import Any

import numpy as np

#: Wall coordinates of a pole: name -> (ρ(c), dρ/dc) as functions of arrays, and ρ in words.
WALL_COORDINATES = {
    "wall_ratio": (lambda c: c, lambda c: np.ones_like(c), "wall_ratio"),
    "wall_distance": (lambda c: 1.0 + c, lambda c: np.ones_like(c), "1 + wall_distance"),
}
_POLE_KEY = re.compile(r"^model\.poles\[(\d+)\]\.(\w+)$")


def ratio_of_pole(pole) -> float | None:
    """ρ = λ/λ_w of a ``[[model.poles]]`` section given by a wall coordinate (else None)."""
    for name, (rho, *_) in WALL_COORDINATES.items():
        value = getattr(pole, name, None)
        if value is not None:
            return float(rho(np.asarray(value, float)))
    return None


def wall_coordinate_of(key: str) -> tuple[int, str] | None:
    """``(pole, coordinate name)`` if ``key`` is a pole's wall coordinate, else None."""
    match = _POLE_KEY.match(key)
    if match is None or match.group(2) not in WALL_COORDINATES:
        return None
    return int(match.group(1)), match.group(2)


@dataclasses.dataclass(frozen=True)
class MappedWidthPrior:
    """The width prior of one sampled wall coordinate.

    Parameters
    ----------
    index : int
        Position of the coordinate in the sampled vector.
    key : str
        Its config key, e.g. ``"model.poles[0].wall_ratio"``.
    coordinate : str
        ``"wall_ratio"`` or ``"wall_distance"`` (a key of :data:`WALL_COORDINATES`).
    width : Prior
        The prior on the width w [M_p] (:class:`scan.config.priors.Prior`).
    box : Prior
        The coordinate's own prior (its box; its density is replaced).
    """

    index: int
    key: str
    coordinate: str
    width: Any
    box: Any

    def widths(self, c: np.ndarray, ln_wall_width: np.ndarray) -> np.ndarray:
        """w = w_w/ρ(c) [M_p] for coordinates ``c`` and ln w_w [ln M_p]."""
        rho = WALL_COORDINATES[self.coordinate][0](np.asarray(c, float))
        return np.exp(np.asarray(ln_wall_width, float)) / rho

    def log_density(self, c: np.ndarray, ln_wall_width: np.ndarray) -> np.ndarray:
        """ln π_w(w(c)) + ln|∂w/∂c|: the width prior as a density in c [ln of 1/c-units].

        ``-inf`` where w is outside the width prior's support or ln w_w is not finite.
        """
        c = np.asarray(c, float)
        ln_ww = np.asarray(ln_wall_width, float)
        rho_of, slope_of, _ = WALL_COORDINATES[self.coordinate]
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = rho_of(c)
            ln_jacobian = ln_ww + np.log(np.abs(slope_of(c))) - 2.0 * np.log(rho)
            value = self.width.log_pdf(np.exp(ln_ww) / rho) + ln_jacobian
        return np.where(np.isfinite(value) & (rho > 0), value, -np.inf)

    def log_ratio(self, c: np.ndarray, ln_wall_width: np.ndarray) -> np.ndarray:
        """:meth:`log_density` minus the box prior's log density (added to the box's)."""
        box = self.box.log_pdf(np.asarray(c, float))
        with np.errstate(invalid="ignore"):
            ratio = self.log_density(c, ln_wall_width) - box
        return np.where(np.isfinite(box), ratio, -np.inf)

    def kept_mass(self, ln_wall_width: np.ndarray) -> np.ndarray:
        """Share of the width prior's mass inside the sampled box, per ln w_w [ln M_p].

        The box [c_lo, c_hi] holds the widths [w_w/ρ(c_hi), w_w/ρ(c_lo)]; the rest of the
        width prior counts as zero likelihood.
        """
        ww = np.exp(np.asarray(ln_wall_width, float))
        rho_of = WALL_COORDINATES[self.coordinate][0]
        rho = rho_of(np.array([self.box.low, self.box.high], float))

        def cdf(w: np.ndarray) -> np.ndarray:
            return np.clip(self.width.to_unit(w), 0.0, 1.0)

        return cdf(ww / rho[0]) - cdf(ww / rho[1])

    def attributes(self) -> dict[str, object]:
        """What a chain or posterior file records about the mapping (HDF5 attributes)."""
        w = self.width
        return {"width_prior_key": self.key, "width_prior_kind": w.kind,
                "width_prior_low": w.low, "width_prior_high": w.high,
                "width_prior_mean": w.mean, "width_prior_sigma": w.sigma,
                "width_prior_map": f"w = w_w / rho, rho = {WALL_COORDINATES[self.coordinate][2]}",
                "width_prior_jacobian": "|dw/dc| = w_w / rho^2 applied; w_w from the "
                                        "surrogate's ln_wall_width (sample) or the exact "
                                        "wall (verify)",
                "width_prior_normalisation": "not renormalised per w_w: width-prior mass "
                                             "outside the sampled box counts as zero "
                                             "likelihood (an evidence uses the normalised "
                                             "width prior)"}
