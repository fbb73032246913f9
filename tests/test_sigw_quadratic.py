"""Omega_GW as a quadratic form of P on a short table (scan.observables.quadratic).

Check values: the flat spectrum Omega_GW = 0.8222 A^2 (Kohri & Terada 2018,
arXiv:1804.08577; 0.822244 computed in observables.md sect. 1.4); the reference for
peaked spectra is scan.observables.sigw.plan_sigw (tested against KT18 and the closed-form delta
peak in tests/test_sigw.py) on the same table.
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest

from scan.observables.quadratic import plan_quadratic
from scan.observables.sigw import TruncationWarning, plan_sigw

X = np.linspace(-3.0, 3.0, 41)                  # the emulator's default shape grid
X_OUT = np.linspace(-3.0, 3.0 + np.log(2.0), 64)


def peaked_spectra() -> np.ndarray:
    """Log-normal peaks (widths 0.3, 0.6, 1) and broken power laws k^4 / k^(-1.5/D)."""
    rows = []
    for width in (0.3, 0.6, 1.0):
        rows.append(np.exp(-X**2 / (2 * width**2)))
        rows.append(np.exp(np.where(X < 0, 4 * X, -1.5 * X / width)))
    return np.array(rows)


def test_flat_spectrum_is_kohri_terada():
    x = np.linspace(-12.0, 12.0, 161)
    plan = plan_quadratic(np.exp(x), np.array([1.0]))
    omega = plan.omega_gw(np.full(x.size, 2e-3))[0] / 2e-3**2
    assert omega == pytest.approx(0.8222, rel=1e-3)      # KT18
    assert omega == pytest.approx(0.822244, rel=2e-4)    # observables.md 1.4


def test_peaked_spectra_match_the_log_interpolated_quadrature():
    """refine = 2: the documented accuracy (measured 1.7 % at the peak, 5.1 % anywhere
    above 1e-3 of the maximum, worst case the narrowest log-normal)."""
    spectra = peaked_spectra()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TruncationWarning)
        ref = plan_sigw(np.exp(X), k_out=np.exp(X_OUT)).omega_gw(spectra)
    quad = plan_quadratic(np.exp(X), np.exp(X_OUT), refine=2).omega_gw(spectra)
    big = ref > 1e-3 * ref.max(axis=1, keepdims=True)
    assert np.max(np.abs(quad.max(axis=1) / ref.max(axis=1) - 1)) < 0.02
    assert np.max(np.abs(quad / ref - 1)[big]) < 0.06
    # the refinement is what buys the accuracy: without it the error is several times larger
    coarse = plan_quadratic(np.exp(X), np.exp(X_OUT), refine=1).omega_gw(spectra)
    assert np.max(np.abs(coarse / ref - 1)[big]) > 2 * np.max(np.abs(quad / ref - 1)[big])


def test_stack_equals_single_calls_zero_stays_zero_and_scaling_is_quadratic():
    plan = plan_quadratic(np.exp(X), np.exp(X_OUT))
    spectra = peaked_spectra()
    stack = plan.omega_gw(spectra)
    for row, spec in zip(stack, spectra):
        np.testing.assert_allclose(plan.omega_gw(spec), row, rtol=1e-12)
    assert np.all(plan.omega_gw(np.zeros(X.size)) == 0.0)
    np.testing.assert_allclose(plan.omega_gw(3.0 * spectra[0]), 9.0 * stack[0], rtol=1e-12)
    with pytest.raises(ValueError, match="shape"):
        plan.omega_gw(np.ones(X.size + 1))


def test_blocked_product_equals_the_dense_quadratic_form():
    """The product by output blocks over the pairs each block uses is the dense
    sum_{a<=b} W_jab P_a P_b in another order: equal to rounding (common practice: a few
    ulp per term, 1e-12 relative), also with exact zeros and at a single output."""
    for x_out in (X_OUT, X_OUT[:1], np.linspace(-3.0, 4.0, 37)):
        plan = plan_quadratic(np.exp(X), np.exp(x_out))
        spectra = np.vstack([peaked_spectra(), np.zeros(X.size)])
        spectra[1, :5] = 0.0                         # zeros inside a spectrum too
        fine = np.exp(np.log(np.maximum(spectra, 1e-300)) @ plan._lift.T)
        a, b = plan._pairs
        dense = (fine[:, a] * fine[:, b]) @ plan._W
        blocked = plan.omega_gw(spectra)
        assert blocked.shape == dense.shape and blocked.flags.c_contiguous
        np.testing.assert_allclose(blocked, dense, rtol=1e-12, atol=0.0)
        assert np.all(blocked[-1] == 0.0)
        assert sum(u.size for _, _, u, _, _ in plan._blocks) <= len(plan._blocks) * a.size
