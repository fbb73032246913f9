"""The run-config schema: one frozen dataclass per TOML section.

Each field's :func:`scan.config.spec` documents the key (``configs/README.md`` is the
user-facing copy; ``tests/test_config.py`` checks the two agree).  Cross-field rules live
in each section's ``validate(where, source)``.  ``[run]`` and ``[model]`` are in
:mod:`scan.config.model`, ``[likelihood]`` and ``[grid]`` in :mod:`scan.config.analysis`.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from scan.config.analysis import GridSection, LikelihoodSection
from scan.config.model import ModelSection, RunSection
from scan.config.spec import N_GRID_MAX, N_K_MAX, X_IN_MAX, spec
from scan.errors import ConfigError
from scan.observables.gstar import TABLES as GSTAR_TABLES
from scan.observables.pbh.conventions import CRITERIA as PBH_CRITERIA
from scan.observables.pbh.conventions import MASS_FUNCTIONS as PBH_MASS_FUNCTIONS
from scan.observables.pbh.qcd import QCD_COLLAPSES, QCD_THRESHOLDS
from scan.observables.pbh.variance import WINDOWS as PBH_WINDOWS
from scan.observables.pbh.zeta_map import NON_GAUSSIANITIES
from scan.observables.sigw_kernel_table import SIGW_KERNELS, TABLE_GSTAR

@dataclass(frozen=True, kw_only=True)
class BackgroundSection:
    """``[background]``: initial data and the exact background solve."""

    phi_start: float | None = spec("initial field value (default: chosen so that slow roll "
                                   "gives at least N* + 15 e-folds)", None, units="M_p")
    velocity_start: float | None = spec("initial dphi/dN (default: the slow-roll attractor)",
                                        None, units="M_p per e-fold")
    n_max: float = spec("give up (invalid model) if inflation has not ended after this many "
                        "e-folds", 400.0, minimum=1.0)
    rtol: float = spec("relative tolerance of the background integration", 1e-10, minimum=1e-14,
                       maximum=1e-4)


@dataclass(frozen=True, kw_only=True)
class PivotSection:
    """``[pivot]``: the CMB pivot scale, N*, reheating and the amplitude A_s."""

    k_star: float = spec("pivot wavenumber", 0.05, units="Mpc^-1", minimum=0.0,
                         exclusive_minimum=True)
    n_star: float | None = spec("e-folds from pivot exit to the end of inflation (default: "
                                "from the reheating matching equation)", None, minimum=1.0)
    reheating: str = spec("reheating history for the N* matching", "instant",
                          choices=("instant", "temperature", "density"))
    reheat_w: float = spec("equation of state during reheating", 0.0, minimum=-1.0 / 3.0,
                           maximum=1.0)
    reheat_temperature_GeV: float | None = spec("thermalisation temperature (reheating = "
                                                "'temperature')", None, units="GeV", minimum=0.0,
                                                exclusive_minimum=True)
    reheat_density_GeV4: float | None = spec("energy density at thermalisation (reheating = "
                                             "'density')", None, units="GeV^4", minimum=0.0,
                                             exclusive_minimum=True)
    g_reheat: float = spec("relativistic degrees of freedom at thermalisation", 106.75,
                           minimum=1.0)
    ln_1e10_As: float = spec("ln(10^10 A_s) the spectrum is normalised to (Planck 2018: 3.044)",
                             3.044, minimum=0.0, maximum=10.0)

    def validate(self, where: str, source: str) -> None:
        """Conditional keys of the reheating options."""
        if self.reheating == "temperature" and self.reheat_temperature_GeV is None:
            raise ConfigError(source, f"{where}.reheat_temperature_GeV",
                              "reheating = 'temperature' needs reheat_temperature_GeV")
        if self.reheating == "density" and self.reheat_density_GeV4 is None:
            raise ConfigError(source, f"{where}.reheat_density_GeV4",
                              "reheating = 'density' needs reheat_density_GeV4")


@dataclass(frozen=True, kw_only=True)
class ModesSection:
    """``[modes]``: the Mukhanov–Sasaki solve and its k grid."""

    n_k: int = spec("log-spaced wavenumbers before refinement", 128, minimum=8, maximum=N_K_MAX)
    x_in: float = spec("start each mode at k/(aH) = x_in (Bunch–Davies with de Sitter "
                       "correction)", 100.0, minimum=10.0, maximum=X_IN_MAX)
    x_out: float = spec("a mode is frozen once k/(aH) <= x_out (and past non-attractor "
                        "phases)", 1e-3, minimum=1e-8, maximum=0.1)
    rtol: float = spec("relative tolerance of the mode integration", 1e-8, minimum=1e-13,
                       maximum=1e-4)
    refine_tol: float = spec("refine the k grid until the interpolated peak changes by less "
                             "than this (relative)", 1e-3, minimum=1e-8, maximum=0.1)
    stochastic_limit: float = spec("a spectrum reaching P_zeta (or H^2/(8 pi^2 eps1)) above "
                                   "this is invalid (quantum diffusion dominates)", 0.1,
                                   minimum=0.0, exclusive_minimum=True)


@dataclass(frozen=True, kw_only=True)
class SurrogateSection:
    """``[surrogate]``: training design, shape grid and emulator of ``zetascan train``."""

    points: int = spec("training points of the space-filling (scrambled Sobol) design",
                       256, minimum=4)
    holdout: int = spec("held-out validation points, never used for training", 64, minimum=0)
    peak_holdout: int = spec("extra held-out points, placed after training where the emulator "
                             "predicts a valid model with log10 P_peak >= peak_holdout_min "
                             "(where f_PBH matters; a uniform hold-out set rarely lands there); "
                             "a larger count on --resume adds the rest",
                             0, minimum=0)
    peak_holdout_min: float = spec("lowest predicted log10 P_peak of the peak_holdout points",
                                   -2.5, units="dex")
    peak_holdout_max: float | None = spec("highest predicted log10 P_peak of the "
                                          "peak_holdout points (none: no upper bound)", None,
                                          units="dex")
    peak_points: int = spec("training points per peak round, placed after refinement the way "
                            "the peak_holdout points are (where the emulator predicts a valid "
                            "model with peak_points_min <= log10 P_peak <= peak_points_max) "
                            "but with their own random draws", 0, minimum=0)
    peak_rounds: int = spec("peak rounds (plan peak_points, solve, refit, plan again); they "
                            "come before the peak_holdout points are placed", 1, minimum=0)
    peak_points_min: float = spec("lowest predicted log10 P_peak of the peak_points", -1.5,
                                  units="dex")
    peak_points_max: float | None = spec("highest predicted log10 P_peak of the peak_points "
                                         "(none: no upper bound)", None, units="dex")
    peak_variance_fraction: tuple[float, ...] = spec(
        "share of each peak round placed where the emulator's predictive sd of the peak is "
        "largest (kept apart, among 8x more candidates); the rest are random draws in the "
        "window; one number per round, the last one repeats (none: all random)",
        default_factory=tuple, minimum=0.0, maximum=1.0)
    refine_rounds: int = spec("adaptive refinement rounds after the design", 2, minimum=0)
    refine_points: int = spec("points added per refinement round", 32, minimum=1)
    boundary_fraction: float = spec("share of each refinement round placed along the "
                                    "valid/invalid boundary (the rest where the "
                                    "cross-validated error is largest)", 0.5, minimum=0.0,
                                    maximum=1.0)
    shape_span: float = spec("the shape grid covers ln(k/k_peak) in [-span, +span]", 3.0,
                             minimum=0.0, exclusive_minimum=True)
    shape_points: int = spec("points of the shape grid in ln(k/k_peak)", 41, minimum=3)
    shape_components: int = spec("most principal components kept for the shape", 8,
                                 minimum=1)
    shape_tolerance: float = spec("keep components until the training shapes are "
                                  "reproduced to this (largest absolute error of log10 P)", 1e-3,
                                  units="dex", minimum=0.0, exclusive_minimum=True)
    kernel: str = spec("emulator kernel (Gaussian-process regression); auto keeps, per "
                       "block, the one with the lower cross-validated error", "auto",
                       choices=("auto", "matern52", "gaussian"))
    nugget: float = spec("smallest relative noise variance of the emulator kernel "
                         "(regularisation)", 1e-10, minimum=0.0, maximum=0.1)
    fit_iterations: int = spec("optimiser iterations for the kernel length scales", 60,
                               minimum=0)


PRIOR_KINDS = ("uniform", "log_uniform", "gaussian")


@dataclass(frozen=True, kw_only=True)
class PriorShape:
    """A prior family and its numbers (also the ``width_prior`` table of a parameter)."""

    prior: str = spec("prior family", choices=PRIOR_KINDS)
    low: float | None = spec("lower bound (uniform, log_uniform; optional truncation of "
                             "gaussian)", None)
    high: float | None = spec("upper bound (uniform, log_uniform; optional truncation of "
                              "gaussian)", None)
    mean: float | None = spec("mean of a gaussian prior", None)
    sigma: float | None = spec("standard deviation of a gaussian prior", None, minimum=0.0,
                               exclusive_minimum=True)

    def validate(self, where: str, source: str) -> None:
        """Each prior family has its keys; bounds are ordered; log_uniform is positive."""
        if self.prior in ("uniform", "log_uniform"):
            for key in ("low", "high"):
                if getattr(self, key) is None:
                    raise ConfigError(source, f"{where}.{key}",
                                      f"prior = '{self.prior}' needs {key}",
                                      "give both low and high")
            if self.mean is not None or self.sigma is not None:
                raise ConfigError(source, f"{where}.mean",
                                  f"mean/sigma are only used by gaussian priors, not "
                                  f"'{self.prior}'", "remove them or set prior = \"gaussian\"")
        if self.prior == "gaussian":
            for key in ("mean", "sigma"):
                if getattr(self, key) is None:
                    raise ConfigError(source, f"{where}.{key}", f"prior = 'gaussian' needs {key}")
        if self.low is not None and self.high is not None and not self.low < self.high:
            raise ConfigError(source, f"{where}.high",
                              f"needs low < high, got low = {self.low}, high = {self.high}",
                              "swap or widen the bounds")
        if self.prior == "log_uniform" and self.low is not None and self.low <= 0.0:
            raise ConfigError(source, f"{where}.low",
                              f"log_uniform needs low > 0, got {self.low}",
                              "use a positive lower bound or prior = \"uniform\"")


@dataclass(frozen=True, kw_only=True)
class PriorFields(PriorShape):
    """Prior keys shared by ``[[parameters]]`` and ``[[nuisance]]`` entries."""

    label: str = spec("LaTeX label for plots (default: the key or name)", "")
    start: float | None = spec("centre of the starting ball when sampler.start = 'ball' "
                               "(default: the model's value, else the prior's centre)", None)

    def validate(self, where: str, source: str) -> None:
        """The family's keys (:meth:`PriorShape.validate`); the start inside the bounds."""
        super().validate(where, source)
        lo = -float("inf") if self.low is None else self.low
        hi = float("inf") if self.high is None else self.high
        if self.start is not None and not lo <= self.start <= hi:
            raise ConfigError(source, f"{where}.start", f"start = {self.start} is outside "
                              f"[{lo}, {hi}]", "choose a start inside the prior bounds")


@dataclass(frozen=True, kw_only=True)
class ParameterSection(PriorFields):
    """One ``[[parameters]]`` entry: a varied model key and its prior."""

    key: str = spec("config key path of the varied number, e.g. \"model.poles[0].position\"")
    width_prior: PriorShape | None = spec(
        "only for a pole's wall coordinate (wall_ratio): the prior on the pole's physical "
        "width w [M_p] as a table {prior, low, high, mean, sigma}; the coordinate is sampled "
        "in its own box and its density is the width prior mapped by w = w_w/rho with the "
        "Jacobian w_w/rho^2 (w_w: the width at the wall)", None)


@dataclass(frozen=True, kw_only=True)
class NuisanceSection(PriorFields):
    """One ``[[nuisance]]`` entry: a likelihood nuisance parameter and its prior."""

    name: str = spec("nuisance parameter name: A_smbhb, pbh.threshold or pbh.collapse_K")


@dataclass(frozen=True, kw_only=True)
class SamplerSection:
    """``[sampler]``: the emcee ensemble, stopping rule and run-file cadence."""

    target: str = spec("what is sampled: the physics posterior (surrogate-driven) or a "
                       "built-in Gaussian test target", "posterior",
                       choices=("posterior", "gaussian_test"))
    walkers: int = spec("number of emcee walkers (at least 2 x the number of varied "
                        "parameters)", 32, minimum=2)
    max_steps: int = spec("stop after this many steps even if not converged", 20000,
                          minimum=1)
    check_every: int = spec("estimate the autocorrelation time every this many steps", 200,
                            minimum=1)
    tau_factor: float = spec("converged when the chain is longer than tau_factor x tau for "
                             "every parameter", 50.0, minimum=1.0)
    tau_rtol: float = spec("... and tau changed by less than this (relative) since the last "
                           "check", 0.01, minimum=0.0, exclusive_minimum=True)
    burn_factor: float = spec("burn-in = burn_factor x max tau steps", 2.0, minimum=0.0)
    tau_discard: float = spec("share of the chain's first steps (the initial transient) left "
                              "out of the tau estimate and the stopping rule's length, and "
                              "burnt in at least; 0 = the whole chain", 0.0, minimum=0.0,
                              maximum=0.9)
    thin_factor: float = spec("thinning = thin_factor x min tau steps (at least 1)", 0.5,
                              minimum=0.0, exclusive_minimum=True)
    write_every: int = spec("write the chain to the run file every this many steps (a "
                            "SIGKILL loses at most these)", 10, minimum=1)
    progress_every_s: float = spec("interval of the progress lines when stdout is not a "
                                   "terminal", 30.0, units="s", minimum=0.0,
                                   exclusive_minimum=True)
    start: str = spec("initial walkers: drawn from the prior, or a small ball around each "
                      "parameter's start", "prior", choices=("prior", "ball"))
    ball_scale: float = spec("radius of the starting ball as a fraction of each prior's "
                             "unit-cube width", 0.01, minimum=0.0, exclusive_minimum=True,
                             maximum=0.5)
    vectorize: bool = spec("evaluate all walkers in one call (surrogate likelihoods)", False)
    moves: str = spec("emcee proposal moves: the stretch move, or a mixture of differential-"
                      "evolution (0.8) and snooker (0.2) moves for curved or ridge-like "
                      "posteriors (scan/sampler/moves.py)", "stretch",
                      choices=("stretch", "differential_evolution"))
    test_correlation: float = spec("correlation coefficient between every pair of "
                                   "parameters of the gaussian_test target", 0.0,
                                   minimum=-0.99, maximum=0.99)


@dataclass(frozen=True, kw_only=True)
class ObservablesSection:
    """``[observables]``: induced GWs today and the PBH abundance (every convention)."""

    n_f: int = spec("number of GW frequencies (log-spaced over the spectrum's range)", 200,
                    minimum=8, maximum=N_GRID_MAX)
    n_m: int = spec("number of PBH masses (log-spaced)", 200, minimum=8, maximum=N_GRID_MAX)
    n_eff: float = spec("N_eff today (radiation density, g_* today)", 3.044, minimum=0.0)
    gstar_table: str = spec("optional CSV of g_*(T): temperature [GeV], g_rho, g_s, relative "
                            "to the config file (replaces the built-in table of gstar)", "")
    gstar: str = spec("built-in g_*(T) table: the published lattice-based table of Saikawa "
                      "& Shirai 2018, or ideal-gas (our Standard-Model computation, the "
                      "default before issue 15)", "saikawa-shirai-2018",
                      choices=tuple(GSTAR_TABLES))
    window: str = spec("smoothing window of the density variance (thresholds are "
                       "window-specific)", "gaussian", choices=PBH_WINDOWS)
    criterion: str = spec("collapse criterion", "compaction", choices=PBH_CRITERIA)
    threshold: float = spec("collapse threshold: C_th (compaction) or delta_c (linear "
                            "criteria), matching the window", 0.5, minimum=0.0,
                            exclusive_minimum=True)
    mass_function: str = spec("critical collapse (extended) or monochromatic M = gamma M_H",
                              "critical", choices=PBH_MASS_FUNCTIONS)
    gamma_c: float = spec("critical-collapse exponent", 0.36, minimum=0.0, exclusive_minimum=True)
    collapse_K: float = spec("critical-collapse coefficient K in M = K M_H (delta - delta_c)"
                             "^gamma_c", 3.3, minimum=0.0, exclusive_minimum=True)
    gamma: float = spec("M/M_H of the monochromatic mass function", 0.2, minimum=0.0,
                        exclusive_minimum=True, maximum=1.0)
    ps_factor: float = spec("prefactor of the Press-Schechter-like integral (1 or 2)", 1.0,
                            minimum=0.0, exclusive_minimum=True)
    omega_dm_h2: float = spec("dark-matter density the PBH fraction refers to", 0.12,
                              minimum=0.0, exclusive_minimum=True)
    non_gaussianity: str = spec("zeta = F(zeta_G) in the compaction function: gaussian, "
                                "local (f_nl, g_nl), logarithmic (log_lambda) or model "
                                "(delta-N on the solved model's background; sample/grid: the "
                                "surrogate's capped logarithmic fit of it, trained with "
                                "model)", "gaussian",
                                choices=NON_GAUSSIANITIES)
    f_nl: float = spec("local f_NL (non_gaussianity = 'local')", 0.0)
    g_nl: float = spec("local g_NL (non_gaussianity = 'local')", 0.0)
    log_lambda: float = spec("lambda of zeta = -ln(1 - lambda zeta_G)/lambda "
                             "(non_gaussianity = 'logarithmic'; 3 = ultra-slow roll ending "
                             "abruptly, f_NL = 5 lambda/6)", 0.0)

    qcd_threshold: str = spec("collapse threshold across the QCD crossover: off (one "
                              "threshold) or harada-scaled (C_th times delta_c(w(T))/"
                              "delta_c(1/3), w from the g_* table; opt-in)", "off",
                              choices=QCD_THRESHOLDS)
    qcd_collapse: str = spec("critical-collapse exponent across the QCD crossover: off (one "
                             "gamma_c) or gamma-of-w (gamma_c times gamma(w(T))/gamma(1/3), "
                             "perfect-fluid exponents interpolated in w; K fixed; opt-in)",
                             "off", choices=QCD_COLLAPSES)
    sigw_kernel: str = spec("induced-GW kernel: radiation (closed form, w = c_s^2 = 1/3) or "
                            "qcd-fluid (tabulated on the Saikawa-Shirai 2018 background, "
                            "softened w and c_s^2 across the QCD crossover; every command)",
                            "radiation", choices=SIGW_KERNELS)

    def validate(self, where: str, source: str) -> None:
        """Cross-field rules of the non-Gaussianity and QCD-threshold conventions."""
        kind = self.non_gaussianity
        used = {"local": ("f_nl", "g_nl"), "logarithmic": ("log_lambda",)}.get(kind, ())
        for key in ("f_nl", "g_nl", "log_lambda"):
            if getattr(self, key) != 0.0 and key not in used:
                raise ConfigError(source, f"{where}.{key}", f"is {getattr(self, key):g} but "
                                  f"non_gaussianity = '{kind}' does not use it",
                                  f"remove it, or set non_gaussianity = "
                                  f"'{'logarithmic' if key == 'log_lambda' else 'local'}'")
        if kind == "logarithmic" and self.log_lambda == 0.0:
            raise ConfigError(source, f"{where}.log_lambda", "non_gaussianity = 'logarithmic' "
                              "needs a non-zero log_lambda", "e.g. log_lambda = 3")
        for key, on in (("non_gaussianity", kind != "gaussian"),
                        ("qcd_threshold", self.qcd_threshold != "off"),
                        ("qcd_collapse", self.qcd_collapse != "off")):
            if on and (self.criterion, self.mass_function) != ("compaction", "critical"):
                raise ConfigError(source, f"{where}.{key}", f"'{getattr(self, key)}' needs "
                                  "criterion = 'compaction' and mass_function = 'critical' "
                                  "(it enters through the compaction function)",
                                  f"set those, or the default {key}")
        if self.sigw_kernel != "radiation" and (self.gstar_table or self.gstar != TABLE_GSTAR):
            raise ConfigError(source, f"{where}.sigw_kernel", f"'{self.sigw_kernel}' is "
                              f"tabulated on the {TABLE_GSTAR} g_*(T) background, not on "
                              f"{self.gstar_table or self.gstar!r}",
                              f"set gstar = '{TABLE_GSTAR}' (no gstar_table), or "
                              "sigw_kernel = 'radiation'")


@dataclass(frozen=True, kw_only=True)
class RunConfig:
    """A whole run configuration (see ``configs/README.md``)."""

    run: RunSection = spec("[run] table", default_factory=RunSection)
    model: ModelSection = spec("[model] table: potential and kinetic function")
    background: BackgroundSection = spec("[background] table", default_factory=BackgroundSection)
    pivot: PivotSection = spec("[pivot] table", default_factory=PivotSection)
    modes: ModesSection = spec("[modes] table", default_factory=ModesSection)
    observables: ObservablesSection = spec("[observables] table",
                                           default_factory=ObservablesSection)
    surrogate: SurrogateSection = spec("[surrogate] table", default_factory=SurrogateSection)
    parameters: tuple[ParameterSection, ...] = spec(
        "varied model parameters ([[parameters]] tables)", default_factory=tuple)
    nuisance: tuple[NuisanceSection, ...] = spec(
        "likelihood nuisance parameters ([[nuisance]] tables)", default_factory=tuple)
    sampler: SamplerSection = spec("[sampler] table", default_factory=SamplerSection)
    likelihood: LikelihoodSection = spec("[likelihood] table",
                                         default_factory=LikelihoodSection)
    grid: GridSection = spec("[grid] table", default_factory=GridSection)
    # Not part of the schema: where the config came from (set by load_config).
    source: str = dataclasses.field(default="<config>", compare=False)
    text: str = dataclasses.field(default="", compare=False, repr=False)
    overrides: tuple[str, ...] = dataclasses.field(default=(), compare=False)
    base_dir: str = dataclasses.field(default="", compare=False)  # inputs resolved against

    @property
    def effective_text(self) -> str:
        """The config text with its overrides appended as comments (hashed and stored)."""
        lines = [self.text.rstrip("\n")]
        lines += [f"# --set {item}" for item in self.overrides]
        return "\n".join(lines) + "\n"
