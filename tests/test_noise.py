"""LISA noise model and PLI curves against constraints.md Sec. 3 / Sec. 8 check values."""
from __future__ import annotations

import numpy as np
import pytest

from scan.constants import YEAR_S
from scan.curves import noise as N

F = np.geomspace(1e-5, 1.0, 4001)


def test_lisa_strain_psd_values():
    """Robson, Cornish & Liu 2019 (arXiv:1803.01944), f* = 19.09 mHz; values documented
    by an independent implementation (constraints.md Sec. 3.1)."""
    s = N.lisa_strain_psd(np.array([1e-3, 1e-2, 1e-1]))
    np.testing.assert_allclose(s, [1.634100e-38, 1.443073e-40, 2.128583e-39], rtol=1e-6)


def test_omega_n_at_3mHz_and_minimum():
    """Omega_n h^2 = (2pi^2/3H100^2) f^3 S_n: 5.143e-12 at 3 mHz; minimum 4.87e-12 at
    2.52 mHz (constraints.md Sec. 3.3, computed)."""
    assert N.omega_noise_h2(3e-3, N.lisa_strain_psd(3e-3)) == pytest.approx(5.143e-12, rel=1e-3)
    on = N.omega_noise_h2(F, N.lisa_strain_psd(F))
    assert on.min() == pytest.approx(4.87e-12, rel=1e-2)
    assert F[on.argmin()] == pytest.approx(2.52e-3, rel=1e-2)


@pytest.mark.parametrize("confusion,value,f_min,tol_f", [(False, 8.33e-14, 2.70e-3, 0.05),
                                                         (True, 1.00e-13, 3.3e-3, 0.05)])
def test_pli_minimum(confusion, value, f_min, tol_f):
    """PLI minimum, SNR 10, 4 yr: 8.33e-14 at 2.70 mHz; with 4-yr confusion noise 1.00e-13
    at 3.3 mHz (Thrane & Romano 2013 construction; constraints.md Sec. 3.3, computed)."""
    pli = N.lisa_sensitivity(F, 10.0, 4.0, confusion)
    assert pli.min() == pytest.approx(value, rel=0.01 if not confusion else 0.02)
    assert F[pli.argmin()] == pytest.approx(f_min, rel=tol_f)


def test_pli_scaling_with_snr_and_time():
    """PLI proportional to rho_th / sqrt(T) (constraints.md Sec. 2.3)."""
    on = N.omega_noise_h2(F, N.lisa_strain_psd(F))
    base = N.pli_curve(F, on, 10.0, 4 * YEAR_S)
    np.testing.assert_allclose(N.pli_curve(F, on, 1.0, 4 * YEAR_S) / base, 0.1, rtol=1e-6)
    np.testing.assert_allclose(N.pli_curve(F, on, 10.0, 1 * YEAR_S) / base, 2.0, rtol=1e-6)


def test_pli_minimum_equals_flat_amplitude():
    """min Omega_PI = rho/sqrt(T int Omega_n^-2 df) (constraints.md Sec. 2.4)."""
    for confusion in (False, True):
        on = N.omega_noise_h2(F, N.lisa_strain_psd(F, confusion))
        flat = N.flat_threshold_amplitude(F, on, 10.0, 4 * YEAR_S)
        assert N.pli_curve(F, on, 10.0, 4 * YEAR_S).min() == pytest.approx(flat, rel=1e-3)


def test_flat_band_pli():
    """Omega_n = 1e-10 on [1, 10] mHz, T = 1 yr, rho = 1: 1.8764e-13 (Sec. 2.4, computed)."""
    f = np.geomspace(1e-3, 1e-2, 2001)
    pli = N.pli_curve(f, np.full_like(f, 1e-10), 1.0, YEAR_S)
    assert pli.min() == pytest.approx(1.8764e-13, rel=1e-3)
    assert 1e-10 / np.sqrt(YEAR_S * 9e-3) == pytest.approx(1.8764e-13, rel=1e-3)


@pytest.mark.parametrize("beta", [-4.0, -1.5, 0.0, 2.0, 5.0])
def test_tangent_power_law_has_threshold_snr(beta):
    """The power law Omega_beta (f/f_ref)^beta reaching the curve has SNR = rho_th (Sec. 2.3)."""
    on = N.omega_noise_h2(F, N.lisa_strain_psd(F))
    pli = N.pli_curve(F, on, 10.0, 4 * YEAR_S, betas=np.array([beta]))
    assert N.snr(F, pli, on, 4 * YEAR_S) == pytest.approx(10.0, rel=1e-4)
    full = N.pli_curve(F, on, 10.0, 4 * YEAR_S)
    assert np.all(pli <= full * (1 + 1e-9))  # every tangent lies under the envelope


def test_cross_convention_is_sqrt2():
    on = N.omega_noise_h2(F, N.lisa_strain_psd(F))
    sig = 1e-12 * np.ones_like(F)
    ratio = N.snr(F, sig, on, YEAR_S, "cross") / N.snr(F, sig, on, YEAR_S, "single")
    assert ratio == pytest.approx(np.sqrt(2.0), rel=1e-12)


def test_confusion_table_only():
    with pytest.raises(ValueError, match="tabulated"):
        N.lisa_confusion_psd(F, 3.0)
