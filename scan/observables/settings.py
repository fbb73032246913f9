"""The ``[observables]`` section as the observables stage uses it: conventions, g_*, grids.

:func:`settings_of` is the one place a run config's ``[observables]`` keys turn into the
values :func:`scan.observables.compute_observables` and the batch plans take (and the one
place the optional g_*(T) table file is read).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scan.config.schema import ObservablesSection
from scan.errors import ConfigError
from scan.observables import gstar
from scan.observables.pbh import PBHConventions
from scan.observables.pbh.qcd import qcd_notes
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of
from scan.observables.record import Observables
from scan.observables.single import compute_observables


@dataclass(frozen=True)
class ObservableSettings:
    """What the observables stage needs from ``[observables]``.

    Attributes
    ----------
    conventions : PBHConventions
        Window, criterion, threshold, critical collapse, Ω_DM h².
    dof : gstar.DofTable or None
        The g_*(T) table: a user's file, or the built-in table named by ``gstar``.
    n_eff : float
        N_eff today.
    n_f, n_m : int
        Sizes of the frequency and mass grids of one spectrum's observables.
    non_gaussianity : str
        ``[observables] non_gaussianity``.
    zeta_map : ZetaMap or None
        The analytic zeta = F(zeta_G) (None for ``model``: the solve computes it).
    qcd_threshold : str
        ``[observables] qcd_threshold``.
    qcd_collapse : str
        ``[observables] qcd_collapse``.
    sigw_kernel : str
        ``[observables] sigw_kernel`` (:mod:`scan.observables.sigw_kernel_table`).
    """

    conventions: PBHConventions
    dof: gstar.DofTable | None
    n_eff: float
    n_f: int
    n_m: int
    non_gaussianity: str = "gaussian"
    zeta_map: ZetaMap | None = None
    qcd_threshold: str = "off"
    qcd_collapse: str = "off"
    sigw_kernel: str = "radiation"

    def compute(self, k: np.ndarray, P_zeta: np.ndarray,
                zeta_map: ZetaMap | None = None) -> Observables:
        """Ω_GW h²(f) and f_PBH(M) of a tabulated spectrum (k [Mpc⁻¹]) with these settings.

        ``zeta_map`` (the model's delta-N map) replaces the configured analytic map.
        """
        return compute_observables(k, P_zeta, conventions=self.conventions, n_f=self.n_f,
                                   n_m=self.n_m, dof=self.dof, n_eff=self.n_eff,
                                   zeta_map=zeta_map or self.zeta_map,
                                   qcd_threshold=self.qcd_threshold,
                                   qcd_collapse=self.qcd_collapse,
                                   sigw_kernel=self.sigw_kernel)


def conventions_of(section: ObservablesSection) -> PBHConventions:
    """PBH conventions of an ``[observables]`` section."""
    o = section
    return PBHConventions(window=o.window, criterion=o.criterion, threshold=o.threshold,
                          mass_function=o.mass_function, gamma_c=o.gamma_c, K=o.collapse_K,
                          gamma=o.gamma, ps_factor=o.ps_factor, omega_dm_h2=o.omega_dm_h2)


def settings_of(section: ObservablesSection) -> ObservableSettings:
    """The settings of an ``[observables]`` section (reads its g_* table file, if any)."""
    dof = gstar.load_table(section.gstar_table) if section.gstar_table \
        else gstar.TABLES[section.gstar]()
    kind = section.non_gaussianity
    zmap = None if kind == "model" else zeta_map_of(kind, f_nl=section.f_nl,
                                                    g_nl=section.g_nl,
                                                    log_lambda=section.log_lambda)
    return ObservableSettings(conventions_of(section), dof, section.n_eff, section.n_f,
                              section.n_m, kind, zmap, section.qcd_threshold,
                              section.qcd_collapse, section.sigw_kernel)


def require_batch_conventions(section: ObservablesSection, source: str,
                              exact_only: bool = False) -> None:
    """Refuse conventions the vectorised (surrogate) and table paths do not compute.

    The sampler, the grid and verify evaluate f_PBH for a stack of spectra: Gaussian zeta
    (:mod:`scan.observables.pbh.threshold_plan`), the ``local`` and ``logarithmic`` maps
    with the config's fixed parameters (:mod:`scan.observables.pbh.ng_stack`), each with
    the QCD-era threshold and exponent per formation epoch, and ``model`` with each
    sample's emulated delta-N map (:mod:`scan.observables.pbh.ng_model_plan`; the
    surrogate must emulate it).  ``exact_only``: the path has a spectrum but no model
    (:func:`scan.posterior.exact.exact_from_arrays`), where ``model`` (which needs the
    background for delta-N) is refused.

    The induced-GW integral of the batch path takes either kernel: the radiation kernel
    as one scale-free plan, ``qcd-fluid`` as one per row of its table
    (:mod:`scan.observables.quadratic_qcd`).

    Raises
    ------
    ConfigError
        Naming ``observables.non_gaussianity``.
    """
    if exact_only and section.non_gaussianity == "model":
        raise ConfigError(source, "observables.non_gaussianity", "'model' needs the model's "
                          "background for its delta-N map, which a spectrum given as "
                          "arrays does not have", "solve the model (zetascan solve or "
                          "verify), or use 'local' / 'logarithmic' with fixed parameters")


#: How the batch path represents ``model`` (attribute ``model_map`` of chains and grids).
MODEL_MAP: str = "capped_logarithmic"


def pbh_convention_attrs(section: ObservablesSection) -> dict:
    """The PBH statistics conventions of a run as flat attributes (as ``pbh`` of a solve
    result): ``non_gaussianity`` and its parameters (for ``model``, ``model_map``: the
    emulated representation of each sample's delta-N map), ``qcd_threshold``, ``qcd_collapse``
    and, with either on, ``qcd_notes`` (the limitation lines the single path prints,
    newline-separated, :func:`scan.observables.pbh.qcd.qcd_notes`)."""
    settings = settings_of(section)
    attrs = {"non_gaussianity": section.non_gaussianity} \
        if section.non_gaussianity in ("gaussian", "model") else settings.zeta_map.as_attrs()
    if section.non_gaussianity == "model":           # the batch path's representation
        attrs["model_map"] = MODEL_MAP
    attrs.update(qcd_threshold=section.qcd_threshold, qcd_collapse=section.qcd_collapse)
    notes = qcd_notes(settings.conventions, section.qcd_threshold, section.qcd_collapse,
                      settings.dof)
    return {**attrs, "qcd_notes": "\n".join(notes)} if notes else attrs


def gw_convention_attrs(section: ObservablesSection) -> dict:
    """The induced-GW convention of a run as flat attributes: ``sigw_kernel`` (chains and
    grids, beside :func:`pbh_convention_attrs`)."""
    return {"sigw_kernel": section.sigw_kernel}
