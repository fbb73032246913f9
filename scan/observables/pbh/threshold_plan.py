"""f_PBH(M) for a stack of spectra with a collapse threshold per spectrum.

The sampler treats the collapse threshold as a nuisance parameter: every walker carries
its own C_th (``compaction``) or delta_c (``press-schechter``, ``peaks``), calibrated
for the plan's window.  :func:`plan_pbh_thresholds` plans once for a spectrum table,
output masses and a threshold range; :meth:`ThresholdPlan.evaluate` then takes m
spectra and m thresholds and returns f_PBH(M) and its total for every row.

Exact, not interpolated in the threshold.  Everything that costs a matrix product or a
power of the (M, M_H) grid does not depend on the threshold and is planned once: the
variance matrices (shared with a :class:`scan.observables.pbh.plan.PBHPlan`), the formation epochs and
their weights, and the critical-collapse variable x = (M/(K M_H))^{1/gamma_c}.  What does
depend on the threshold is elementwise: C = C_th + x, its Gaussian variable y (y = C
for the linear criteria, y = C_l(C) = (4/3)[1 - sqrt(1 - 3C/2)] for the compaction
function, Young, Musco & Byrnes 2019, arXiv:1904.00984), dy/dC, and the density p(y).
These are evaluated per (spectrum, epoch) pair with that spectrum's threshold, on the
same pairs and with the same quadrature as :meth:`PBHPlan.from_variance` (for the linear
criteria from its threshold-free table, :mod:`scan.observables.pbh.tables`), so each row equals
``plan_pbh(..., replace(conventions, threshold=t)).evaluate(row)`` to rounding (the
tests pin this to 1e-12 relative) at about the cost of one fixed-threshold evaluation.
Interpolating ln f between a few threshold nodes would cost one such evaluation per
node, and still be approximate.  Both pair sums are compiled loops with vectorised
exponentials and logarithms (:mod:`scan.observables.pbh.pair_mass`,
:mod:`scan.observables.pbh.pair_beta`).

The QCD-era conventions (:mod:`scan.observables.pbh.qcd`) fit the same layout: the
threshold of a (spectrum, epoch) pair is the row's (radiation-era) threshold times the
epoch's fixed delta_c(w)/delta_c(1/3) (``harada-scaled``), and gamma-of-w's exponent
enters x and the beta quadrature per epoch; both depend only on the epoch's horizon mass,
so they are planned once.  Each row then equals the per-spectrum path
(:meth:`scan.observables.pbh.nongaussian.NonGaussianPlan.evaluate` with Gaussian zeta and
those per-epoch thresholds and exponents) to its quadrature's rounding.

Units: k [Mpc^-1], masses [M_sun], P_zeta, sigma^2, thresholds and f [1].
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scan.observables import cosmo
from scan.observables.pbh.abundance import prefactor
from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.pair_beta import (
    beta_mono_rows,
    beta_weighted_pairs,
    criterion_code,
    node_powers,
)
from scan.observables.pbh.pair_mass import critical_mass_function
from scan.observables.pbh.plan import UNDERFLOW_HALF_NU2, PBHPlan, _log_interp, plan_pbh
from scan.observables.pbh.qcd import epoch_exponents, epoch_thresholds
from scan.observables.pbh.tables import beta_tabulated
from scan.observables.pbh.thresholds import C_MAX, compaction_linear


@dataclass(frozen=True)
class ThresholdResult:
    """f_PBH(M) per ln M for m spectra, each at its own collapse threshold.

    The spectrum-dependent attributes drop the leading axis when one spectrum was given.

    Attributes
    ----------
    M : ndarray [M_sun]
        Output masses, shape (n_M,).
    f_pbh : ndarray [1]
        Fraction of dark matter per ln M, shape (m, n_M) (or (n_M,)).
    f_pbh_total : ndarray or float [1]
        int f dln M over all masses, shape (m,) (or a float).
    M_H : ndarray [M_sun]
        Horizon masses of the formation epochs, shape (n_H,).
    sigma2 : ndarray [1]
        Smoothed variance at each M_H, shape (m, n_H) (or (n_H,)).
    threshold : ndarray or float [1]
        The threshold of each row (C_th or delta_c), shape (m,) (or a float).
    conventions : PBHConventions
        Every other convention (``threshold`` is only the default of ``evaluate``).
    """

    M: np.ndarray
    f_pbh: np.ndarray
    f_pbh_total: float | np.ndarray
    M_H: np.ndarray
    sigma2: np.ndarray
    threshold: float | np.ndarray
    conventions: PBHConventions


@dataclass(frozen=True)
class ThresholdPlan:
    """The P_zeta- and threshold-independent parts of f_PBH(M) (see
    :func:`plan_pbh_thresholds`).

    Attributes
    ----------
    base : PBHPlan
        Holds the table ``k_in``, masses ``M``, epochs ``M_H``, the variance matrices,
        epoch weights and abundance coefficients (used, not copied).
    threshold_range : tuple of float [1]
        Accepted thresholds: the closed interval [lo, hi] if ``closed``, else the
        criterion's open domain (lo, hi).
    closed : bool
    epoch_scale : ndarray or None [1]
        Per formation epoch, the factor multiplying a row's threshold (the QCD-era
        ``harada-scaled`` delta_c(w)/delta_c(1/3), :mod:`scan.observables.pbh.qcd`), shape
        (n_H,); None: 1.
    epoch_gamma : ndarray or None [1]
        Per formation epoch, gamma_c (``gamma-of-w``), shape (n_H,); None: the conventions'.
    """

    base: PBHPlan
    threshold_range: tuple[float, float]
    closed: bool
    _xT: np.ndarray | None        # x = (M/(K M_H))^{1/gamma_c}, shape (n_H, n_M)
    _rxcT: np.ndarray | None      # (M/M_H) x / gamma_c w_H F(M_H), shape (n_H, n_M)
    _force: np.ndarray | None     # epochs kept live because a kernel weight is not finite
    epoch_scale: np.ndarray | None = None
    epoch_gamma: np.ndarray | None = None
    _epoch_powers: np.ndarray | None = None  # node_powers of epoch_gamma, shape (n_H, 48)

    @property
    def k_in(self) -> np.ndarray:
        """Spectrum table [Mpc^-1], shape (n_k,)."""
        return self.base.k_in

    @property
    def M(self) -> np.ndarray:
        """Output masses [M_sun], shape (n_M,)."""
        return self.base.M

    @property
    def M_H(self) -> np.ndarray:
        """Formation horizon masses [M_sun], shape (n_H,)."""
        return self.base.M_H

    @property
    def conventions(self) -> PBHConventions:
        """The planned conventions (``threshold``: the default of :meth:`evaluate`)."""
        return self.base.conventions

    def check_thresholds(self, threshold: float | np.ndarray, m: int) -> np.ndarray:
        """The thresholds as shape (m,) [1]; ValueError outside ``threshold_range``.

        Parameters
        ----------
        threshold : float or array_like [1]
            One threshold for every row, or one per row, shape (m,).
        m : int
            Number of spectra.

        Returns
        -------
        ndarray [1]
            Shape (m,).
        """
        t = np.asarray(threshold, dtype=float)
        if t.ndim > 1 or (t.ndim == 1 and t.size != m):
            raise ValueError(f"threshold must be a number or have shape ({m},), got "
                             f"{t.shape}")
        t = np.broadcast_to(t, (m,))
        lo, hi = self.threshold_range
        if self.closed:
            bad, where = ~((t >= lo) & (t <= hi)), f"the planned range [{lo}, {hi}]"
        else:
            bad, where = ~((t > lo) & (t < hi)), f"the criterion's domain ({lo}, {hi})"
        if bad.any():
            j = int(np.flatnonzero(bad)[0])
            raise ValueError(f"{_name(self.conventions)} = {float(t[j])} (row {j}) is "
                             f"outside {where}; plan with a wider threshold_range")
        return t

    def evaluate(self, P_zeta: np.ndarray,
                 threshold: float | np.ndarray | None = None) -> ThresholdResult:
        """f_PBH(M) per ln M [1] and the total for spectra on ``k_in``, one threshold each.

        Parameters
        ----------
        P_zeta : array_like [1]
            Shape (m, n_k) on ``k_in`` (or (n_k,) for one spectrum).
        threshold : float or array_like [1], optional
            C_th (compaction) or delta_c (linear criteria) per row, shape (m,), or one
            number for all rows; inside ``threshold_range``.  Default: the planned
            ``conventions.threshold`` for every row (as :meth:`PBHPlan.evaluate`).

        Returns
        -------
        ThresholdResult
            ``f_pbh`` of shape (m, n_M), ``f_pbh_total`` and ``threshold`` of shape (m,).
        """
        s0, kR2 = self.base.sigma2(P_zeta)
        return self.from_variance(s0, threshold, kR2)

    def from_variance(self, sigma2: np.ndarray, threshold: float | np.ndarray | None = None,
                      kR2: np.ndarray | None = None) -> ThresholdResult:
        """As :meth:`evaluate`, from sigma^2 [1] (and <k^2>R^2 [1] for peaks) at ``M_H``.

        Parameters
        ----------
        sigma2 : array_like [1]
            Shape (m, n_H) or (n_H,).
        threshold : float or array_like [1], optional
            Shape (m,) or a number (default ``conventions.threshold``).
        kR2 : array_like [1], optional
            Same shape as ``sigma2`` (default 1; used by ``peaks`` only).

        Returns
        -------
        ThresholdResult
        """
        conv = self.conventions
        s0 = np.maximum(np.asarray(sigma2, dtype=float), 1e-300)
        kR2 = np.ones_like(s0) if kR2 is None else np.broadcast_to(
            np.asarray(kR2, dtype=float), s0.shape)
        s2, k2 = np.atleast_2d(s0), np.atleast_2d(kR2)
        t = self.check_thresholds(conv.threshold if threshold is None else threshold,
                                  s2.shape[0])
        tp = self.pair_thresholds(t, s2.shape)                  # (m, n_H)
        y_th = compaction_linear(tp) if conv.criterion == "compaction" else tp
        if conv.mass_function == "monochromatic":
            f_h = self.base._coef * beta_mono_rows(s2, k2, y_th, conv)
            f = _log_interp(self.M, conv.gamma * self.M_H, f_h)
            total = np.sum(self.base._wln * f_h, axis=-1)
        else:
            # nu^2/2 >= 760  <=>  sigma^2 <= y_th^2 / 1520 (NaN stays live)
            live = ~(s2 <= y_th * y_th / (2 * UNDERFLOW_HALF_NU2)) | ~np.isfinite(k2)
            f = self._critical_mass_function(s2, k2, tp, y_th, live | self._force)
            i, h = np.nonzero(live)
            beta = np.zeros(s2.shape)
            table = self.base._beta_table
            if table is not None and conv.criterion != "compaction":
                # linear criteria: the table of ln S does not depend on delta_c
                beta[i, h] = beta_tabulated(table, s2[i, h], k2[i, h], y_th[i, h])
            else:
                beta[i, h] = beta_weighted_pairs(s2[i, h], k2[i, h], y_th[i, h], conv,
                                                 self.epoch_gamma, self._epoch_powers, h)
            total = np.sum(self.base._wln * self.base._coef * beta, axis=-1)
        if s0.ndim == 1:
            return ThresholdResult(self.M, f[0], float(total[0]), self.M_H, s0,
                                   float(t[0]), conv)
        return ThresholdResult(self.M, f, total, self.M_H, s0, t, conv)

    def pair_thresholds(self, t: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
        """The threshold [1] of every (row, epoch) pair, shape ``shape`` = (m, n_H): the
        row's ``t`` (shape (m,)) times the epoch's ``epoch_scale``."""
        scale = 1.0 if self.epoch_scale is None else self.epoch_scale[None, :]
        return np.broadcast_to(t[:, None] * scale, shape)

    def _critical_mass_function(self, s2: np.ndarray, k2: np.ndarray, t: np.ndarray,
                                y_th: np.ndarray, live: np.ndarray) -> np.ndarray:
        """f(M) [1], shape (m, n_M): sum_H weight p(y) w_H F(M_H) over the ``live`` (row,
        epoch) pairs (shape (m, n_H)), by
        :func:`scan.observables.pbh.pair_mass.critical_mass_function`; ``s2``, ``k2``,
        ``t``, ``y_th``: sigma^2, <k^2> R^2, the threshold and y(threshold) [1], shape
        (m, n_H)."""
        conv = self.conventions
        i, h = np.nonzero(live)
        s = s2[i, h]
        return critical_mass_function(i, h, t[i, h], s, prefactor(s, k2[i, h], conv),
                                      y_th[i, h], self._xT, self._rxcT, s2.shape[0],
                                      criterion_code(conv))


def _name(conv: PBHConventions) -> str:
    """What the threshold is called for ``conv``'s criterion."""
    return "C_th" if conv.criterion == "compaction" else "delta_c"


def threshold_domain(conv: PBHConventions) -> tuple[float, float]:
    """Open interval of thresholds the criterion allows [1]: (0, 2/3) for C_th (type I),
    (0, inf) for delta_c."""
    return (0.0, C_MAX) if conv.criterion == "compaction" else (0.0, math.inf)


def plan_pbh_thresholds(k_in, M_msun, conventions: PBHConventions | None = None,
                        threshold_range: tuple[float, float] | None = None, *,
                        n_formation: int = 256, dof: cosmo.Dof = None,
                        n_eff: float = cosmo.N_EFF_DEFAULT, qcd_threshold: str = "off",
                        qcd_collapse: str = "off") -> ThresholdPlan:
    """Plan f_PBH(M) with a threshold per spectrum, for spectra on ``k_in`` [Mpc^-1].

    Parameters
    ----------
    k_in : array_like [Mpc^-1]
        Spectrum table (increasing), shape (n_k,).
    M_msun : array_like [M_sun] or Quantity
        Output masses, shape (n_M,).
    conventions : PBHConventions, optional
        Window, criterion, mass function, gamma_c, K, gamma, ps_factor, Omega_DM h^2;
        ``threshold`` is used only where :meth:`ThresholdPlan.evaluate` gets none.
    threshold_range : (float, float) [1], optional
        Closed range [lo, hi] of thresholds :meth:`ThresholdPlan.evaluate` accepts
        (e.g. the prior's support): C_th for ``compaction`` (0 < lo <= hi < 2/3),
        delta_c for the linear criteria (0 < lo <= hi).  Default: the whole domain.
    n_formation : int
        Number of formation epochs (as :func:`scan.observables.pbh.plan_pbh`).
    dof, n_eff
        g_*(T) and N_eff (as :func:`scan.observables.pbh.plan_pbh`).
    qcd_threshold, qcd_collapse : str
        The QCD-era conventions (:mod:`scan.observables.pbh.qcd`; compaction criterion and
        critical collapse only): ``"harada-scaled"`` multiplies every row's threshold by
        delta_c(w)/delta_c(1/3) of each formation epoch (the row's threshold is the
        radiation-era value), ``"gamma-of-w"`` gives each epoch its gamma_c(w); ``"off"``.

    Returns
    -------
    ThresholdPlan
    """
    conv = conventions or PBHConventions()
    qcd_on = qcd_threshold != "off" or qcd_collapse != "off"
    if qcd_on and (conv.criterion, conv.mass_function) != ("compaction", "critical"):
        raise ValueError("the QCD-era conventions need the compaction criterion and "
                         f"critical collapse, got {conv.criterion}, {conv.mass_function}")
    lo_d, hi_d = threshold_domain(conv)
    if threshold_range is None:
        lo, hi = lo_d, hi_d
    else:
        lo, hi = (float(v) for v in threshold_range)
        if not lo_d < lo <= hi < hi_d:
            raise ValueError(f"threshold_range [{lo}, {hi}] for {_name(conv)} must satisfy "
                             f"{lo_d} < lo <= hi < {hi_d} ({conv.criterion} criterion)")
    base = plan_pbh(k_in, M_msun, conv, n_formation=n_formation, dof=dof, n_eff=n_eff,
                    tabulate=conv.criterion != "compaction")   # the table serves any delta_c
    scale = epoch_thresholds(base.M_H, 1.0, dof) if qcd_threshold != "off" else None
    gam = epoch_exponents(base.M_H, conv.gamma_c, dof) if qcd_collapse != "off" else None
    xT = rxcT = force = None
    if conv.mass_function == "critical":
        ratio = base.M[None, :] / base.M_H[:, None]
        g_h = conv.gamma_c if gam is None else gam[:, None]
        with np.errstate(over="ignore", invalid="ignore"):
            xT = (ratio / conv.K)**(1 / g_h)
            rxcT = ratio * xT / g_h * (base._wln * base._coef)[:, None]
        force = np.zeros(base.M_H.size, bool) if conv.criterion == "compaction" \
            else ~np.isfinite(rxcT).all(1)
    return ThresholdPlan(base, (lo, hi), threshold_range is not None, xT, rxcT, force,
                         scale, gam, None if gam is None else node_powers(gam[:, None]))
