"""Induced GWs in radiation domination.

Check values: Kohri & Terada 2018 (arXiv:1804.08577) for the flat spectrum and the
Dirac-delta closed form; the log-normal table is shared/physics/observables.md
sect. 1.6 (computed with the same KT18 kernel; setup of Pi & Sasaki 2020,
arXiv:2005.12306)."""
import math
import warnings

import numpy as np
import pytest

from scan.observables import cosmo, sigw

SQ3 = math.sqrt(3.0)


def lognormal(k, delta, amplitude=1.0):
    return amplitude * np.exp(-np.log(k)**2 / (2 * delta**2)) / (math.sqrt(2 * math.pi) * delta)


def test_flat_spectrum():
    # Omega_GW = 0.8222 A^2 (KT18); 0.822244 (observables.md sect. 1.4, computed)
    k_in = np.geomspace(1e-4, 1e4, 256)
    plan = sigw.plan_sigw(k_in, [0.3, 1.0, 3.0])
    A = 2e-3
    omega = plan.omega_gw(np.full(k_in.size, A)) / A**2
    assert omega == pytest.approx(0.8222, rel=1e-3)
    assert omega == pytest.approx(0.822244, rel=2e-4)


def test_delta_closed_form_features():
    # KT18 closed form: zero at sqrt(2/3), log resonance at 2/sqrt(3), cutoff at 2
    assert sigw.omega_gw_delta(math.sqrt(2 / 3), 1.0, 1.0) == pytest.approx(0.0, abs=1e-12)
    assert np.all(sigw.omega_gw_delta(np.array([2.0, 2.5, 10.0]), 1.0, 1.0) == 0.0)
    near = sigw.omega_gw_delta(2 / SQ3 * np.array([1 - 1e-3, 1 - 1e-6]), 1.0, 1.0)
    assert near[1] > near[0] > sigw.omega_gw_delta(1.0, 1.0, 1.0)  # log growth
    assert sigw.omega_gw_delta(1.9, 1.0, 1.0) > 0


def test_delta_closed_form_matches_kernel():
    # Omega = K(1/x, 1/x) / x^2 A^2 (observables.md sect. 1.5: agree to 1e-13)
    x = np.array([0.05, 0.3, 0.7, 1.0, 1.1, 1.3, 1.6, 1.95])
    direct = sigw.induced_kernel(1 / x, 1 / x) / x**2
    assert np.allclose(sigw.omega_gw_delta(x, 1.0, 1.0), direct, rtol=1e-12)


def test_narrow_lognormal_tends_to_delta():
    # a narrow log-normal (Delta = 0.02) reproduces the delta result away from the
    # resonance and the zero, vanishes beyond ~2 k_* and dips at sqrt(2/3)
    k_in = np.geomspace(math.exp(-0.16), math.exp(0.16), 256)
    x = np.array([0.4, 1.0, 1.5, 1.8, 2.3, math.sqrt(2 / 3)])
    omega = sigw.plan_sigw(k_in, x).omega_gw(lognormal(k_in, 0.02))
    delta = sigw.omega_gw_delta(x[:4], 1.0, 1.0)
    assert omega[:4] == pytest.approx(delta, rel=0.03)
    assert omega[4] < 1e-12
    assert omega[5] < 0.05 * omega[1]


@pytest.mark.parametrize("delta, points", [
    (0.1, [(1.0, 0.7279), (2 / SQ3, 1.815), (1.5, 4.449e-2), (0.3, 0.2558)]),
    (0.5, [(1.0, 0.2996), (1.5, 0.2393), (2.0, 9.827e-2)]),
    (1.0, [(1.0, 0.1032), (3.0, 0.0390)]),
    (2.0, [(1.0, 0.03007), (3.0, 0.02215)]),
])
def test_lognormal_table(delta, points):
    # observables.md sect. 1.6 (computed), 1% tolerance as suggested there
    span = 7 * delta if delta < 1 else 6 * delta
    k_in = np.geomspace(math.exp(-span), math.exp(span), 256)
    k_out = np.array([p[0] for p in points])
    expected = np.array([p[1] for p in points])
    omega = sigw.plan_sigw(k_in, k_out).omega_gw(lognormal(k_in, delta))
    assert omega == pytest.approx(expected, rel=1e-2)


def test_today_and_warnings():
    k_in = np.geomspace(1e4, 1e8, 128)
    P = lognormal(k_in / 1e6, 0.5, 1e-2)
    f = cosmo.k_to_f(np.array([1e6]))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        today = sigw.omega_gw_h2(k_in, P, f, dof=(106.75, 106.75), n_eff=3.046)
    rd = sigw.plan_sigw(k_in, [1e6]).omega_gw(P)
    # c_g Omega_r h^2 = 1.617e-5 at g = 106.75 (observables.md sect. 2, computed)
    assert today == pytest.approx(1.617e-5 * rd, rel=3e-3)
    with pytest.warns(sigw.TruncationWarning):
        sigw.check_spectrum(np.ones(50))
    with pytest.warns(sigw.ResolutionWarning):
        sigw.check_spectrum(np.r_[np.zeros(20), 1.0, np.zeros(20)])


def test_batched_equals_loop():
    # a stack of m spectra on one table gives, row by row, the one-spectrum results
    k_in = np.geomspace(math.exp(-3.0), math.exp(3.0), 61)
    plan = sigw.plan_sigw(k_in, np.geomspace(0.05, 50.0, 40))   # k_out > 2 k_max: no nodes
    rng = np.random.default_rng(1)
    widths, amps = rng.uniform(0.1, 1.5, 7), 10.0**rng.uniform(-4, -1, 7)
    P = np.array([lognormal(k_in, d, a) for d, a in zip(widths, amps)])
    P[2, 10:20] = 0.0                                            # zeros are floored as before
    batched, batched_h2 = plan.omega_gw(P), plan.omega_gw_h2(P)
    assert batched.shape == batched_h2.shape == (7, plan.k_out.size)
    loop = np.array([plan.omega_gw(row) for row in P])
    loop_h2 = np.array([plan.omega_gw_h2(row) for row in P])
    assert np.all(loop[:, -1] == 0) and np.all(loop[:, 0] > 0)
    assert batched == pytest.approx(loop, rel=1e-12, abs=0)
    assert batched_h2 == pytest.approx(loop_h2, rel=1e-12, abs=0)
    assert plan.omega_gw(P[:1]) == pytest.approx(loop[:1], rel=1e-12, abs=0)
    assert plan.omega_gw(P[:0]).shape == (0, plan.k_out.size)
    with pytest.raises(ValueError, match="shape"):
        plan.omega_gw(P[:, :-1])
