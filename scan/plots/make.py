"""Make the figures of ``zetascan plot``: one builder per kind, files ``<name>_<figure>``.

=========  ==========================================  ===================================
kind       from                                        figure files
=========  ==========================================  ===================================
spectrum   solve result                                ``spectrum``
model      solve result (background re-solved)         ``model``
gw         solve result and/or posterior chain         ``omega_gw`` (line, bands, curves)
pbh        solve result and/or posterior chain         ``f_pbh`` (line, bands, curves)
corner     chain                                       ``corner``
trace      chain                                       ``lnp_trace`` (ln p per walker)
bands      posterior chain                             ``omega_gw`` and ``f_pbh``
exclusion  grid (posterior regions with a chain)       ``exclusion``
=========  ==========================================  ===================================
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np

from scan.errors import InputFileError, ZetascanError
from scan.pipeline import model_of, solve_background_of
from scan.plots.exclusion import exclusion_figure
from scan.plots.grid_data import exclusion_data
from scan.plots.gw import omega_gw_figure
from scan.plots.inputs import Inputs, axis_label
from scan.plots.levels import histogram2d
from scan.plots.model import model_figure
from scan.plots.pbh import f_pbh_figure
from scan.plots.sources import KINDS, resolve, supported_kinds
from scan.plots.spectrum import spectrum_figure
from scan.plots.style import save
from scan.plots.trace import trace_figure
from scan.plots.triangle import triangle_figure
from scan.sampler.bands import N_SAMPLES, SEED
from scan.sampler import runfile
from scan.sampler.convergence import settle


class UnsupportedKindError(ZetascanError):
    """A figure kind the given files cannot make (the message lists the kinds they can)."""


def select_kinds(inputs: Inputs, requested: Sequence[str]) -> tuple[str, ...]:
    """The kinds to make: ``all`` expands to every supported kind.

    Raises
    ------
    UnsupportedKindError
        A requested kind the files cannot make.
    """
    supported = supported_kinds(inputs.sources)
    where = ", ".join(str(p) for p in (inputs.sources.solve, inputs.sources.chain,
                                       inputs.sources.grid) if p is not None)
    why = ""
    if "model" in supported and inputs.config.model.plugins:
        supported = tuple(k for k in supported if k != "model")
        why = (f"no model figure: the stored config names plug-in code "
               f"({', '.join(inputs.config.model.plugins)}) and reading a result never "
               "imports code; 'zetascan solve CONFIG' draws it (running a config executes "
               "its plug-ins)")
        inputs.notes.append(why)
    if "all" in requested:
        return supported
    missing = [k for k in requested if k not in supported]
    if missing:
        raise UnsupportedKindError(
            f"{where}: cannot make {', '.join(missing)}; these files support: "
            f"{', '.join(supported) or 'nothing'} (or all)" + (f"; {why}" if why else ""))
    return tuple(k for k in KINDS if k in requested)


@dataclasses.dataclass(frozen=True)
class Plotted:
    """What :func:`plot_result` wrote: figure paths (PNG then PDF) and notes to show."""

    paths: tuple[Path, ...]
    notes: tuple[str, ...]
    kinds: tuple[str, ...] = ()


def plot_result(result: str | Path, kinds: Sequence[str] = ("all",), *,
                out: str | Path | None = None, chain: str | Path | None = None,
                curves: Sequence[str] | None = None, samples: int = N_SAMPLES,
                seed: int = SEED) -> Plotted:
    """``zetascan plot`` as one call: the figures of a solve result, chain, grid or run
    folder (:func:`scan.plots.sources.resolve`) in ``out`` (default: beside the result).

    Raises
    ------
    ZetascanError
        Missing or unknown files, a kind the files cannot make, fewer than 1 sample.
    """
    if samples < 1:
        raise InputFileError("--samples", f"needs at least 1 sample, got {samples}")
    sources = resolve(result, chain)
    inputs = Inputs(sources, tuple(curves) if curves else None, samples, seed)
    chosen = select_kinds(inputs, kinds)
    paths = make_figures(inputs, chosen, Path(out) if out else sources.folder)
    return Plotted(tuple(paths), tuple(inputs.notes), tuple(chosen))


def make_figures(inputs: Inputs, kinds: Sequence[str], out_dir: Path) -> list[Path]:
    """Draw and save ``kinds``; return the written PNG paths then the PDF paths."""
    figures: dict[str, Callable[[Inputs], object]] = {}
    for kind in kinds:
        figures.update(BUILDERS[kind])
    paths: list[Path] = []
    for figure_name, build in figures.items():
        paths += save(build(inputs), Path(out_dir) / f"{inputs.sources.name}_{figure_name}")
    return [p for p in paths if p.suffix == ".png"] + [p for p in paths if p.suffix == ".pdf"]


# --------------------------------------------------------------------------- builders
def _spectrum(inputs: Inputs):

    s = inputs.solve["spectrum"]
    return spectrum_figure(s["k"], s["P_zeta"], s["N_exit"], k_star=s["k_star"],
                           N_end=inputs.solve["N_end"], P_tensor=s["P_tensor"])


def _model(inputs: Inputs):

    model = model_of(inputs.config)
    return model_figure(model, solve_background_of(inputs.config, model))


def _gw(inputs: Inputs):

    f, omega = inputs.solve.get("gw", (None, None)) if inputs.sources.solve else (None, None)
    bands = inputs.bands
    return omega_gw_figure(f, omega, curves=inputs.curves,
                           bands=None if bands is None else bands.gw,
                           n_eff=inputs.config.observables.n_eff)


def _pbh(inputs: Inputs):

    m, f, total = (inputs.solve.get("pbh", (None, None, None)) if inputs.sources.solve
                    else (None, None, None))
    bands = inputs.bands
    return f_pbh_figure(m, f, total, curves=inputs.curves,
                        bands=None if bands is None else bands.pbh)


def _corner(inputs: Inputs):

    post = inputs.posterior
    columns, labels = [], []
    for name, label in zip(post["names"], _labels(inputs)):
        log = post["priors"][name].kind == "log_uniform"
        columns.append(inputs.column(name, log))
        labels.append(axis_label(name, label, log))
    note = (f"{len(post['samples'])} samples after burn-in {post['burn_in']}, "
            f"thinning {post['thin']}")
    if post["stray_walkers"]:
        note += f"; {post['stray_walkers']} stray walkers dropped (see the trace figure)"
    return triangle_figure(np.column_stack(columns), labels, note=note)


def _trace(inputs: Inputs):

    chain = inputs.sources.chain
    log_prob = runfile.load_chain(chain)["log_prob"]
    stored = runfile.read(chain)
    settled = settle(log_prob, stored.extras.burn_in, len(stored.extras.names))
    return trace_figure(log_prob, settled, stored.extras.burn_in)


def _labels(inputs: Inputs) -> list[str]:
    return [inputs.posterior["priors"][n].label for n in inputs.posterior["names"]]


def _exclusion(inputs: Inputs):

    grid = exclusion_data(inputs.sources.grid)
    posterior = None
    if inputs.sources.chain is not None:
        x = inputs.column(grid.x_key, grid.x_scale == "log")
        y = inputs.column(grid.y_key, grid.y_scale == "log")
        posterior = histogram2d(x, y)
    return exclusion_figure(grid, posterior)


#: kind -> {figure name: builder}
BUILDERS: dict[str, dict[str, Callable[[Inputs], object]]] = {
    "spectrum": {"spectrum": _spectrum}, "model": {"model": _model},
    "gw": {"omega_gw": _gw}, "pbh": {"f_pbh": _pbh}, "corner": {"corner": _corner},
    "trace": {"lnp_trace": _trace},
    "bands": {"omega_gw": _gw, "f_pbh": _pbh}, "exclusion": {"exclusion": _exclusion}}
