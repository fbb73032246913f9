"""The figures of one exact solve (``zetascan solve``): model, spectrum, Ω_GW h², f_PBH."""
from __future__ import annotations

from pathlib import Path

from scan.pipeline import SolveResult
from scan.plots import gw as gw_plot
from scan.plots import model as model_plot
from scan.plots import pbh as pbh_plot
from scan.plots import spectrum as spectrum_plot
from scan.plots.style import save


def draw_solve_figures(stem: str | Path, result: SolveResult) -> list[Path]:
    """The spectrum and model figures of one solve, as ``<stem>_*.pdf/png``."""
    stem = Path(stem)
    paths: list[Path] = []
    bg = result.background
    fig = model_plot.model_figure(result.model, bg)
    paths += save(fig, stem.with_name(stem.name + "_model"))
    s = result.spectrum
    if s is not None and s.k.size:
        fig = spectrum_plot.spectrum_figure(s.k, s.P_zeta, s.N_exit, k_star=s.k_star,
                                            N_end=s.N_end, P_tensor=s.P_tensor)
        paths += save(fig, stem.with_name(stem.name + "_spectrum"))
    o = result.observables
    if o is not None:
        paths += gw_plot.save_omega_gw(o.f_hz, o.omega_gw_h2,
                                       stem.with_name(stem.name + "_omega_gw"))
        paths += pbh_plot.save_f_pbh(o.m_msun, o.f_pbh_per_lnm,
                                     stem.with_name(stem.name + "_f_pbh"), total=o.f_pbh_total)
    return [p for p in paths if p.suffix == ".png"] + [p for p in paths if p.suffix == ".pdf"]
