"""The frozen record of every PBH convention; returned with every result."""
from __future__ import annotations

from dataclasses import asdict, dataclass

from scan.errors import ConfigError
from scan.observables.pbh.thresholds import C_MAX
from scan.observables.pbh.variance import WINDOWS

CRITERIA: tuple[str, ...] = ("compaction", "press-schechter", "peaks")
MASS_FUNCTIONS: tuple[str, ...] = ("critical", "monochromatic")


#: An abundance below this makes no PBHs to speak of: 1e-30 is ~20 orders of magnitude below
#: the tightest f_PBH limits (used by the surrogate's validation report and by ``verify``).
NEGLIGIBLE_FPBH = 1e-30


@dataclass(frozen=True)
class PBHConventions:
    """How PBH abundances are computed.  Thresholds are window-specific: record both.

    Attributes
    ----------
    window : str
        ``"gaussian"`` (default) or ``"top-hat"`` (real space) smoothing of sigma^2(R).
    criterion : str
        ``"compaction"``: C = C_l - (3/8) C_l^2 > C_th, C_l Gaussian, type I (C_l < 4/3)
        (Young, Musco & Byrnes 2019); ``"press-schechter"``: linear delta > delta_c;
        ``"peaks"``: BBKS high-peak number density of linear delta above delta_c.
    threshold : float [1]
        C_th for ``compaction``, delta_c otherwise.
    mass_function : str
        ``"critical"``: M = K M_H (C - C_th)^gamma_c, integrated over formation epochs
        d ln M_H; ``"monochromatic"``: M = gamma M_H (Carr et al. 2010).
    gamma_c, K : float [1]
        Critical-collapse exponent and coefficient (Niemeyer & Jedamzik 1998,
        astro-ph/9709072: K ~ 3.3; Evans & Coleman 1994, Koike et al. 1995: 0.36).
    gamma : float [1]
        M / M_H for the monochromatic mass function.
    ps_factor : float [1]
        Multiplies Gaussian probabilities (2 = Press-Schechter's factor as in Carr et
        al. 2010, beta = erfc(nu/sqrt 2); 1 = the plain Gaussian probability).
    omega_dm_h2 : float [1]
        Dark-matter density normalising f_PBH.
    """

    window: str = "gaussian"
    criterion: str = "compaction"
    threshold: float = 0.5
    mass_function: str = "critical"
    gamma_c: float = 0.36
    K: float = 3.3
    gamma: float = 0.2
    ps_factor: float = 1.0
    omega_dm_h2: float = 0.12

    def __post_init__(self) -> None:
        _choice("window", self.window, WINDOWS)
        _choice("criterion", self.criterion, CRITERIA)
        _choice("mass_function", self.mass_function, MASS_FUNCTIONS)
        for name in ("threshold", "gamma_c", "K", "gamma", "ps_factor", "omega_dm_h2"):
            if not getattr(self, name) > 0:
                raise ConfigError("PBH conventions", name, f"must be positive, got "
                                  f"{getattr(self, name)}")
        if self.criterion == "compaction" and self.threshold >= C_MAX:
            raise ConfigError("PBH conventions", "threshold", "the compaction threshold "
                              f"C_th must be below 2/3 (type I), got {self.threshold}")

    def as_attrs(self) -> dict:
        """The conventions as a flat dict (for HDF5 attributes)."""
        return asdict(self)


def _choice(name: str, value: str, options: tuple[str, ...]) -> None:
    """Raise a ConfigError unless ``value`` is one of ``options``."""
    if value not in options:
        raise ConfigError("PBH conventions", name, f"'{value}' is not one of {options}")
