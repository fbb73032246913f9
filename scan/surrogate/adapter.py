"""The product's solve: one exact pipeline solve per parameter vector, as a TrainingRecord."""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

from scan.config import load_config_text
from scan.config.priors import apply_parameters
from scan.observables.pbh.deltan import peak_map
from scan.observables.pbh.map_fit import NG_LEVEL, fit_capped
from scan.pipeline import solve_config
from scan.pipeline.solve import wall_width
from scan.surrogate.record import TrainingRecord, invalid_record, record_from_spectrum, shape_grid


def configure(config, keys: Sequence[str], values: Sequence[float]):
    """``config`` with the parameters at ``keys`` set to ``values``.

    When ``keys`` are the config's ``[[parameters]]`` this is
    :func:`scan.config.priors.apply_parameters`; other keys go through the config's own ``--set``
    override machinery (same key paths, same validation).
    """
    declared = [p.key for p in getattr(config, "parameters", ())]
    if set(keys) <= set(declared):

        return apply_parameters(config, {k: float(v) for k, v in zip(keys, values)})

    sets = tuple(f"{key}={float(value)!r}" for key, value in zip(keys, values))
    return load_config_text(config.text, source=config.source,
                            overrides=tuple(config.overrides) + sets,
                            default_name=config.run.name, base_dir=config.base_dir)


class SolvePoint:
    """Picklable ``solve(theta) -> TrainingRecord`` for one config and parameter space.

    Parameters
    ----------
    config : RunConfig
        The base configuration (its ``[surrogate]`` section gives the shape grid).
    keys : sequence of str
        Parameter key paths, in the order of ``theta``.
    """

    def __init__(self, config, keys: Sequence[str]) -> None:
        self.config, self.keys = config, tuple(keys)
        s = config.surrogate
        self.x = shape_grid(s.shape_span, s.shape_points)

    def __call__(self, theta: np.ndarray) -> TrainingRecord:
        return solve_point(self.config, theta, self.keys, self.x)


def solve_point(config, values: Sequence[float], keys: Sequence[str] | None = None,
                x: np.ndarray | None = None) -> TrainingRecord:
    """Solve the model at one parameter vector exactly (:func:`scan.pipeline.solve_config`).

    Parameters
    ----------
    config : RunConfig
    values : sequence of float
        Parameter values in the order of ``keys`` (default: the config's parameters).
    keys : sequence of str, optional
    x : ndarray, optional
        Shape grid ln(k/k_peak) (default: from ``[surrogate]``).

    Returns
    -------
    TrainingRecord
        Invalid models (any stage) are records with ``valid=False`` and the reason.
    """

    values = np.asarray(values, float)
    if keys is None:
        keys = [p.key for p in getattr(config, "parameters", ())]
    if x is None:
        x = shape_grid(config.surrogate.shape_span, config.surrogate.shape_points)
    solved = configure(config, keys, values)
    result = solve_config(solved, with_observables=False)
    if not result.valid or result.spectrum is None:
        record = invalid_record(values, result.reason, len(x))
    else:
        record = record_from_spectrum(values, result.spectrum, x)
        if config.observables.non_gaussianity == "model" and record.valid:
            record = dataclasses.replace(record, **map_targets(result))
    return dataclasses.replace(record, ln_wall_width=math.log(wall_width(solved)))


def map_targets(result) -> dict[str, float]:
    """The emulated delta-N map of a solved model (``ng_log_lambda``, ``ng_ln_cap``,
    :class:`TrainingRecord`): the capped logarithmic fit of its delta-N map at the peak
    (:func:`scan.observables.pbh.deltan.peak_map`), NaN below
    :data:`~scan.observables.pbh.map_fit.NG_LEVEL` in log10 P_peak (not computed there)
    and where delta-N or the fit fails (a root not bracketed): the emulator's ``ng``
    block then learns the map from the other points."""
    s = result.spectrum
    if not (s.P_peak > 0 and math.log10(s.P_peak) >= NG_LEVEL):
        return {}
    try:
        dn = peak_map(result.background, s.k_peak, s.P_peak, s.N_star, s.k_star)
        fit = fit_capped(dn.zeta_map, math.sqrt(s.P_peak))
    except ValueError:
        return {}
    return {"ng_log_lambda": fit.log_lambda, "ng_ln_cap": math.log(fit.slope_max - 1)}
