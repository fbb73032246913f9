"""A fast surrogate of the exact solver, trained on full solutions.

Public API
----------
* :class:`Surrogate` / :func:`load_surrogate` — emulate validity, the peak, the shape of
  P_zeta around it and n_s, r, V0, N* for many parameter vectors at once;
* :func:`scan.surrogate.train.run_training` — plan, solve (through any ``map``), append
  to the training store, refine, fit;
* :func:`scan.surrogate.adapter.solve_point` — the exact solve of one parameter vector;
* :func:`scan.surrogate.validate.validate` — the held-out validation report.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from scan.surrogate.emulator import Emulator, Prediction, predict_unit
from scan.surrogate.identity import identity
from scan.surrogate.record import TrainingRecord
from scan.surrogate.space import ParameterSpace, from_config
from scan.surrogate.surrogate_file import emulator_digest, read_surrogate

__all__ = ["Surrogate", "load_surrogate", "Prediction", "TrainingRecord", "ParameterSpace",
           "emulator_digest"]


@dataclass(frozen=True)
class Surrogate:
    """An emulator with its parameter space: call :meth:`predict` on physical vectors."""

    emulator: Emulator
    space: ParameterSpace

    def predict(self, theta: np.ndarray) -> Prediction:
        """Emulate at parameter vectors ``theta`` (p, d) in the parameters' own units."""
        return predict_unit(self.emulator, self.space.to_unit(theta))


def load_surrogate(path: str | Path, config=None) -> Surrogate:
    """Read a surrogate file; with ``config``, refuse one trained on another model."""

    ident = identity(config, from_config(config)) if config is not None else None
    emulator, space = read_surrogate(path, ident)
    return Surrogate(emulator, space)

