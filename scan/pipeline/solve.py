"""One exact solve of one configured model: model → background → pivot → spectrum.

Pure orchestration of the physics stages (no file I/O, no printing).  The command line
(``zetascan solve``), the surrogate's training and the sampler's ``--exact`` mode all
call :func:`solve_config`.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import lru_cache
from types import SimpleNamespace

from scan.background import Background, solve_background
from scan.background.pivot import Pivot, Reheating, solve_pivot
from scan.config.schema import RunConfig
from scan.config.width_prior import ratio_of_pole
from scan.errors import ConfigError
from scan.models import Model, model_from_section
from scan.modes import ModeSettings, Spectrum, compute_spectrum
from scan.observables import Observables
from scan.observables.pbh.deltan import peak_map
from scan.observables.pbh.map_fit import NG_LEVEL, fit_capped
from scan.observables.settings import settings_of
from scan.pipeline.peaks import Peak, describe, peak_table
from scan.pipeline.validity import feature_at_pivot, poles_on_cmb_scales
from scan.pipeline.wall import NoWall, locate_wall

#: E-folds the background must provide before the pivot exits (initial data of the
#: pivot modes start ~ln(x_in) e-folds earlier; common practice: a few e-folds more).
PIVOT_MARGIN_EFOLDS: float = 8.0


@dataclass(frozen=True)
class SolveResult:
    """Everything one exact solve produced (stages after an invalid one are ``None``).

    Attributes
    ----------
    model : Model
    background : Background
    pivot : Pivot or None
    spectrum : Spectrum or None
    observables : Observables or None
        Ω_GW h²(f) and f_PBH(M) of the exact spectrum.
    valid : bool
    reason : str
        The first stage's reason for an invalid model ("" when valid).
    peaks : tuple of Peak
        Every peak of P_ζ (:mod:`scan.pipeline.peaks`), in increasing k.
    """

    model: Model
    background: Background
    pivot: Pivot | None
    spectrum: Spectrum | None
    valid: bool
    reason: str
    observables: Observables | None = None
    peaks: tuple[Peak, ...] = ()

    def summary_lines(self) -> list[str]:
        """A short human summary (the CLI prints it)."""
        bg = self.background
        lines = [f"model: {'valid' if self.valid else 'INVALID: ' + self.reason}"]
        if math.isfinite(bg.N_end):
            lines.append(f"N_total = {bg.N_end - bg.N_start:.3f} e-folds")
        for c in bg.crossings:
            lines.append(f"pole {c.index} at phi = {c.position:.6g}: crossed at N = "
                         f"{c.N_cross:.3f}, {c.efolds_near:.3f} e-folds with |phi - phi_i| < w, "
                         f"{c.usr_efolds:.3f} e-folds of ultra-slow roll (eps2 < -3)")
        if self.pivot is not None and self.pivot.valid:
            p = self.pivot
            lines.append(f"pivot k* = {p.k_star:g} Mpc^-1: N* = {p.N_star:.3f}; slow roll "
                         f"(2nd order): n_s = {p.n_s:.5f}, r = {p.r:.4g}")
        s = self.spectrum
        if s is not None and s.valid:
            lines.append(f"exact modes: n_s = {s.n_s:.5f}, alpha_s = {s.alpha_s:.3g}, "
                         f"r = {s.r:.4g}, V0 = {s.V0:.4g} M_p^4, N* = {s.N_star:.3f}")
            if math.isfinite(s.k_peak):
                lines.append(f"peak: P_zeta = {s.P_peak:.4g} at k = {s.k_peak:.4g} Mpc^-1"
                             + (f"; dip P = {s.P_dip:.3g} at k = {s.k_dip:.3g} Mpc^-1"
                                if math.isfinite(s.k_dip) else ""))
        o = self.observables
        if o is not None:
            lines.append(f"induced GWs: max Omega_GW h^2 = {o.omega_gw_h2_peak:.3e} at "
                         f"f = {o.f_gw_peak:.3e} Hz")
            lines.append(f"PBHs: f_PBH total = {o.f_pbh_total:.3e} "
                         f"({o.conventions.criterion}, {o.conventions.window} window, "
                         f"threshold {o.conventions.threshold:g})")
            if o.f_pbh_total_gaussian is not None:
                lines.append(f"PBHs: f_PBH total = {o.f_pbh_total_gaussian:.3e} with Gaussian "
                             f"zeta, {o.f_pbh_total:.3e} with non-Gaussian zeta "
                             f"({o.zeta_map.kind}, f_NL at the peak "
                             f"{o.zeta_map.f_nl_equivalent():.3g})")
            lines += [f"note: {note}" for note in o.notes]
        lines += [describe(peak, i) for i, peak in enumerate(self.peaks)]
        return lines


def model_of(config: RunConfig) -> Model:
    """The :class:`Model` a config describes (a ``wall_ratio`` pole resolved by
    :func:`resolve_walls`)."""
    return model_from_section(resolve_walls(config).model)


def resolve_walls(config: RunConfig) -> RunConfig:
    """``config`` with a pole given by ``wall_ratio`` ρ (or ``wall_distance`` ρ − 1) given
    by its sharpness ρ λ_w.

    Raises
    ------
    ConfigError
        If more than one pole uses the wall, or the pole has no wall.
    """
    poles = config.model.poles
    walled = [i for i, p in enumerate(poles) if ratio_of_pole(p) is not None]
    if not walled:
        return config
    if len(walled) > 1:
        raise ConfigError(config.source, f"model.poles[{walled[1]}]",
                          "only one pole may be given by wall_ratio or wall_distance",
                          "give the others a width or a sharpness")
    i = walled[0]
    lam_w = wall_sharpness(config, i)
    pole = dataclasses.replace(poles[i], wall_ratio=None, wall_distance=None,
                               sharpness=ratio_of_pole(poles[i]) * lam_w)
    return dataclasses.replace(config, model=dataclasses.replace(
        config.model, poles=poles[:i] + (pole,) + poles[i + 1:]))


def wall_sharpness(config: RunConfig, pole: int) -> float:
    """λ_w of pole ``pole`` (:mod:`scan.pipeline.wall`), cached per model and settings."""
    poles = config.model.poles
    blank = dataclasses.replace(poles[pole], wall_ratio=1.0, wall_distance=None, width=None,
                                sharpness=None)
    section = dataclasses.replace(config.model, poles=poles[:pole] + (blank,) + poles[pole + 1:])
    try:  # one wall per model whatever the ratio asked for (the cache key has rho = 1)
        return _wall(section, pole, config.background, config.pivot)
    except NoWall as err:
        key = "wall_ratio" if poles[pole].wall_ratio is not None else "wall_distance"
        raise ConfigError(config.source, f"model.poles[{pole}].{key}",
                          f"this pole has no wall ({err})",
                          "give its width or sharpness instead") from None


@lru_cache(maxsize=512)
def _wall(section, pole: int, background, pivot_section) -> float:
    shim = SimpleNamespace(background=background, pivot=pivot_section)

    def valid_at(sharpness: float) -> bool:
        entry = dataclasses.replace(section.poles[pole], wall_ratio=None, wall_distance=None,
                                    width=None, sharpness=sharpness)
        model = model_from_section(dataclasses.replace(
            section, poles=section.poles[:pole] + (entry,) + section.poles[pole + 1:]))
        bg = solve_background_of(shim, model)
        if not bg.valid:
            return False
        pivot = _pivot_of(shim, bg)
        return pivot.valid and not poles_on_cmb_scales(bg, pivot.N_star, pivot.k_star)

    return locate_wall(valid_at)


def wall_width(config: RunConfig) -> float:
    """w_w: the width [M_p] of the pole given by a wall coordinate, at its wall (λ = λ_w).

    The pole's width is then w = w_w/ρ (:mod:`scan.config.width_prior`).  Free once the
    model is solved: λ_w is cached per model.  NaN when no pole uses a wall coordinate.
    """
    for i, pole in enumerate(config.model.poles):
        rho = ratio_of_pole(pole)
        if rho is not None:
            return model_of(config).poles[i].width * rho
    return math.nan


def _pivot_of(config, bg: Background) -> Pivot:
    """The CMB pivot of a background with the config's ``[pivot]`` settings."""
    return solve_pivot(bg, N_star=config.pivot.n_star, k_star=config.pivot.k_star,
                       reheating=reheating_of(config),
                       A_s=math.exp(config.pivot.ln_1e10_As) * 1e-10,
                       margin=PIVOT_MARGIN_EFOLDS)


def reheating_of(config: RunConfig) -> Reheating:
    """The reheating history of the ``[pivot]`` section."""
    p = config.pivot
    return Reheating(kind=p.reheating, w=p.reheat_w, T_GeV=p.reheat_temperature_GeV,
                     rho_GeV4=p.reheat_density_GeV4, g_th=p.g_reheat)


def mode_settings_of(config: RunConfig) -> ModeSettings:
    """Mode-solver settings of the ``[modes]`` section."""
    m = config.modes
    return ModeSettings(x_in=m.x_in, x_out=m.x_out, rtol=m.rtol, p_zeta_max=m.stochastic_limit)


#: Why a ``model`` solve without an interior peak has Gaussian f_PBH.
NO_PEAK_NOTE: str = ("non_gaussianity = 'model': the spectrum has no interior peak, so no "
                     "delta-N map was computed; f_PBH is for Gaussian zeta")


def observables_of(config: RunConfig, spectrum: Spectrum,
                   bg: Background | None = None) -> Observables:
    """Ω_GW h²(f) and f_PBH(M) of an exact spectrum, with the config's conventions.

    ``non_gaussianity = 'model'`` needs the background ``bg``: zeta = F(zeta_G) is then
    computed by delta-N at the spectrum's peak (:func:`scan.observables.pbh.deltan.peak_map`).
    """
    settings = settings_of(config.observables)
    if settings.non_gaussianity != "model":
        return settings.compute(spectrum.k, spectrum.P_zeta)
    if bg is None:
        raise ValueError("non_gaussianity = 'model' needs the model's background")
    if not (math.isfinite(spectrum.k_peak) and spectrum.P_peak > 0):
        obs = settings.compute(spectrum.k, spectrum.P_zeta)
        return obs.replace(notes=obs.notes + (NO_PEAK_NOTE,))
    dn = peak_map(bg, spectrum.k_peak, spectrum.P_peak, spectrum.N_star, spectrum.k_star)
    obs = settings.compute(spectrum.k, spectrum.P_zeta, dn.zeta_map)
    return obs.replace(notes=obs.notes + dn.notes + (representation_note(dn.zeta_map,
                                                                          spectrum.P_peak),))


def representation_note(zmap, P_peak: float) -> str:
    """How sample, grid and verify's surrogate side represent this delta-N map: its capped
    logarithmic fit (:func:`scan.observables.pbh.map_fit.fit_capped`), or Gaussian zeta
    below :data:`~scan.observables.pbh.map_fit.NG_LEVEL`."""
    if not math.log10(P_peak) >= NG_LEVEL:
        return (f"sample/grid keep zeta Gaussian for this model (log10 P_peak "
                f"{math.log10(P_peak):.2f} < {NG_LEVEL:g}; docs/ng_model_representation.md)")
    fit = fit_capped(zmap, math.sqrt(P_peak))
    return (f"sample/grid represent this delta-N map as the capped logarithmic map "
            f"lambda = {fit.log_lambda:.4g}, slope_max = {fit.slope_max:.4g} (rms "
            f"{fit.rms:.2g} sqrt(P_peak) from the table; 0.0-0.8 dex in f_PBH measured, "
            "docs/ng_model_representation.md)")


def solve_background_of(config: RunConfig, model: Model | None = None) -> Background:
    """The exact background of a configured model (V0 = 1)."""
    model = model_of(config) if model is None else model
    b = config.background
    n_star_hint = config.pivot.n_star if config.pivot.n_star is not None else 60.0
    return solve_background(model, phi_start=b.phi_start, velocity_start=b.velocity_start,
                            n_max=b.n_max, rtol=b.rtol, efolds_auto=n_star_hint + 15.0)


def solve_config(config: RunConfig, *, with_modes: bool = True,
                 with_observables: bool = True) -> SolveResult:
    """Solve a configured model exactly.

    Parameters
    ----------
    config : RunConfig
        The run configuration.
    with_modes : bool
        Also solve the Mukhanov–Sasaki modes (the exact spectrum and normalisation).
    with_observables : bool
        Also compute Ω_GW h²(f) and f_PBH(M) of the spectrum.

    Returns
    -------
    SolveResult
        Invalid models are values with a reason, never exceptions.
    """
    model = model_of(config)
    bg = solve_background_of(config, model)
    if not bg.valid:
        return SolveResult(model, bg, None, None, False, f"background: {bg.reason}")
    reheating = reheating_of(config)
    A_s = math.exp(config.pivot.ln_1e10_As) * 1e-10
    pivot = _pivot_of(config, bg)
    if not pivot.valid:
        return SolveResult(model, bg, pivot, None, False, f"pivot: {pivot.reason}")
    if not with_modes:
        return SolveResult(model, bg, pivot, None, True, "")
    spectrum = compute_spectrum(bg, N_star=_n_star_rule(config, bg, reheating, A_s),
                                n_modes=config.modes.n_k, k_star=config.pivot.k_star,
                                ln10As=config.pivot.ln_1e10_As,
                                settings=mode_settings_of(config), N_star_guess=pivot.N_star)
    if not spectrum.valid:
        return SolveResult(model, bg, pivot, spectrum, False, f"spectrum: {spectrum.reason}")
    on_pivot = feature_at_pivot(spectrum, bg)
    if on_pivot:
        return SolveResult(model, bg, pivot, spectrum, False, f"spectrum: {on_pivot}")
    observables = observables_of(config, spectrum, bg) if with_observables else None
    return SolveResult(model, bg, pivot, spectrum, True, "", observables,
                       peak_table(spectrum, bg, observables))


def _n_star_rule(config: RunConfig, bg: Background, reheating: Reheating, A_s: float):
    """N* as given, or as a function of V0 through the matching equation."""
    if config.pivot.n_star is not None:
        return config.pivot.n_star
    k_star = config.pivot.k_star

    def n_star_of_V0(V0: float) -> float:
        return solve_pivot(bg, k_star=k_star, reheating=reheating, A_s=A_s, V0=V0,
                           margin=PIVOT_MARGIN_EFOLDS).N_star

    return n_star_of_V0
