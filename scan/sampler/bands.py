"""Posterior bands of Ω_GW h²(f) and f_PBH(M): percentiles of curves over posterior samples.

Two layers:

* :func:`percentile_bands` (pure): every sample's curve, given on its own abscissae, is
  interpolated linearly in (log10 x, log10 y) onto a common grid, and the 2.5, 16, 50,
  84 and 97.5 percentiles are taken at every grid point;
* :func:`posterior_bands`: ``n`` samples drawn (fixed seed) from a chain file's samples
  after its burn-in and thinning, their surrogate observables evaluated with the run's own
  posterior target, and the bands of both observables.

The plotting floor
------------------
Before taking logs each value becomes ``max(y, floor)`` (zeros and negative values too).
Clipping is monotone, so every percentile that lies above the floor is exactly the
percentile of the unclipped values; a percentile *at* the floor means "at or below the
floor".  Outside the abscissae a sample was computed on, its value is unknown and is
counted at the floor: the bands there are lower bounds.  The same holds for exact zeros
when ``zeros_unknown`` is set: the posterior target puts every walker's Ω_GW h² on one
shared frequency grid with Ω = 0 outside the window computed around its peak, while a
computed Ω_GW is always positive.  (For f_PBH an exact zero is an underflow of a
negligible abundance, i.e. genuinely below the floor.)  :attr:`Bands.coverage` records
the fraction of samples known at each abscissa.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from scan.config import load_config_text
from scan.config.priors import PriorSet
from scan.errors import InputFileError
from scan.posterior.build import posterior_target
from scan.sampler import runfile
from scan.sampler.summary import posterior_samples

#: Percentiles of a band [%]: the central 95 % and 68 % intervals and the median.
PERCENTILES: tuple[float, ...] = (2.5, 16.0, 50.0, 84.0, 97.5)
#: Default plotting floor of Ω_GW h² [1]: far below any planned detector's reach.
GW_FLOOR: float = 1e-25
#: Default plotting floor of d f_PBH / d ln M [1].
PBH_FLOOR: float = 1e-30
#: Default number of posterior samples drawn for the bands.
N_SAMPLES: int = 200
#: Default seed of the draw (fixed: the same chain gives the same figure).
SEED: int = 0
#: Mass points wanted within 1 dex of each sample's f_PBH maximum.  Linear interpolation
#: in (ln M, ln f) of a peak Gaussian in ln M misses its height by at most
#: (Δ/2)²/(2s²) for node spacing Δ; the 1-dex part spans 2s·sqrt(2 ln 10) = 4.29 s, so
#: N points there give Δ = 4.29 s/N and a peak error of 2.30/N² in ln f: 1 % at N = 15.
PEAK_POINTS: int = 15
#: Largest mass grid the refinement may ask the posterior target for.
MAX_MASSES: int = 4096


@dataclasses.dataclass(frozen=True)
class Bands:
    """Percentiles of a family of curves on a common grid.

    Attributes
    ----------
    x : ndarray
        The common abscissae (Hz or M_sun), increasing.
    values : ndarray, shape (5, len(x))
        Linear values of the :data:`PERCENTILES`, in that order (never below ``floor``).
    floor : float
        The plotting floor (see the module docstring).
    n_samples : int
        Curves the percentiles were taken over.
    coverage : ndarray, shape (len(x),)
        Fraction of the samples computed at each x; where it is below 1 the percentiles
        are lower bounds (see the module docstring).
    """

    x: np.ndarray
    values: np.ndarray
    floor: float
    n_samples: int
    coverage: np.ndarray

    def percentile(self, p: float) -> np.ndarray:
        """The band of percentile ``p`` [%] (one of :data:`PERCENTILES`)."""
        return self.values[PERCENTILES.index(float(p))]

    @property
    def median(self) -> np.ndarray:
        """The 50th percentile."""
        return self.percentile(50.0)


def common_grid(xs: Sequence[np.ndarray], n: int = 240,
                ys: Sequence[np.ndarray] | None = None, n_peak: int = 4 * PEAK_POINTS
                ) -> np.ndarray:
    """``n`` log-spaced abscissae over the union of the samples' ranges (positive x), and
    with ``ys`` ``n_peak`` more over the union of the samples' peaks (where a sample lies
    within 1 dex of its own maximum)."""
    lo = min(float(np.min(x[x > 0])) for x in xs)
    hi = max(float(np.max(x)) for x in xs)
    grid = np.geomspace(lo, hi, n)
    if ys is not None:
        near = [np.asarray(x)[(y >= 0.1 * y.max()) & (x > 0)] for x, y in zip(xs, ys)
                if np.max(y) > 0]
        if near:
            peak_lo = min(float(v.min()) for v in near)
            peak_hi = max(float(v.max()) for v in near)
            grid = np.union1d(grid, np.geomspace(peak_lo, peak_hi, n_peak))
    return grid


def peak_points(ys: Sequence[np.ndarray]) -> float:
    """Median number of points within 1 dex of each curve's maximum (positive curves)."""
    counts = [int(np.sum(y >= 0.1 * y.max())) for y in map(np.asarray, ys) if y.max() > 0]
    return float(np.median(counts)) if counts else float("nan")


def _masses_for_peaks(n_mass: int, points: float) -> int:
    """A mass-grid size giving :data:`PEAK_POINTS` near the peaks (uniform log grid)."""
    if not np.isfinite(points) or points >= PEAK_POINTS:
        return n_mass
    return int(min(MAX_MASSES, np.ceil(1.2 * n_mass * PEAK_POINTS / max(points - 1, 0.5))))


def percentile_bands(xs: Sequence[np.ndarray], ys: Sequence[np.ndarray], grid: np.ndarray,
                     floor: float, zeros_unknown: bool = False) -> Bands:
    """Percentile bands of curves ``(xs[i], ys[i])`` on ``grid`` (see the module docstring).

    Parameters
    ----------
    xs, ys : sequences of ndarray
        Each sample's increasing positive abscissae and its values (linear).
    grid : ndarray
        Common positive abscissae.
    floor : float
        Positive plotting floor.
    zeros_unknown : bool
        Exact zeros mark values that were not computed (they still count at the floor,
        but lower the coverage).

    Returns
    -------
    Bands

    Raises
    ------
    ValueError
        No samples, mismatched lengths or a non-positive floor.
    """
    if not len(xs) or len(xs) != len(ys):
        raise ValueError(f"need matching, non-empty samples (got {len(xs)} x, {len(ys)} y)")
    if not floor > 0:
        raise ValueError(f"the floor must be positive, got {floor}")
    log_floor = np.log10(floor)
    log_grid = np.log10(np.asarray(grid, float))
    rows = np.empty((len(xs), len(log_grid)))
    covered = np.zeros(len(log_grid))
    for i, (x, y) in enumerate(zip(xs, ys)):
        x, y = np.asarray(x, float), np.asarray(y, float)
        known = (y > 0) if zeros_unknown else np.ones(y.shape, bool)
        covered += np.interp(log_grid, np.log10(x), known.astype(float), left=0.0,
                             right=0.0) >= 1.0
        with np.errstate(divide="ignore", invalid="ignore"):
            log_y = np.log10(np.maximum(np.nan_to_num(y, nan=0.0), floor))
        rows[i] = np.interp(log_grid, np.log10(x), log_y, left=log_floor, right=log_floor)
    values = 10.0 ** np.percentile(rows, PERCENTILES, axis=0)
    return Bands(np.asarray(grid, float), np.maximum(values, floor), float(floor), len(xs),
                 covered / len(xs))


# --------------------------------------------------------------------------- posterior side
@dataclasses.dataclass(frozen=True)
class PosteriorBands:
    """Bands of one chain's posterior samples.

    Attributes
    ----------
    gw : Bands
        Ω_GW h² against f [Hz].
    pbh : Bands
        d f_PBH / d ln M against M [M_sun].
    peak_points : float
        Median number of mass points within 1 dex of a sample's f_PBH maximum
        (:data:`PEAK_POINTS` wanted).
    drawn : int
        Samples drawn from the chain (after burn-in and thinning).
    used : int
        Drawn samples with valid surrogate observables (the bands' ``n_samples``).
    available : int
        Samples the chain holds after burn-in and thinning.
    seed : int
        Seed of the draw.
    """

    gw: Bands
    pbh: Bands
    peak_points: float
    drawn: int
    used: int
    available: int
    seed: int


def draw_indices(available: int, n: int, seed: int) -> np.ndarray:
    """``min(n, available)`` distinct indices into ``available`` samples, chosen with
    ``numpy.random.default_rng(seed)``, increasing."""
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(available, size=min(int(n), available), replace=False))


def chain_target(path: str | Path):
    """The posterior target a chain file was sampled with (rebuilt from its stored config).

    Raises
    ------
    InputFileError
        The chain sampled a target without observables (``gaussian_test``).
    ConfigError
        The stored config's curves or surrogate cannot be found from here.
    """

    stored = runfile.read(path)
    config = load_config_text(stored.config_text, f"{path} (stored config)",
                              stored.overrides, stored.run_name, stored.base_dir)
    if config.sampler.target != "posterior":
        raise InputFileError(str(path), f"the chain samples the '{config.sampler.target}' "
                             "target, which has no observables; posterior bands need a run "
                             "with sampler.target = \"posterior\"")
    return posterior_target(config, PriorSet.from_config(config))


def posterior_bands(path: str | Path, n: int = N_SAMPLES, seed: int = SEED,
                    gw_floor: float = GW_FLOOR, pbh_floor: float = PBH_FLOOR,
                    target=None) -> PosteriorBands:
    """Bands of Ω_GW h² and f_PBH of ``n`` posterior samples of a chain file.

    ``target`` (default: :func:`chain_target` of ``path``) evaluates the observables.

    Raises
    ------
    InputFileError
        No samples after burn-in and thinning, or a chain without observables.
    """

    post = posterior_samples(path)
    if not len(post["samples"]):
        raise InputFileError(str(path), f"no samples after burn-in {post['burn_in']} and "
                             f"thinning {post['thin']}: run the chain longer "
                             "(zetascan sample CONFIG resumes it)")
    thetas = post["samples"][draw_indices(len(post["samples"]), n, seed)]
    target = chain_target(path) if target is None else target
    obs = _valid_observables(path, target, thetas)
    points = peak_points([o.f_pbh_per_lnm for o in obs])
    wanted = _masses_for_peaks(getattr(target, "n_mass", 0), points)
    if wanted > getattr(target, "n_mass", wanted):  # refine the mass grid for the peaks
        target = dataclasses.replace(target, n_mass=wanted)
        obs = _valid_observables(path, target, thetas)
        points = peak_points([o.f_pbh_per_lnm for o in obs])
    f = [o.f_hz for o in obs]
    omega = [o.omega_gw_h2 for o in obs]
    gw = percentile_bands(f, omega, common_grid(f, ys=omega), gw_floor, zeros_unknown=True)
    m = [o.m_msun for o in obs]
    mass_f = [o.f_pbh_per_lnm for o in obs]
    pbh = percentile_bands(m, mass_f, common_grid(m, len(m[0]), ys=mass_f), pbh_floor)
    return PosteriorBands(gw, pbh, points, len(thetas), len(obs), len(post["samples"]),
                          int(seed))


def _valid_observables(path, target, thetas) -> list:
    """The target's observables of ``thetas``, invalid ones left out.

    Raises
    ------
    InputFileError
        None valid.
    """
    _, obs = target.observables(thetas)
    obs = [o for o in obs if o is not None]
    if not obs:
        raise InputFileError(str(path), "none of the drawn samples has valid surrogate "
                             "observables (was the surrogate retrained since the run?)")
    return obs
