"""Summaries of a chain file: quantiles of parameters and blobs, convergence, reasons."""
from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from scan.sampler import runfile
from scan.sampler.convergence import Policy, settle

#: Quantiles reported: median and the central 68 % and 95 % intervals.
QUANTILES: dict[str, float] = {"q02.5": 0.025, "q16": 0.16, "median": 0.5, "q84": 0.84,
                               "q97.5": 0.975}


#: Blob fields holding one likelihood term's ln L each (``lnL_<term name>``).
TERM_PREFIX = "lnL_"


def binding_counts(blobs: np.ndarray) -> dict[str, Any] | None:
    """Which likelihood term binds (is most negative) how often among the samples.

    Parameters
    ----------
    blobs : structured ndarray
        Posterior samples' blobs with ``lnL_<term>`` fields.

    Returns
    -------
    dict or None
        ``{"fractions": {term: share of samples where it is the most negative term},
        "none": share where every term is 0, "median_lnL": {term: median ln L}}``, terms
        ordered by share; None without ``lnL_`` fields.
    """
    fields = [f for f in blobs.dtype.names if f.startswith(TERM_PREFIX)]
    if not fields or not len(blobs):
        return None
    values = np.column_stack([blobs[f] for f in fields])
    values = np.where(np.isfinite(values) | np.isneginf(values), values, 0.0)
    worst = np.argmin(values, axis=1)
    binds = values[np.arange(len(values)), worst] < 0.0
    shares = {f[len(TERM_PREFIX):]: float(np.mean(binds & (worst == i)))
              for i, f in enumerate(fields)}
    ordered = dict(sorted(shares.items(), key=lambda kv: -kv[1]))
    return {"fractions": ordered, "none": float(np.mean(~binds)),
            "median_lnL": {f[len(TERM_PREFIX):]: float(np.median(values[:, i]))
                           for i, f in enumerate(fields)}}


def _quantiles(samples: np.ndarray) -> dict[str, float]:
    values = np.quantile(samples, list(QUANTILES.values()))
    return {key: float(v) for key, v in zip(QUANTILES, values)}


def posterior_samples(path: str | Path) -> dict[str, Any]:
    """Flattened samples after burn-in, stray walkers and thinning — the one reader of a
    chain's posterior samples (summary, figures, bands, verify).

    The stored τ-based burn-in is extended and stray walkers are dropped by their ln p
    (:func:`scan.sampler.convergence.settle`); then every ``thin``-th step is kept.

    Returns
    -------
    dict
        ``names``, ``samples`` (n, dim), ``log_prob`` (n,), ``blobs`` (structured, n) or
        None, ``burn_in`` (effective), ``burn_in_tau`` (stored), ``thin``, ``walkers``
        (kept, of the chain's) and ``stray_walkers`` (dropped).  Rows are step-major:
        ``samples.reshape(-1, walkers, dim)`` gives (draw, walker, dim) for per-walker
        (ArviZ "chain") views.
    """
    stored = runfile.read(path)
    data = runfile.load_chain(path)
    chain, log_prob = np.asarray(data["chain"]), np.asarray(data["log_prob"])
    thin = max(stored.extras.thin, 1)
    settled = settle(log_prob, stored.extras.burn_in, chain.shape[-1]) if chain.ndim == 3 \
        else None
    burn = max(stored.extras.burn_in, 0) if settled is None else settled.burn_in
    kept = slice(None) if settled is None else settled.kept
    blobs = None if data["blobs"] is None else \
        data["blobs"][burn::thin][:, kept].reshape(-1)
    return {"names": stored.extras.names,
            "samples": chain[burn::thin][:, kept].reshape(-1, chain.shape[-1]),
            "log_prob": log_prob[burn::thin][:, kept].reshape(-1), "blobs": blobs,
            "burn_in": burn, "burn_in_tau": max(stored.extras.burn_in, 0), "thin": thin,
            "walkers": 0 if settled is None else int(settled.kept.sum()),
            "stray_walkers": 0 if settled is None else settled.dropped}


def tau_discard_of(config_text: str) -> float:
    """``[sampler] tau_discard`` of a stored config text (0 when absent or unreadable)."""
    try:
        return float(tomllib.loads(config_text).get("sampler", {}).get("tau_discard", 0.0))
    except (tomllib.TOMLDecodeError, TypeError, ValueError):
        return 0.0


def judged_steps(config_text: str, steps: int) -> int:
    """Steps the stopping rule counted: all but the first ``tau_discard`` share (as
    :meth:`scan.sampler.convergence.Policy.judged_from`), so N/tau compares like with like."""
    return steps - Policy(tau_discard=tau_discard_of(config_text)).judged_from(steps)


def summarize(run: str | Path) -> dict[str, Any]:
    """Everything ``zetascan summary`` shows, as plain JSON-ready values (``run``: a run
    folder or its chain file)."""
    path = runfile.chain_path(run)
    stored = runfile.read(path)
    data = runfile.load_chain(path)
    extras = stored.extras
    steps = int(data["iteration"])
    post = posterior_samples(path)
    parameters = {}
    if len(post["samples"]):
        for i, name in enumerate(extras.names):
            parameters[name] = _quantiles(post["samples"][:, i])
    derived = {}
    binding = None
    if post["blobs"] is not None and len(post["blobs"]):
        for field in post["blobs"].dtype.names:
            if field != "reason" and not field.startswith(TERM_PREFIX):
                derived[field] = _quantiles(post["blobs"][field])
        binding = binding_counts(post["blobs"])
    tau = None if extras.tau is None else [float(t) for t in extras.tau]
    walkers = int(data["chain"].shape[1]) if data["chain"].ndim == 3 else 0
    return {
        "file": str(path), "config_sha256": stored.config_sha256, "status": extras.status,
        "converged": extras.status == "converged", "steps": steps, "walkers": walkers,
        "acceptance_fraction": float(np.mean(data["accepted"]) / steps) if steps else None,
        "tau": dict(zip(extras.names, tau)) if tau else None,
        "n_over_tau": (judged_steps(stored.config_text, steps) / max(tau)) if tau else None,
        "tau_discard": tau_discard_of(stored.config_text),
        "burn_in": post["burn_in"], "thin": post["thin"],
        "stray_walkers": post["stray_walkers"],
        "samples_used": int(len(post["samples"])),
        "parameters": parameters, "derived": derived, "binding": binding,
        "pbh_convention": runfile.pbh_convention(path),
        "gw_convention": runfile.gw_convention(path),
        "invalid_reasons": {n: int(c) for n, c in zip(extras.reasons, extras.counts)},
        "tau_history": {"steps": extras.tau_steps,
                        "tau": [list(map(float, t)) for t in extras.tau_history]},
    }
