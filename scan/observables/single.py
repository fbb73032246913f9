"""From a curvature spectrum to what detectors and black-hole bounds see.

One pure stage shared by ``zetascan observe`` (a user's table), ``zetascan solve`` (the
exact spectrum) and later the surrogate: Ω_GW,0 h²(f) from :mod:`scan.observables.sigw` and the PBH
mass function from :mod:`scan.observables.pbh`, on frequency and mass grids derived from the table.
"""
from __future__ import annotations

import warnings

import numpy as np

from scan.observables import cosmo, sigw
from scan.observables.pbh import PBHConventions, plan_pbh
from scan.observables.pbh.nongaussian import check_conventions, plan_nongaussian
from scan.observables.pbh.qcd import (
    check_collapse,
    collapse_note,
    epoch_exponents,
    epoch_thresholds,
    qcd_note,
)
from scan.observables.pbh.zeta_map import ZetaMap
from scan.observables.record import Observables, peak_of
from scan.observables.sigw_kernel_table import kernel_range_note

#: P_zeta above which the classical, perturbative treatment fails [1]: quantum diffusion
#: dominates once P_zeta ≳ O(0.1–1) (shared/physics/inflation.md sect. 5.5; Pattison,
#: Vennin, Assadullahi & Wands 2017, arXiv:1707.00537, from memory); the default of
#: ``modes.stochastic_limit``.
PERTURBATIVE_LIMIT = 0.1

#: Budget of n_f x table rows [1]: the induced-GW quadrature's memory grows in proportion
#: (measured with ``zetascan observe``: ~0.55 MiB per row at n_f = 200, on top of ~150 MiB
#: of libraries), so 160000 (800 rows at the default 200 frequencies) keeps a run near
#: 0.6 GiB.  Longer tables are resampled (:func:`resample_table`).
ROW_BUDGET = 160_000
#: Fewest and most rows a table is resampled to [1] (the PBH plan's memory grows as
#: n_m x rows whatever n_f is: 20000 rows at n_m = 1000 took 1.3 GiB).
MIN_RESAMPLED_ROWS, MAX_TABLE_ROWS = 64, 800


def max_table_rows(n_f: int) -> int:
    """Most table rows the observables use with ``n_f`` frequencies (longer: resampled)."""
    return int(np.clip(ROW_BUDGET // max(int(n_f), 1), MIN_RESAMPLED_ROWS, MAX_TABLE_ROWS))


def _log_interp(k_new: np.ndarray, k: np.ndarray, P: np.ndarray) -> np.ndarray:
    """P at ``k_new`` interpolated linearly in (ln k, ln P), as the observables read a
    table (0 between a zero and its neighbour, 0 outside)."""
    lnk = np.log(k)
    x = np.log(k_new)
    i = np.clip(np.searchsorted(lnk, x, side="right") - 1, 0, lnk.size - 2)
    t = (x - lnk[i]) / (lnk[i + 1] - lnk[i])
    p0, p1 = P[i], P[i + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.exp((1.0 - t) * np.log(p0) + t * np.log(p1))
    out = np.clip(out, np.minimum(p0, p1), np.maximum(p0, p1))  # rounding of exp(log)
    out = np.where((p0 > 0) & (p1 > 0), out, np.where(t == 0.0, p0, np.where(t == 1.0, p1, 0.0)))
    return np.where((x < lnk[0]) | (x > lnk[-1]), 0.0, out)


def resample_table(k: np.ndarray, P_zeta: np.ndarray, max_rows: int
                   ) -> tuple[np.ndarray, np.ndarray, str]:
    """A table of at most ``max_rows`` rows log-spaced over the same range, the peak kept.

    Returns
    -------
    k [Mpc^-1], P_zeta [1], note : the resampled table and a note saying so, with the
        largest relative change of P_zeta at the given rows above 1e-3 of its maximum
        (both read as log-interpolated tables); the inputs unchanged and "" when the
        table is short enough.
    """
    if k.size <= max_rows:
        return k, P_zeta, ""
    peak = int(np.argmax(P_zeta))
    k_new = np.union1d(np.geomspace(k[0], k[-1], max_rows - 1), k[[0, peak, -1]])
    P_new = _log_interp(k_new, k, P_zeta)
    at = np.minimum(np.searchsorted(k, k_new), k.size - 1)
    given = k[at] == k_new
    P_new[given] = P_zeta[at[given]]  # nodes that are rows keep their values exactly
    top = float(P_zeta[peak])
    live = P_zeta > 1e-3 * top if top > 0 else np.zeros(k.size, bool)
    change = np.abs(_log_interp(k[live], k_new, P_new) / P_zeta[live] - 1.0)
    worst = float(change.max()) if change.size else 0.0
    note = (f"the table's {k.size} rows were resampled onto {k_new.size} log-spaced "
            f"wavenumbers (memory grows with n_f x rows; at most {max_rows} rows with this "
            f"n_f): P_zeta changes by up to {worst:.2%} at the given rows above 1e-3 of "
            "its maximum; pass a coarser table to choose the nodes yourself")
    return k_new, P_new, note


#: Formation epochs of the PBH plan (plan_pbh's default).
N_FORMATION: int = 256


def frequency_grid(k: np.ndarray, n_f: int) -> np.ndarray:
    """Log-spaced frequencies [Hz] from the table's first k to twice its last k."""
    return np.geomspace(cosmo.k_to_f(k[0]), cosmo.k_to_f(2.0 * k[-1]), n_f)


def mass_grid(k: np.ndarray, conventions: PBHConventions, n_m: int, dof=None,
              n_eff: float = cosmo.N_EFF_DEFAULT) -> np.ndarray:
    """Log-spaced PBH masses [M_sun] covering the horizon masses of the table."""
    m_hi = float(cosmo.horizon_mass_msun(k[0], dof, n_eff)) * max(conventions.K,
                                                                     conventions.gamma)
    m_lo = float(cosmo.horizon_mass_msun(k[-1], dof, n_eff)) * 1e-4
    return np.geomspace(m_lo, m_hi, n_m)


def compute_observables(k: np.ndarray, P_zeta: np.ndarray, *,
                        conventions: PBHConventions = PBHConventions(), n_f: int = 200,
                        n_m: int = 200, dof=None, n_eff: float = cosmo.N_EFF_DEFAULT,
                        zeta_map: ZetaMap | None = None,
                        qcd_threshold: str = "off", qcd_collapse: str = "off",
                        sigw_kernel: str = "radiation") -> Observables:
    """Ω_GW h²(f) and f_PBH(M) of a tabulated spectrum.

    A table longer than :func:`max_table_rows` is resampled first (:func:`resample_table`;
    the returned notes say so), so memory stays bounded whatever the input's length.

    Parameters
    ----------
    k : ndarray
        Strictly increasing wavenumbers [Mpc⁻¹].
    P_zeta : ndarray
        Curvature power spectrum at ``k`` (log-interpolated; zero outside the table).
    conventions : PBHConventions
        Window, criterion, threshold, critical collapse, Ω_DM h².
    n_f, n_m : int
        Sizes of the frequency and mass grids.
    dof : optional
        g_*(T): None for the built-in Standard Model, a ``DofTable``, or a pair.
    n_eff : float
        N_eff today (radiation density and g_* today).
    zeta_map : ZetaMap, optional
        zeta = F(zeta_G); a non-Gaussian map gives f_PBH with it, the Gaussian total is
        kept beside it (``f_pbh_total_gaussian``) and a note says how far it moved.
    qcd_threshold : str
        ``"harada-scaled"``: the threshold follows w(T) across the QCD crossover
        (:mod:`scan.observables.pbh.qcd`); ``"off"``: one threshold for every epoch.
    qcd_collapse : str
        ``"gamma-of-w"``: the critical-collapse exponent follows w(T) across the QCD
        crossover (:mod:`scan.observables.pbh.qcd`; K stays fixed); ``"off"``: one gamma_c.
    sigw_kernel : str
        Induced-GW kernel: ``"radiation"`` or ``"qcd-fluid"`` (tabulated QCD-era kernel,
        :mod:`scan.observables.sigw_kernel_table`; a note states its approximations).

    Returns
    -------
    Observables
    """
    k = np.asarray(k, dtype=float)
    P_zeta = np.asarray(P_zeta, dtype=float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        sigw.check_spectrum(P_zeta)
    k, P_zeta, resampled = resample_table(k, P_zeta, max_table_rows(n_f))
    f = frequency_grid(k, n_f)
    omega = sigw.plan_sigw(k, f_out=f, dof=dof, n_eff=n_eff,
                           kernel=sigw_kernel).omega_gw_h2(P_zeta)
    M = mass_grid(k, conventions, n_m, dof, n_eff)
    plan = plan_pbh(k, M, conventions, n_formation=N_FORMATION, dof=dof, n_eff=n_eff)
    pbh = plan.evaluate(P_zeta)
    notes = tuple(str(w.message) for w in caught)
    if sigw_kernel != "radiation":
        notes += (kernel_range_note(),)
    gaussian_total = None
    non_gaussian = zeta_map is not None and not zeta_map.is_gaussian
    if non_gaussian or qcd_threshold != "off" or qcd_collapse != "off":
        zmap = zeta_map if non_gaussian else ZetaMap()
        check_conventions(conventions, zmap, qcd_threshold)
        check_collapse(conventions, qcd_collapse)
        thresholds = exponents = None
        if qcd_threshold != "off":
            thresholds = epoch_thresholds(plan.M_H, conventions.threshold, dof)
            notes += (qcd_note(plan.M_H, thresholds, conventions.threshold),)
        if qcd_collapse != "off":
            exponents = epoch_exponents(plan.M_H, conventions.gamma_c, dof)
            notes += (collapse_note(plan.M_H, exponents, conventions),)
        ng_plan = plan_nongaussian(plan, N_FORMATION)
        if non_gaussian:
            gaussian_total = pbh.f_pbh_total if thresholds is None and exponents is None \
                else ng_plan.evaluate(P_zeta, ZetaMap(), thresholds, exponents).f_pbh_total
        pbh = ng_plan.evaluate(P_zeta, zmap, thresholds, exponents)
        if non_gaussian:
            notes += (nongaussian_note(zmap, gaussian_total, pbh.f_pbh_total,
                                       conventions.window),)
    f_peak, omega_peak = peak_of(f, omega)
    warnings_ = physics_notes(float(np.max(P_zeta)), float(pbh.f_pbh_total))
    return Observables(f_hz=f, omega_gw_h2=omega, m_msun=pbh.M, f_pbh_per_lnm=pbh.f_pbh,
                       f_pbh_total=pbh.f_pbh_total, f_gw_peak=f_peak,
                       omega_gw_h2_peak=omega_peak, conventions=pbh.conventions,
                       notes=notes + ((resampled,) if resampled else ()) + warnings_,
                       zeta_map=zeta_map, f_pbh_total_gaussian=gaussian_total,
                       qcd={"qcd_threshold": qcd_threshold, "qcd_collapse": qcd_collapse},
                       sigw_kernel=sigw_kernel)


def nongaussian_note(zmap: ZetaMap, gaussian: float, nongaussian: float, window: str) -> str:
    """One line saying how far non-Gaussian zeta moves f_PBH (printed with the result)."""
    ratio = nongaussian / gaussian if gaussian > 0 else float("inf")
    text = (f"non-Gaussian zeta ({zmap.kind}, f_NL at the peak {zmap.f_nl_equivalent():.3g}) "
            f"moves f_PBH from {gaussian:.3e} (Gaussian) to {nongaussian:.3e} "
            f"(x {ratio:.3g}): the tail of zeta, not P_zeta alone, sets the verdict")
    if zmap.kind == "logarithmic" and zmap.log_lambda < 0:
        text += ("; log_lambda < 0: zeta -> -inf at the map's edge zeta_G = 1/log_lambda, "
                 "where F' diverges and a small C_G gives a large C_l, so PBHs form near "
                 "the edge and f_PBH rises where the local map with the same f_NL lowers "
                 "it; the map is not trustworthy that far: check with the model's own "
                 "delta-N map (non_gaussianity = 'model')")
    if window == "gaussian":
        text += ("; zeta_G is smoothed with the Gaussian window itself (our convention; the "
                 "top-hat window uses the shell value sin(kR)/kR of Ferrante et al. 2023)")
    return text


def physics_notes(P_max: float, f_pbh_total: float) -> tuple[str, ...]:
    """Where the numbers mislead: a spectrum beyond perturbativity, f_PBH above 1."""
    notes = []
    if P_max > PERTURBATIVE_LIMIT:
        notes.append(f"P_zeta reaches {P_max:.3g} > {PERTURBATIVE_LIMIT:g}: beyond perturbation "
                     "theory (quantum diffusion dominates); Omega_GW and f_PBH computed from "
                     "it are not physical")
    if f_pbh_total > 1.0:
        notes.append(f"f_PBH total = {f_pbh_total:.3g} > 1: more black holes than dark "
                     "matter; this spectrum is excluded, the number itself means nothing")
    return tuple(notes)
