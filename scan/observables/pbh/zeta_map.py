"""The curvature perturbation as a local function of a Gaussian field, zeta = F(zeta_G).

Four conventions (the ``[observables]`` key ``non_gaussianity``):

* ``gaussian``: F(zeta_G) = zeta_G (today's result);
* ``local``: F = zeta_G + (3/5) f_NL (zeta_G^2 - <zeta_G^2>) + (9/25) g_NL zeta_G^3, the
  usual local expansion (e.g. Ferrante, Franciolini, Iovino & Urbano 2023,
  arXiv:2211.01728);
* ``logarithmic``: F = -ln(1 - lambda zeta_G) / lambda, the one-logarithm delta-N result of
  an ultra-slow-roll phase followed by slow roll (Cai, Chen, Namjoo, Sasaki, Wang & Wang
  2018, arXiv:1712.09998; Pi & Sasaki 2022, arXiv:2211.13932).  Its expansion has
  f_NL = 5 lambda / 6: lambda = 3 for a USR phase ending abruptly (f_NL = 5/2, Namjoo,
  Firouzjahi & Sasaki 2013, arXiv:1210.3692).  For lambda zeta_G >= 1 the field never
  leaves the plateau in that patch (F is undefined: no type-I black hole is counted).
  With a finite ``slope_max`` the slope F' = 1/(1 - lambda zeta_G) is capped there and
  F continues linearly (the *capped logarithmic* map, our two-parameter representation
  of a model's delta-N map on the sampler's path, :mod:`scan.observables.pbh.map_fit`);
* ``model``: F tabulated by a non-perturbative delta-N computation on the model's own
  background (:mod:`scan.observables.pbh.deltan`), interpolated by a cubic spline and
  continued linearly outside the table.

The compaction function only needs the slope F'(zeta_G) (C_l = C_G F'(zeta_G)), which
:meth:`ZetaMap.slope` returns (NaN where F is undefined).  Units: all quantities [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.interpolate import CubicSpline

from scan.errors import ConfigError

NON_GAUSSIANITIES: tuple[str, ...] = ("gaussian", "local", "logarithmic", "model")


@dataclass(frozen=True, eq=False)
class ZetaMap:
    """zeta = F(zeta_G) in one of :data:`NON_GAUSSIANITIES`.

    Attributes
    ----------
    kind : str
        ``gaussian``, ``local``, ``logarithmic`` or ``model``.
    f_nl, g_nl : float [1]
        Local coefficients (``local``); for ``model``, ``f_nl`` is the delta-N fit's f_NL
        at the peak (0: take it from the spline).
    log_lambda : float [1]
        lambda of the logarithmic mapping (``logarithmic``).
    slope_max : float [1]
        Cap of F' of the logarithmic map (> 1; inf: the plain map).  On the stacked path
        (:mod:`scan.observables.pbh.ng_stack`) ``log_lambda`` and ``slope_max`` may be
        arrays, one per spectrum; the methods here take numbers.
    zeta_g, zeta : ndarray [1] or None
        The tabulated map (``model``): increasing zeta_G and F(zeta_G).
    """

    kind: str = "gaussian"
    f_nl: float = 0.0
    g_nl: float = 0.0
    log_lambda: float = 0.0
    slope_max: float = math.inf
    zeta_g: np.ndarray | None = None
    zeta: np.ndarray | None = None

    def __post_init__(self) -> None:
        if self.kind not in NON_GAUSSIANITIES:
            raise ConfigError("[observables]", "non_gaussianity", f"'{self.kind}' is not one "
                              f"of {NON_GAUSSIANITIES}")
        if self.kind == "model":
            _check_table(self.zeta_g, self.zeta)

    @property
    def is_gaussian(self) -> bool:
        """True for the identity map."""
        return self.kind == "gaussian"

    def value(self, zeta_g) -> np.ndarray:
        """F(zeta_G) [1] (NaN where undefined; the local map omits the constant -<zeta_G^2>)."""
        x = np.asarray(zeta_g, dtype=float)
        if self.kind == "gaussian":
            return x.copy()
        if self.kind == "local":
            return x + 0.6 * self.f_nl * x * x + 0.36 * self.g_nl * x**3
        if self.kind == "logarithmic":
            return _capped(x, self.log_lambda, self.slope_max, 0)
        return _linear_ends(self._spline(), self.zeta_g, x, 0)

    def slope(self, zeta_g) -> np.ndarray:
        """F'(zeta_G) [1] (NaN where F is undefined)."""
        x = np.asarray(zeta_g, dtype=float)
        if self.kind == "gaussian":
            return np.ones_like(x)
        if self.kind == "local":
            return 1 + 1.2 * self.f_nl * x + 1.08 * self.g_nl * x * x
        if self.kind == "logarithmic":
            return _capped(x, self.log_lambda, self.slope_max, 1)
        return _linear_ends(self._spline(), self.zeta_g, x, 1)

    def domain(self) -> tuple[float, float]:
        """(lower, upper) zeta_G [1] where F is defined: lambda zeta_G < 1 for the
        logarithmic map, everything otherwise."""
        if self.kind == "logarithmic" and self.log_lambda != 0 \
                and not math.isfinite(self.slope_max):
            edge = 1 / self.log_lambda
            return (-math.inf, edge) if edge > 0 else (edge, math.inf)
        return -math.inf, math.inf

    def f_nl_equivalent(self) -> float:
        """The quadratic coefficient as f_NL = (5/6) F''(0)/F'(0)^2 [1]."""
        if self.kind == "gaussian":
            return 0.0
        if self.kind == "local":
            return self.f_nl
        if self.kind == "logarithmic":
            return 5 * self.log_lambda / 6
        if self.f_nl != 0.0:
            return self.f_nl
        s = self._spline()
        return float(5 / 6 * s(0.0, 2) / s(0.0, 1)**2)

    def as_attrs(self) -> dict:
        """The convention as flat HDF5 attributes (the table is stored separately)."""
        attrs = {"non_gaussianity": self.kind}
        if self.kind == "local":
            attrs.update(f_nl=self.f_nl, g_nl=self.g_nl)
        elif self.kind == "logarithmic":
            attrs.update(log_lambda=self.log_lambda)
            if math.isfinite(self.slope_max):
                attrs.update(slope_max=self.slope_max)
        elif self.kind == "model":
            attrs.update(f_nl_peak=self.f_nl_equivalent())
        return attrs

    def of_spectra(self, i: np.ndarray) -> ZetaMap:
        """The map of spectra ``i`` of a stack: a logarithmic map whose ``log_lambda`` or
        ``slope_max`` are arrays (one per spectrum) takes them at ``i``; others as is."""
        if self.kind != "logarithmic" or not (np.ndim(self.log_lambda)
                                              or np.ndim(self.slope_max)):
            return self
        lam, cap = np.broadcast_arrays(np.asarray(self.log_lambda, dtype=float),
                                       np.asarray(self.slope_max, dtype=float))
        return replace(self, log_lambda=lam[i], slope_max=cap[i])

    def _spline(self) -> CubicSpline:
        return _spline_of(self)


_SPLINES: dict[int, CubicSpline] = {}


def _spline_of(m: ZetaMap) -> CubicSpline:
    """The (cached) cubic spline through a model map's table."""
    key = id(m)
    if key not in _SPLINES:
        if len(_SPLINES) > 64:
            _SPLINES.clear()
        _SPLINES[key] = CubicSpline(m.zeta_g, m.zeta, bc_type="not-a-knot")
    return _SPLINES[key]


def _linear_ends(spline: CubicSpline, x_tab: np.ndarray, x: np.ndarray, nu: int) -> np.ndarray:
    """The spline (derivative ``nu``) inside the table, continued linearly outside."""
    lo, hi = float(x_tab[0]), float(x_tab[-1])
    inside = spline(np.clip(x, lo, hi), nu)
    if nu == 1:
        return np.where(x < lo, spline(lo, 1), np.where(x > hi, spline(hi, 1), inside))
    below = spline(lo) + spline(lo, 1) * (x - lo)
    above = spline(hi) + spline(hi, 1) * (x - hi)
    return np.where(x < lo, below, np.where(x > hi, above, inside))


def _log_map(x: np.ndarray, lam: float) -> np.ndarray:
    """-ln(1 - lam x)/lam (x itself for lam = 0), NaN for lam x >= 1."""
    if lam == 0:
        return x.copy()
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(lam * x < 1, -np.log1p(-lam * x) / lam, np.nan)


def _capped(x: np.ndarray, lam: float, slope_max: float, nu: int) -> np.ndarray:
    """The logarithmic map (``nu`` = 0) or its slope (1) with F' capped at ``slope_max``:
    beyond zeta_c = (1 - 1/slope_max)/lambda, F' = slope_max and F continues linearly."""
    if not math.isfinite(slope_max) or lam == 0:
        if nu == 0:
            return _log_map(x, lam)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(lam * x < 1, 1 / (1 - lam * x), np.nan)
    u_min = 1 / slope_max
    edge = (1 - u_min) / lam
    past = lam * (x - edge) > 0
    inner = np.where(past, edge, x)
    if nu == 1:
        return np.where(past, slope_max, 1 / (1 - lam * inner))
    return np.where(past, _log_map(np.asarray(edge), lam) + slope_max * (x - edge),
                    _log_map(inner, lam))


def _check_table(zeta_g, zeta) -> None:
    """A model map needs >= 4 finite points with strictly increasing zeta_G."""
    if zeta_g is None or zeta is None:
        raise ConfigError("[observables]", "non_gaussianity", "'model' needs the delta-N table "
                          "of a solved model (zetascan solve computes it; observe cannot)")
    zg, z = np.asarray(zeta_g, float), np.asarray(zeta, float)
    if zg.shape != z.shape or zg.size < 4 or not (np.all(np.isfinite(zg))
                                                  and np.all(np.isfinite(z))
                                                  and np.all(np.diff(zg) > 0)):
        raise ValueError("a model zeta map needs >= 4 finite points, zeta_G increasing")


def zeta_map_of(kind: str, *, f_nl: float = 0.0, g_nl: float = 0.0,
                log_lambda: float = 0.0) -> ZetaMap:
    """The analytic map of a convention, refusing parameters that do not belong to it.

    Raises
    ------
    ConfigError
        ``f_nl``/``g_nl`` given without ``local``, ``log_lambda`` without
        ``logarithmic``, or ``model`` (which needs a solved model's delta-N table).
    """
    given = {"f_nl": f_nl, "g_nl": g_nl, "log_lambda": log_lambda}
    allowed = {"local": ("f_nl", "g_nl"), "logarithmic": ("log_lambda",)}.get(kind, ())
    for key, value in given.items():
        if value != 0.0 and key not in allowed:
            raise ConfigError("[observables]", key, f"is set to {value:g} but non_gaussianity "
                              f"= '{kind}' does not use it",
                              f"remove it or set non_gaussianity = "
                              f"'{'local' if key != 'log_lambda' else 'logarithmic'}'")
    if kind == "logarithmic" and not (math.isfinite(log_lambda) and log_lambda != 0.0):
        raise ConfigError("[observables]", "log_lambda", "the logarithmic mapping needs a "
                          "non-zero log_lambda", "e.g. log_lambda = 3 (ultra-slow roll "
                          "ending abruptly, f_NL = 5/2)")
    return ZetaMap(kind, f_nl=f_nl, g_nl=g_nl, log_lambda=log_lambda)
