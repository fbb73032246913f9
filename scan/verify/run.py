"""The file side of ``zetascan verify``: open a posterior run, verify it, store ``verify``.

:func:`open_run` rebuilds the run's config (the stored text and overrides), priors and
posterior target and reads the thinned post-burn-in samples; :func:`verify_run` draws,
evaluates (:mod:`scan.verify.compare`) and writes the group ``verify`` of the chain file
(replacing an earlier one; the ``mcmc`` and ``sampler`` groups are not touched):

* attributes: ``samples``, ``available``, ``seed``, ``burn_in``, ``thin``, ``ess``,
  ``ess_fraction``, ``biased``, ``flags``, the thresholds, ``exact_solver``,
  ``created_utc``;
* datasets (each with ``units``): ``index`` (into the flattened thinned samples),
  ``theta``, ``log_post_surrogate``, ``log_post_exact``, ``weight``, ``exact_reason``,
  groups ``surrogate`` and ``exact`` with one dataset per blob field, and ``report``
  (the JSON report).

Nothing is lost when the verification is killed: each exact solve is kept as it finishes
in ``<chain stem>.verify_partial.h5`` next to the chain (:mod:`scan.verify.partial`
says why there), ``resume=True`` solves only the samples it lacks, and the final group is
built from the kept outcomes in draw order, so it equals an uninterrupted run's (apart
from ``created_utc``).  The partial file is removed after the final group is written.
"""
from __future__ import annotations

import dataclasses
import datetime as _dt
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from scan import store
from scan.config.diff import stored_config
from scan.config.priors import PriorSet
from scan.config.schema import RunConfig
from scan.errors import ConfigError, InputFileError, ZetascanError
from scan.pool import BasePool
from scan.posterior.build import build_target
from scan.posterior.exact import ExactSolve
from scan.sampler import runfile
from scan.sampler.summary import posterior_samples
from scan.verify.compare import (MIN_SAMPLES, Evaluated, Thresholds, compare, draw_indices,
                                 jsonable, score_outcomes)
from scan.verify.partial import draw_of, open_partial

GROUP = "verify"
#: Units of the blob fields the posterior target writes (others: "unspecified").
BLOB_UNITS: dict[str, str] = {"k_peak": "Mpc^-1", "P_peak": "1", "f_gw_peak": "Hz",
                              "omega_gw_h2_peak": "1", "f_pbh_total": "1",
                              "M_pbh_peak": "M_sun", "n_s": "1", "r": "1",
                              "N_star": "1", "log_like": "1", "reason": "1"}


def blob_units(name: str) -> str:
    """The ``units`` attribute of a blob field."""
    if name in BLOB_UNITS:
        return BLOB_UNITS[name]
    if name.startswith(("snr_", "lnL_")):
        return "1"
    return "unspecified"


@dataclasses.dataclass(frozen=True)
class Run:
    """A posterior run opened for verification.

    Attributes
    ----------
    path : Path
        The chain file.
    config : RunConfig
    target : PosteriorTarget
        Prepared in this process.
    samples : ndarray, shape (n, dim)
        The flattened samples after burn-in and thinning.
    log_prob : ndarray, shape (n,) [1]
        Their stored surrogate log posterior.
    burn_in, thin : int [steps]
    status : str
        The sampler's status ("converged", "max_steps", "stopped", ...).
    """

    path: Path
    config: RunConfig
    target: Any
    samples: np.ndarray
    log_prob: np.ndarray
    burn_in: int
    thin: int
    status: str


def chain_path(run: str | Path) -> Path:
    """The chain file of a run folder (or the file itself); InputFileError if absent."""
    path = Path(run)
    if path.is_dir():
        path = path / "chain.h5"
    if not path.is_file():
        raise InputFileError(str(path), "no such chain file (give a run folder made by "
                             "'zetascan sample CONFIG', or its chain.h5)")
    return path


def open_run(run: str | Path) -> Run:
    """Read a posterior run and rebuild its target.

    Raises
    ------
    InputFileError
        Not a chain file, or no burn-in / thinning stored (an unfinished run).
    ConfigError
        The run is not a surrogate posterior run, or its curves / surrogate are missing.
    """

    path = chain_path(run)
    stored = runfile.read(path)
    extras = stored.extras
    if extras.burn_in < 0 or extras.thin < 1:
        raise InputFileError(str(path), f"no burn-in / thinning stored (status "
                             f"'{extras.status}', {stored.iteration} steps): the run did not "
                             "finish; run 'zetascan sample CONFIG' again to complete it")
    config = dataclasses.replace(
        stored_config(stored.config_text, stored.overrides, stored.run_name,
                      stored.base_dir),
        source=f"{path} (stored config)")
    if config.sampler.target != "posterior":
        raise ConfigError(config.source, "sampler.target",
                          f"'{config.sampler.target}' is not a surrogate posterior",
                          "verify runs made with sampler.target = \"posterior\"")
    priors = PriorSet.from_config(config)
    if priors.names != extras.names:
        raise InputFileError(str(path), f"stored parameters {list(extras.names)} differ "
                             f"from the stored config's {list(priors.names)}")
    target = build_target(config, priors)
    post = posterior_samples(path)  # burn-in and stray walkers by ln p, thinning
    return Run(path, config, target, post["samples"], post["log_prob"], post["burn_in"],
               post["thin"], extras.status)


def check_samples(run: Run, samples: int) -> None:
    """Refuse fewer than :data:`MIN_SAMPLES` or more than the chain holds (ZetascanError)."""
    n = len(run.samples)
    if samples < MIN_SAMPLES:
        raise ZetascanError(f"--samples {samples}: use at least {MIN_SAMPLES} (ESS/M from "
                            "fewer samples says nothing)")
    if n < samples:
        raise InputFileError(str(run.path), f"only {n} samples after burn-in {run.burn_in} "
                             f"and thinning {run.thin}, fewer than --samples {samples}; "
                             f"use --samples {n} or fewer"
                             + ("" if n >= MIN_SAMPLES else " (at least "
                                f"{MIN_SAMPLES}: run the chain longer)"))


@dataclasses.dataclass(frozen=True)
class Verification:
    """What :func:`verify_run` computed (also stored in the ``verify`` group)."""

    report: dict[str, Any]
    evaluated: Evaluated
    weights: np.ndarray
    index: np.ndarray


def verify_run(run: Run, samples: int, pool: BasePool,
               exact: Callable[[np.ndarray], Any] | None = None,
               thresholds: Thresholds = Thresholds(),
               on_progress: Callable[[int, int], None] | None = None,
               write: bool = True, resume: bool = False,
               log: Callable[[str], None] | None = None) -> Verification:
    """Draw ``samples`` samples, solve them exactly, compare, and store the result.

    With ``write``, every finished exact solve is kept at once in the chain's partial
    results (:mod:`scan.verify.partial`), which are deleted after the final
    ``verify`` group is written; ``resume`` solves only the samples they lack.

    Parameters
    ----------
    run : Run
        From :func:`open_run`.
    samples : int
        M, the number of samples drawn without replacement (seed ``run.seed``).
    pool : BasePool
        An entered pool for the exact solves.
    exact : callable, optional
        ``exact(theta) -> ExactOutcome`` (default :class:`scan.posterior.exact.ExactSolve`
        of the run's config); its ``describe()`` identifies it (resuming needs the same).
    thresholds : Thresholds
        The flag rule.
    on_progress : callable, optional
        ``on_progress(done, total)`` after each exact solve (``done`` counts resumed ones).
    write : bool
        Keep partial results and store the ``verify`` group in the chain file (False:
        no file is written).
    resume : bool
        Continue the partial results of an interrupted verification of the same draw;
        without it, earlier partial results are discarded.
    log : callable, optional
        ``log(line)``: what happened to earlier partial results.

    Returns
    -------
    Verification

    Raises
    ------
    InputFileError
        ``resume`` of partial results of another draw (the message says what differs).
    """

    check_samples(run, samples)
    exact = ExactSolve(run.config) if exact is None else exact
    index = draw_indices(len(run.samples), samples, run.config.run.seed)
    solver = solver_name(exact)
    if not write:
        kept: dict[int, Any] = {}
        solve_missing(pool, exact, run.samples, index, set(),
                      lambda i, _theta, outcome: kept.__setitem__(i, outcome), on_progress)
        return assemble(run, index, [kept[int(i)] for i in index], solver, thresholds)
    draw = draw_of(run, index, solver)
    with open_partial(run.path, draw, run.samples.shape[1], run.config, resume,
                      log) as partial:
        solve_missing(pool, exact, run.samples, index, set(partial.rows()), partial.append,
                      on_progress)
        result = assemble(run, index, partial.outcomes(index), solver, thresholds)
        write_group(run.path, result)
        partial.remove()
    return result


def solver_name(exact: Callable[[np.ndarray], Any]) -> str:
    """The exact side's ``describe()`` (else its repr): reports and resume checks."""
    describe = getattr(exact, "describe", None)
    return str(describe()) if callable(describe) else repr(exact)


def solve_missing(pool: BasePool, exact: Callable[[np.ndarray], Any], samples: np.ndarray,
                  index: np.ndarray, done: set[int],
                  on_result: Callable[[int, np.ndarray, Any], None],
                  on_progress: Callable[[int, int], None] | None = None) -> None:
    """Solve the drawn samples not in ``done``; ``on_result(i, theta, outcome)`` each."""
    todo = [(int(i), samples[i]) for i in index if int(i) not in done]
    count = len(index) - len(todo)

    def record(i: int, outcome: Any) -> None:
        nonlocal count
        on_result(i, samples[i], outcome)
        count += 1
        if on_progress is not None:
            on_progress(count, len(index))

    solve_each(pool, exact, todo, record)


def solve_each(pool: BasePool, exact: Callable[[np.ndarray], Any],
               items: list[tuple[int, np.ndarray]],
               on_result: Callable[[int, Any], None]) -> None:
    """Solve ``(key, theta)`` items, calling ``on_result(key, outcome)`` as each finishes
    (:meth:`scan.pool.BasePool.each_as_completed`: a process or MPI pool gets every item
    at once, so no worker waits for a slow neighbour)."""
    for key, outcome in pool.each_as_completed(exact, items):
        on_result(key, outcome)


def assemble(run: Run, index: np.ndarray, outcomes: list[Any], solver: str,
             thresholds: Thresholds) -> Verification:
    """Score the outcomes (in draw order) and build the report."""
    ev = score_outcomes(run.target, run.samples[index], outcomes)
    report, weights = compare(ev, run.target.names, run.target.reasons, thresholds,
                              stored_log_prob=run.log_prob[index])
    report = {"file": str(run.path), "available": int(len(run.samples)),
              "seed": int(run.config.run.seed), "burn_in": run.burn_in, "thin": run.thin,
              "chain_status": run.status, "exact_solver": solver, **report}
    return Verification(jsonable(report), ev, weights, index)


def write_group(path: str | Path, result: Verification) -> None:
    """Replace the ``verify`` group of the chain file (append mode; nothing else changes).

    The free space is checked first (twice the group's data, for HDF5's own records): a
    chain file cut short by a full disk would no longer read back.
    """
    report, ev = result.report, result.evaluated
    data = (ev.blobs_surrogate.nbytes + ev.blobs_exact.nbytes + len(json.dumps(report))
            + np.asarray(result.weights).nbytes + np.asarray(result.index).nbytes)
    store.require_space(path, 2 * data, "the chain file is unchanged and every solved sample "
                        "stays in the partial file; free some space and rerun with --resume")
    try:
        with h5py.File(path, "a") as handle:
            if GROUP in handle:
                del handle[GROUP]
            group = handle.create_group(GROUP)
            store.write_attrs(group, {
                "samples": report["samples"], "available": report["available"],
                "seed": report["seed"], "burn_in": report["burn_in"], "thin": report["thin"],
                "ess": report["ess"], "ess_fraction": report["ess_fraction"],
                "biased": report["biased"], "flags": list(report["flags"]) or ["none"],
                "ess_threshold": report["thresholds"]["ess_fraction"],
                "shift_threshold": report["thresholds"]["shift"],
                "exact_solver": report["exact_solver"],
                "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(
                    timespec="seconds")})
            _write_arrays(group, result)
            for side, blobs in (("surrogate", ev.blobs_surrogate), ("exact", ev.blobs_exact)):
                sub = group.create_group(side)
                for name in blobs.dtype.names:
                    store.write_dataset(sub, name, blobs[name], blob_units(name),
                                        f"{side} blob field '{name}' at the drawn samples")
            dset = group.create_dataset("report", data=json.dumps(report),
                                        dtype=h5py.string_dtype())
            dset.attrs["units"] = "1"
            dset.attrs["format"] = "JSON"
    except OSError as err:
        raise InputFileError(str(path), f"cannot write the verify group ({err}); is the "
                             "run still being sampled?") from None


def _write_arrays(group: h5py.Group, result: Verification) -> None:
    ev = result.evaluated
    store.write_dataset(group, "index", result.index.astype(np.int64), "1",
                        "indices into the flattened samples after burn-in and thinning")
    store.write_dataset(group, "theta", ev.thetas, "1",
                        "drawn samples (parameter units)")
    store.write_dataset(group, "log_post_surrogate", ev.log_p_surrogate, "1",
                        "surrogate log posterior (unnormalised, natural log)")
    store.write_dataset(group, "log_post_exact", ev.log_p_exact, "1",
                        "exact log posterior (unnormalised, natural log)")
    store.write_dataset(group, "weight", result.weights, "1",
                        "normalised importance weights exact/surrogate")
    store.write_dataset(group, "exact_reason",
                        np.array(list(ev.exact_reason), dtype=h5py.string_dtype()), "1",
                        "why the exact model is invalid ('' when valid)")


def read_report(path: str | Path) -> dict[str, Any] | None:
    """The stored ``verify`` report of a chain file, or None when there is none."""
    with h5py.File(chain_path(path), "r") as handle:
        if GROUP not in handle:
            return None
        raw = handle[GROUP]["report"][()]
    return json.loads(raw.decode() if isinstance(raw, bytes) else raw)
