"""``zetascan observe`` as one library call: a user's P_zeta table -> Omega_GW h^2, f_PBH.

:func:`observe_spectrum` reads the table (:mod:`scan.pipeline.spectrum_file`), computes
both observables with the ``[observables]`` settings (:mod:`scan.observables.settings`)
and writes them with provenance (:func:`write_observed`); the command line builds the
settings from its options and prints.
"""
from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from scan import store
from scan.config.schema import ObservablesSection
from scan.errors import InputFileError
from scan.observables import Observables
from scan.observables.settings import settings_of
from scan.pipeline.result_file import write_observables
from scan.pipeline.spectrum_file import load_spectrum


@dataclasses.dataclass(frozen=True)
class Observed:
    """What :func:`observe_spectrum` computed and wrote."""

    observables: Observables
    out: Path
    figures: tuple[Path, ...] = ()


def default_out(spectrum: str | Path) -> Path:
    """``<SPECTRUM stem>_observables.h5`` beside the spectrum."""
    spectrum = Path(spectrum)
    return spectrum.with_name(spectrum.stem + "_observables.h5")


def write_observed(out: Path, source: str, obs: Observables,
                   options: Mapping[str, Any]) -> None:
    """Write groups gw and pbh with units and provenance (atomic, via scan.store)."""
    with store.atomic_h5(out) as handle:
        store.write_attrs(handle, store.provenance(json.dumps(dict(options), sort_keys=True,
                                                              default=str)))
        handle.attrs["input_spectrum"] = source
        write_observables(handle, obs)


def observe_spectrum(spectrum: str | Path, section: ObservablesSection, *,
                     out: str | Path | None = None, options: Mapping[str, Any] | None = None,
                     draw: Callable[[Observables], list[Path]] | None = None) -> Observed:
    """Compute Omega_GW h^2(f) [f in Hz] and f_PBH(M) [M in M_sun] of a spectrum table.

    Parameters
    ----------
    spectrum : str or Path
        CSV (k [Mpc^-1], P_zeta) or a zetascan HDF5 result.
    section : ObservablesSection
        The ``[observables]`` settings (conventions, grids, g_* table, non-Gaussianity).
    out : str or Path, optional
        Output HDF5 (default :func:`default_out`).
    options : mapping, optional
        The options as given (stored as the file's provenance text).
    draw : callable, optional
        ``draw(observables) -> figure paths`` after the file is written.

    Raises
    ------
    InputFileError
        An unreadable or invalid table (the message names the line).
    OutputError
        The output cannot be written (checked before computing).
    """
    source = str(spectrum)
    out = Path(out) if out else default_out(source)
    k, P = load_spectrum(source)
    store.check_output_file(out, "observables file")
    obs = settings_of(section).compute(k, P)
    if not math.isfinite(obs.f_pbh_total):
        raise InputFileError(source, f"f_PBH is not finite (P_zeta reaches {P.max():.3g}): "
                             "the spectrum is far beyond perturbation theory; check that "
                             "P_zeta is the dimensionless power spectrum")
    write_observed(out, source, obs, options or {})
    figures = tuple(draw(obs)) if draw is not None else ()
    return Observed(obs, out, figures)
