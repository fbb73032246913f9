"""``zetascan verify RUN --nested``: exact solves of nested samples and how ln Z moves.

The nested posterior of the surrogate, p_s(x) = L_s(x) pi(x) / Z_s, is re-weighted to the
exact likelihood L_e by importance sampling with the surrogate posterior as the proposal
(the identity follows from Z = integral of L pi):

    Z_e / Z_s = E_{p_s}[ L_e / L_s ],  so  Delta ln Z = ln( (1/M) sum_i r_i ),
    r_i = exp(ln L_e(x_i) - ln L_s(x_i))

over M draws x_i of the equal-weight nested samples.  Its one-sigma error is the
delta-method std(r) / (sqrt(M) mean(r)), and Kish's ESS of the r_i says how many draws
carry the estimate.  The estimate is unbiased only if L_s > 0 wherever L_e > 0: a region
the surrogate calls invalid but the exact solver does not is invisible to it.

The draws, the exact solves, the resumable side file and the ``verify`` group are those of
``zetascan verify`` (:func:`scan.verify.run.verify_run`), written into ``evidence.h5``;
the correction is added to the ``evidence`` group as attributes ``delta_ln_Z_exact``,
``delta_ln_Z_exact_err``, ``ln_Z_exact``, ``delta_ln_Z_ess`` and ``delta_ln_Z_samples``.
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan import store
from scan.config.diff import stored_config
from scan.config.priors import PriorSet
from scan.errors import ConfigError, InputFileError
from scan.evidence.file import FILE_NAME, GROUP, read_evidence
from scan.posterior.build import build_target
from scan.verify.compare import Evaluated
from scan.verify.importance import kish_ess
from scan.verify.run import Run


def evidence_file(run: str | Path) -> Path:
    """The evidence file of a run folder (or the file itself); InputFileError if absent."""
    path = Path(run)
    if path.is_dir():
        path = path / FILE_NAME
    if not path.is_file():
        raise InputFileError(str(path), "no evidence file (run 'zetascan evidence CONFIG' "
                             "first, or give its evidence.h5)")
    return path


def open_nested(run: str | Path) -> Run:
    """The nested run as a :class:`scan.verify.run.Run` of its equal-weight samples.

    Raises
    ------
    InputFileError
        No readable evidence file.
    ConfigError
        Not a surrogate posterior run, or its curves / surrogate are missing.
    """
    path = evidence_file(run)
    info = read_evidence(path)
    config = dataclasses.replace(
        stored_config(info["config_text"], info["overrides"], info["run_name"]),
        source=f"{path} (stored config)")
    if config.sampler.target != "posterior":
        raise ConfigError(config.source, "sampler.target",
                          f"'{config.sampler.target}' is not a surrogate posterior",
                          "verify runs made with sampler.target = \"posterior\"")
    target = build_target(config, PriorSet.from_config(config))
    samples = np.asarray(info["samples"], float)
    log_prob = target.log_and_blobs(samples)[0]
    return Run(path, config, target, samples, log_prob, 0, 1, "nested")


def evidence_shift(ev: Evaluated) -> dict[str, float]:
    """Delta ln Z = ln Z_exact - ln Z_surrogate from the drawn samples (module docstring).

    Parameters
    ----------
    ev : Evaluated
        Surrogate and exact log posteriors at M draws of the surrogate posterior (the
        prior cancels in their difference).

    Returns
    -------
    dict
        ``delta_ln_Z``, ``delta_ln_Z_err`` [1], ``ess`` (Kish, of the ratios), ``samples``.
    """
    surrogate, exact = np.asarray(ev.log_p_surrogate), np.asarray(ev.log_p_exact)
    if not np.all(np.isfinite(surrogate)):
        raise ValueError("a drawn nested sample has no surrogate likelihood")
    d = np.where(np.isfinite(exact), exact - surrogate, -np.inf)
    m = len(d)
    if not np.isfinite(d).any():
        return {"delta_ln_Z": -math.inf, "delta_ln_Z_err": math.nan, "ess": 0.0,
                "samples": m}
    top = float(np.max(d))
    r = np.exp(d - top)
    mean = float(np.mean(r))
    return {"delta_ln_Z": top + math.log(mean),
            "delta_ln_Z_err": float(np.std(r, ddof=1)) / (math.sqrt(m) * mean) if m > 1
            else math.nan,
            "ess": kish_ess(r), "samples": m}


def write_shift(path: str | Path, shift: dict[str, Any]) -> None:
    """Add the correction to the ``evidence`` group (attributes; nothing else changes)."""
    with h5py.File(path, "a") as handle:
        group = handle[GROUP]
        ln_z = float(group.attrs["ln_Z"])
        store.write_attrs(group, {"delta_ln_Z_exact": shift["delta_ln_Z"],
                                  "delta_ln_Z_exact_err": shift["delta_ln_Z_err"],
                                  "ln_Z_exact": ln_z + shift["delta_ln_Z"],
                                  "delta_ln_Z_ess": shift["ess"],
                                  "delta_ln_Z_samples": shift["samples"]})


def shift_lines(shift: dict[str, Any], ln_z: float) -> list[str]:
    """How ln Z moves, in words."""
    return [(f"ln Z (model): surrogate {ln_z:.3f} -> exact {ln_z + shift['delta_ln_Z']:.3f}: "
             f"delta ln Z = {shift['delta_ln_Z']:+.3f} +- {shift['delta_ln_Z_err']:.3f} "
             f"(importance-sampled over {shift['samples']} nested draws, ESS "
             f"{shift['ess']:.1f})"),
            ("note: ln B vs foreground moves by this delta only to the extent the "
             "foreground run's own surrogate error is negligible")]


def ln_z_of(path: str | Path) -> float:
    """The stored model ln Z."""
    return float(read_evidence(path)["ln_Z"])
