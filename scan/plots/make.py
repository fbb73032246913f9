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

from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np

from scan.errors import ZetascanError
from scan.pipeline import model_of, solve_background_of
from scan.plots.exclusion import exclusion_figure
from scan.plots.grid_data import read_grid
from scan.plots.gw import omega_gw_figure
from scan.plots.inputs import Inputs, axis_label
from scan.plots.levels import histogram2d
from scan.plots.model import model_figure
from scan.plots.pbh import f_pbh_figure
from scan.plots.sources import KINDS, supported_kinds
from scan.plots.spectrum import spectrum_figure
from scan.plots.style import save
from scan.plots.trace import trace_figure
from scan.plots.triangle import triangle_figure
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
    if "all" in requested:
        return supported
    missing = [k for k in requested if k not in supported]
    if missing:
        raise UnsupportedKindError(
            f"{where}: cannot make {', '.join(missing)}; these files support: "
            f"{', '.join(supported) or 'nothing'} (or all)")
    return tuple(k for k in KINDS if k in requested)


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

    grid = read_grid(inputs.sources.grid)
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
