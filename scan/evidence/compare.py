"""Comparisons of stored runs: Bayes factors between two runs, nested against emcee.

:func:`compare_runs` reads two evidence files (e.g. two pole-power regimes, or with and
without a second pole) and returns ln B = ln Z_A - ln Z_B with its error and the Kass &
Raftery words; a Bayes factor compares the same data, so likelihood sections that differ
are reported.  :func:`nested_vs_chain` compares the nested posterior with the emcee
posterior of the same run, per parameter: the difference of the medians in units of the
emcee 68 % half-width, and the two-sample Kolmogorov-Smirnov statistic (Hodges 1958,
Ark. Mat. 3, 469; :func:`scipy.stats.ks_2samp`) between the emcee samples and the
nested equal-weight samples.
"""
from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
from scipy import stats

from scan.config.diff import stored_config
from scan.evidence.file import FILE_NAME, BayesFactor, read_evidence
from scan.evidence.scale import kass_raftery
from scan.verify.importance import median_shift, weighted_quantiles

#: Quantiles of the per-parameter comparison.
_Q = np.array([0.16, 0.5, 0.84])

#: Largest |median shift| (in emcee 68 % half-widths) called agreement (issue 20's rule).
AGREE_SHIFT = 0.2


def compare_runs(run_a: str | Path, run_b: str | Path) -> dict[str, Any]:
    """ln B of run A against run B, its error, the scale note and any likelihood change.

    Raises
    ------
    InputFileError
        A run without a readable evidence file.
    """
    a, b = read_evidence(run_a), read_evidence(run_b)
    factor = BayesFactor.of(a["ln_Z"], a["ln_Z_err"], b["ln_Z"], b["ln_Z_err"])
    name_a, name_b = f"'{a['run_name']}'", f"'{b['run_name']}'"
    return {"run_a": a["file"], "run_b": b["file"], "ln_Z_a": a["ln_Z"],
            "ln_Z_a_err": a["ln_Z_err"], "ln_Z_b": b["ln_Z"], "ln_Z_b_err": b["ln_Z_err"],
            "ln_B": factor.ln_B, "ln_B_err": factor.ln_B_err,
            "scale_note": kass_raftery(factor.ln_B, name_a, name_b),
            "likelihood_differs": _likelihoods(a) != _likelihoods(b)}


def _likelihoods(info: dict[str, Any]) -> tuple:
    """The data a run's evidence is of: its curve files (by name) and its target."""
    config = stored_config(info["config_text"], info["overrides"], info["run_name"])
    return (config.sampler.target,
            tuple(sorted(Path(c).name for c in config.likelihood.curves)))


def nested_vs_chain(names: Sequence[str], chain: np.ndarray, nested: dict[str, Any]
                    ) -> dict[str, dict[str, float]]:
    """Per-parameter agreement of the nested and the emcee posterior of one run.

    Parameters
    ----------
    names : sequence of str
        The chain's parameter names (the nested run must have the same).
    chain : ndarray, shape (n, dim)
        emcee samples after burn-in and thinning.
    nested : dict
        :func:`scan.evidence.file.read_evidence` of the run.

    Returns
    -------
    dict
        ``{name: {"median_shift": (nested - emcee median) / emcee 68 % half-width,
        "ks": two-sample KS statistic}}`` (no p-value: thinned chain samples and
        resampled nested draws are not independent draws, so it would mislead).

    Raises
    ------
    ValueError
        The nested run has other parameters.
    """
    if list(nested["parameter_names"]) != list(names):
        raise ValueError(f"the nested run samples {nested['parameter_names']}, the chain "
                         f"{list(names)}")
    out = {}
    for i, name in enumerate(names):
        emcee_q = dict(zip(("q16", "median", "q84"), weighted_quantiles(chain[:, i], None,
                                                                        _Q)))
        nested_q = dict(zip(("q16", "median", "q84"), weighted_quantiles(
            nested["points"][:, i], nested["weights"], _Q)))
        ks = stats.ks_2samp(chain[:, i], nested["samples"][:, i])
        out[name] = {"median_shift": median_shift(emcee_q, nested_q),
                     "ks": float(ks.statistic)}
    return out


def nested_summary(folder: str | Path, names: Sequence[str], chain: np.ndarray
                   ) -> dict[str, Any] | None:
    """What ``summary`` shows of a run's evidence file, or None when there is none.

    Parameters
    ----------
    folder : path
        The run folder (``evidence.h5`` beside ``chain.h5``).
    names : sequence of str
    chain : ndarray, shape (n, dim)
        The emcee samples after burn-in and thinning.

    Returns
    -------
    dict or None
        ``ln_Z``, ``ln_Z_err``, ``ln_B_vs_foreground`` (+ ``_err``), ``scale_note``,
        ``agreement`` (:func:`nested_vs_chain`) and ``agree`` (every |median shift| below
        :data:`AGREE_SHIFT`), or ``error`` when the nested run has other parameters.
    """
    path = Path(folder) / FILE_NAME
    if not path.is_file():
        return None
    info = read_evidence(path)
    out = {key: info[key] for key in ("ln_Z", "ln_Z_err", "ln_B_vs_foreground",
                                      "ln_B_vs_foreground_err", "scale_note")}
    try:
        rows = nested_vs_chain(names, chain, info)
    except ValueError as err:
        return {**out, "error": str(err)}
    shifts = [abs(row["median_shift"]) for row in rows.values()]
    return {**out, "agreement": rows, "agree_shift": AGREE_SHIFT,
            "agree": bool(len(chain)) and all(s < AGREE_SHIFT for s in shifts)}
