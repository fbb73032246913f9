"""A posterior chain as ArviZ InferenceData: burn-in and thinning applied, every
parameter and derived quantity a named variable.

ArviZ is optional (``pip install 'zetascan[analysis]'``); it is imported when a chain is
loaded, with an install hint if it is missing.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from emcee.backends import HDFBackend

from scan.errors import InputFileError
from scan.sampler import runfile
from scan.sampler.runfile import chain_path
from scan.sampler.summary import TERM_PREFIX, posterior_samples
from scan.verify.report_file import blob_units


def _arviz() -> Any:
    try:
        import arviz
    except ImportError:
        raise InputFileError("arviz", "load_chain needs ArviZ: pip install "
                             "'zetascan[analysis]' (or pip install arviz)") from None
    return arviz


def chain_arrays(path: str | Path, burn_in: int | None = None, thin: int | None = None
                 ) -> dict[str, Any]:
    """The stored chain after burn-in and thinning, per walker.

    Returns
    -------
    dict
        ``posterior``: name → array (walkers, draws) for every parameter and every derived
        blob field (``reason`` and the per-term ``lnL_*`` go to ``sample_stats``);
        ``sample_stats``: ``lp`` (ln posterior), ``reason`` (code), ``lnL_<term>``;
        ``attrs``: burn_in, thin, labels, units; ``labels``: name → axis label.

    Raises
    ------
    InputFileError
        No burn-in / thinning stored and none given, or no samples left after them.
    """
    path = chain_path(path)
    stored = runfile.read(path)
    extras = stored.extras
    burn = extras.burn_in if burn_in is None else int(burn_in)
    step = extras.thin if thin is None else int(thin)
    if burn < 0 or step < 1:
        raise InputFileError(str(path), f"no burn-in / thinning stored (status "
                             f"'{extras.status}'): the run did not finish; pass burn_in= and "
                             "thin= or run 'zetascan sample CONFIG' again to complete it")
    if burn_in is None and thin is None:  # the library's one reader (stray walkers dropped)
        post = posterior_samples(path)
        burn, step, walkers = post["burn_in"], post["thin"], post["walkers"]
        chain = post["samples"].reshape(-1, walkers, len(extras.names))
        lp = post["log_prob"].reshape(-1, walkers)
        blobs = None if post["blobs"] is None else post["blobs"].reshape(-1, walkers)
    else:
        backend = HDFBackend(str(path), name=runfile.GROUP, read_only=True)
        chain = backend.get_chain(discard=burn, thin=step)
        lp = backend.get_log_prob(discard=burn, thin=step)
        blobs = backend.get_blobs(discard=burn, thin=step) if backend.has_blobs() else None
    if not chain.shape[0]:
        raise InputFileError(str(path), f"no samples after burn-in {burn} and thinning "
                             f"{step} (the chain has {stored.iteration} steps)")
    posterior = {name: chain[:, :, i].T for i, name in enumerate(extras.names)}
    stats: dict[str, np.ndarray] = {"lp": lp.T}
    units = {name: "" for name in extras.names}
    for field in () if blobs is None else blobs.dtype.names:
        target = stats if field == "reason" or field.startswith(TERM_PREFIX) else posterior
        target[field] = np.asarray(blobs[field]).T
        units[field] = blob_units(field)
    labels = dict(zip(extras.names, extras.labels))
    attrs = {"burn_in": burn, "thin": step, "status": extras.status,
             "reason_names": list(extras.reasons), "source": str(path)}
    return {"posterior": posterior, "sample_stats": stats, "attrs": attrs, "labels": labels,
            "units": units}


def load_chain(run: str | Path, *, burn_in: int | None = None, thin: int | None = None):
    """A posterior run as :class:`arviz.InferenceData`.

    Parameters
    ----------
    run : str or Path
        A run folder (``results/<name>``) or its ``chain.h5``.
    burn_in, thin : int, optional
        Steps to drop and thinning. Default: the library's posterior samples (the run's
        stored burn-in, extended where ln p has not settled, stray walkers dropped, its
        thinning) — the samples of zetascan summary and the figures.

    Returns
    -------
    arviz.InferenceData
        ``posterior`` holds every sampled parameter (named by its config key, e.g.
        ``model.poles[0].position``, or nuisance name) and every derived quantity
        (k_peak [Mpc⁻¹], P_peak, f_gw_peak [Hz], omega_gw_h2_peak, f_pbh_total,
        M_pbh_peak [M_sun], n_s, r, N_star, log_like, snr_<curve>), each with a
        ``units`` attribute; chains are walkers (emcee's walkers are not independent
        chains: R-hat across them is only indicative). ``sample_stats`` holds ``lp``,
        ``reason`` and the ln L of each term (``lnL_<term>``).
    """
    az = _arviz()
    data = chain_arrays(run, burn_in, thin)
    idata = az.from_dict(posterior=data["posterior"], sample_stats=data["sample_stats"],
                         attrs=data["attrs"])
    for name, variable in idata.posterior.data_vars.items():
        variable.attrs["units"] = data["units"].get(name, "")
        if name in data["labels"]:
            variable.attrs["label"] = data["labels"][name]
    return idata
