"""The one observables record: what a model predicts and the likelihood terms read.

The same type serves one spectrum (``zetascan solve`` / ``observe``: 1-D arrays, float
scalars) and many walkers on shared grids (the sampler: a leading model axis of length m
on every per-model field, the grids ``f_hz`` and ``m_msun`` shared).  Fields a producer
does not know stay ``None`` (a user's spectrum table has no n_s).
"""
from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from scan.observables.pbh.conventions import PBHConventions
from scan.observables.pbh.zeta_map import ZetaMap

#: Fields shared by all models of a stack (never indexed by :meth:`Observables.row`).
SHARED_FIELDS: frozenset[str] = frozenset({"f_hz", "m_msun", "ln_1e10_as", "conventions",
                                           "notes", "qcd", "sigw_kernel"})


@dataclasses.dataclass(frozen=True, eq=False)
class Observables:
    """Ω_GW h²(f) today, f_PBH(M) and the pivot scalars of one model or of m models.

    Attributes
    ----------
    f_hz : ndarray, shape (n_f,) [Hz]
        GW frequencies today.
    omega_gw_h2 : ndarray, shape (n_f,) or (m, n_f) [1]
        Ω_GW,0 h² per ln f.
    m_msun : ndarray, shape (n_M,) [M_sun]
        PBH masses.
    f_pbh_per_lnm : ndarray, shape (n_M,) or (m, n_M) [1]
        d f_PBH / d ln M (fraction of the dark matter per ln M).
    f_pbh_total : float or ndarray (m,) [1]
        ∫ f_PBH d ln M.
    n_s, r : float or ndarray (m,) [1]
        Scalar tilt and tensor-to-scalar ratio at the pivot.
    N_star : float or ndarray (m,) [e-folds]
        E-folds from the pivot's horizon exit to the end of inflation.
    ln_1e10_as : float [1]
        ln(10¹⁰ A_s) of the normalisation (shared).
    k_peak : float or ndarray (m,) [Mpc⁻¹]
    P_peak : float or ndarray (m,) [1]
        Position and height of the maximum of P_ζ.
    f_gw_peak : float or ndarray (m,) [Hz]
    omega_gw_h2_peak : float or ndarray (m,) [1]
        Position and height of the maximum of Ω_GW,0 h².
    ln_mass_shift : ndarray (m,) or None [ln M_sun]
        Walker i's masses are ``m_msun * exp(ln_mass_shift[i])`` (the critical-collapse
        coefficient as a nuisance, see :func:`scan.observables.batch.with_collapse_coefficient`);
        None: every model on ``m_msun``.
    conventions : PBHConventions or None
        The PBH conventions f_PBH was computed with.
    zeta_map : ZetaMap or None
        zeta = F(zeta_G) f_PBH was computed with (None: Gaussian, as before issue 15).
    f_pbh_total_gaussian : float or None [1]
        f_PBH total of the same spectrum with Gaussian zeta, when ``zeta_map`` is not
        Gaussian (for comparison; None otherwise).
    notes : tuple of str
        Warnings raised on the way (truncated or under-resolved spectrum tables).
    qcd : dict or None
        The QCD-era conventions ``{"qcd_threshold": ..., "qcd_collapse": ...}`` f_PBH was
        computed with (None: not recorded by the producer).
    sigw_kernel : str or None
        The induced-GW kernel Omega_GW was computed with (``[observables] sigw_kernel``;
        None: not recorded by the producer).
    """

    f_hz: np.ndarray | None = None
    omega_gw_h2: np.ndarray | None = None
    m_msun: np.ndarray | None = None
    f_pbh_per_lnm: np.ndarray | None = None
    f_pbh_total: Any = None
    n_s: Any = None
    r: Any = None
    N_star: Any = None
    ln_1e10_as: float | None = None
    k_peak: Any = None
    P_peak: Any = None
    f_gw_peak: Any = None
    omega_gw_h2_peak: Any = None
    ln_mass_shift: np.ndarray | None = None
    conventions: PBHConventions | None = None
    notes: tuple[str, ...] = ()
    zeta_map: ZetaMap | None = None
    f_pbh_total_gaussian: Any = None
    qcd: dict[str, str] | None = None
    sigw_kernel: str | None = None

    def row(self, i: int) -> Observables:
        """Model ``i`` of a stack, with its own masses in ``m_msun`` (no shift left)."""
        values = {}
        for fld in dataclasses.fields(self):
            value = getattr(self, fld.name)
            shared = fld.name in SHARED_FIELDS or value is None
            values[fld.name] = value if shared else value[i]
        shift = values.pop("ln_mass_shift")
        if shift is not None:
            values["m_msun"] = self.m_msun * math.exp(shift)
        return Observables(**values)

    def replace(self, **changes: Any) -> Observables:
        """A copy with ``changes`` (the record is frozen)."""
        return dataclasses.replace(self, **changes)


def peak_of(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """``(x, y)`` at the largest sample of ``y`` (NaN, NaN for an empty ``y``)."""
    y = np.asarray(y, dtype=float)
    if not y.size:
        return math.nan, math.nan
    i = int(np.argmax(y))
    return float(x[i]), float(y[i])
