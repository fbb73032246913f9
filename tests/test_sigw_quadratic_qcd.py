"""The batch path's QCD-era induced-GW forms (scan/observables/quadratic_qcd.py).

The identity they rest on (module doc): the table's kernel at T_c is the cubic Lagrange
combination of four rows' kernels, each scale-free, so the per-row forms combined at a
walker's re-entry temperatures equal the quadratic form built with the kernel at those
temperatures (:func:`scan.observables.quadratic.plan_quadratic` with ``kernel =
"qcd-fluid"`` on the absolute table), term by term.  Tolerance 1e-12 of the largest output
(common practice): the same nodes and weights summed in another order, kernels within
~1e-14 of each other (sums of four weighted rows; measured 5e-15), over ~1e4 terms; the
same 1e-12 for the radiation form outside the tables (measured 1e-15).

The single path (:func:`scan.observables.sigw.plan_sigw`, linear in ln P on the coarse
table) and the quadratic forms (linear in P on the refined table) differ by their
interpolation (tests/test_sigw_quadratic.py), which cancels in the ratio Omega(qcd-fluid)
/ Omega(radiation): that ratio at the peak agrees within 1e-2, the plan nodes' own error
on the softened kernel at 100 nHz (scan/observables/sigw_kernel_table.py, measured
there; 2e-4 at 10 nHz).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from scan.config.schema import ObservablesSection
from scan.observables import cosmo, gstar
from scan.observables.batch import gw_on_grids, plan_batch
from scan.observables.pbh import PBHConventions
from scan.observables.quadratic import plan_quadratic
from scan.observables.quadratic_qcd import RowQuadraticPlan, plan_quadratic_qcd
from scan.observables.settings import require_batch_conventions
from scan.observables.sigw import plan_sigw

X = np.linspace(-3.0, 3.0, 41)
X_OUT = np.linspace(X[0], X[-1] + math.log(2.0), 64)
DOF = gstar.TABLES["saikawa-shirai-2018"]()
#: Peak frequencies [Hz]: re-entry at ~17 MeV, 0.41 GeV (first table), 2.4 GeV (second),
#: the 1.5 GeV seam inside the output band, and ~12 GeV (above both: radiation).
F_PEAKS = (3e-10, 1e-8, 3.7e-8, 6e-8, 3e-7)


@pytest.fixture(scope="module")
def rows() -> RowQuadraticPlan:
    return plan_quadratic_qcd(np.exp(X), np.exp(X_OUT), dof=DOF)


def _spectra() -> np.ndarray:
    """Log-normal peaks of widths 0.3, 0.5 and 1 on the relative table."""
    return np.array([1e-2 * np.exp(-X**2 / (2 * w**2)) for w in (0.3, 0.5, 1.0)])


@pytest.mark.parametrize("f_peak", F_PEAKS)
def test_row_forms_equal_the_form_at_the_walkers_temperatures(rows, f_peak):
    """Each walker's Omega equals the quadratic form built with the tabulated kernel at
    its own re-entry temperatures (rtol 1e-12 of the largest output, module doc); walkers
    at three positions around f_peak in one call."""
    P = _spectra()
    ln_k = math.log(float(cosmo.f_to_k(f_peak))) + np.array([-0.4, 0.0, 0.3])
    got = rows.omega_gw(P, ln_k)
    for i, (p, lk) in enumerate(zip(P, ln_k)):
        k = math.exp(lk)
        ref = plan_quadratic(k * np.exp(X), k * np.exp(X_OUT), kernel="qcd-fluid",
                             dof=DOF).omega_gw(p)
        np.testing.assert_allclose(got[i], ref, rtol=0, atol=1e-12 * ref.max())


def test_outside_the_tables_the_radiation_form(rows):
    """Re-entry above every table (T_c ~ 1e4 GeV): the radiation form of
    plan_quadratic (atol 1e-12 of the largest, module doc)."""
    P = _spectra()
    ref = plan_quadratic(np.exp(X), np.exp(X_OUT)).omega_gw(P)
    got = rows.omega_gw(P, np.full(3, math.log(float(cosmo.f_to_k(1e-4)))))
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12 * ref.max())


@pytest.mark.parametrize("f_peak, differs", [(1e-8, True), (6e-8, True), (3e-7, False)])
def test_softening_matches_the_single_path(rows, f_peak, differs):
    """Omega(qcd-fluid)/Omega(radiation) at the peak output of a width-0.5 peak: as the
    single path's (plan_sigw on the absolute table) within 1e-2 (module doc); and the
    kernel matters where the tables apply (|ratio - 1| > 0.1: 1.78 at 10 nHz, 0.75 at
    60 nHz measured), not above them (ratio 1)."""
    p = _spectra()[1]
    k = float(cosmo.f_to_k(f_peak))
    qcd = rows.omega_gw(p[None], np.array([math.log(k)]))[0]
    rad = plan_quadratic(np.exp(X), np.exp(X_OUT)).omega_gw(p)
    single = [plan_sigw(k * np.exp(X), k * np.exp(X_OUT), kernel=kernel,
                        dof=DOF).omega_gw(p) for kernel in ("qcd-fluid", "radiation")]
    top = int(np.argmax(single[1]))
    ratio = qcd[top] / rad[top]
    assert ratio == pytest.approx(single[0][top] / single[1][top], rel=1e-2)
    assert bool(abs(ratio - 1) > 0.1) == differs


def test_batch_plan_takes_the_kernel():
    """plan_batch(sigw_kernel='qcd-fluid') plans the row forms, gw_on_grids passes each
    walker's peak: its Omega equals the row forms' on the relative outputs (shifted by
    the same interpolation as the radiation path, which at a grid-aligned peak is exact
    at the nodes); and the batch conventions accept the kernel."""
    conv = PBHConventions()
    lo = math.log(float(cosmo.f_to_k(1e-9)))
    plan = plan_batch(X, (lo, lo + 3.0), conv, n_out=64, n_mass=16, dof=DOF,
                      sigw_kernel="qcd-fluid")
    assert isinstance(plan.sigw, RowQuadraticPlan)
    ln_k_peak = plan.lnk_gw[[10, 25]] - X_OUT[0]        # peaks on the absolute grid
    log10_p = np.log10(_spectra()[:2])
    omega, _, _ = gw_on_grids(plan, ln_k_peak, log10_p)
    rel = plan.sigw.omega_gw(10.0**log10_p, ln_k_peak)
    for i, first in enumerate((10, 25)):
        on = slice(first, first + X_OUT.size)
        np.testing.assert_allclose(omega[i, on], plan.transfer_gw[on] * rel[i],
                                   rtol=1e-10, atol=1e-250)
    require_batch_conventions(ObservablesSection(sigw_kernel="qcd-fluid"), "run.toml")
    with pytest.raises(ValueError, match="sigw_kernel"):
        plan_batch(X, (lo, lo + 1.0), conv, sigw_kernel="lattice")
