"""Convergence policy on synthetic chains with a known autocorrelation time.

An AR(1) process x_t = rho x_{t-1} + e_t has autocorrelation rho^|k| and integrated
autocorrelation time tau = (1 + rho)/(1 - rho) (a textbook result; e.g. Sokal 1997,
"Monte Carlo methods in statistical mechanics", and the emcee autocorrelation tutorial).
"""
from __future__ import annotations

import types

import numpy as np
import pytest
from scipy import signal

from scan.cli.summary import format_summary
from scan.plots import inputs
from scan.sampler import bands, runfile, summary
from scan.sampler.convergence import (Policy, assess, burn_in, estimate_tau, settle, thinning,
                                      typical_floor)
from scan.sampler.summary import judged_steps, tau_discard_of
from scan.verify import run


def ar1_chain(rho: np.ndarray, steps: int, walkers: int, seed: int) -> np.ndarray:
    """Stationary AR(1) chains of shape (steps, walkers, dim), one rho per dimension."""
    rng = np.random.default_rng(seed)
    rho = np.atleast_1d(rho)
    out = np.empty((steps, walkers, len(rho)))
    for j, r in enumerate(rho):
        noise = rng.normal(size=(steps, walkers)) * np.sqrt(1 - r**2)
        noise[0] = rng.normal(size=walkers)  # start in the stationary distribution
        out[:, :, j] = signal.lfilter([1.0], [1.0, -r], noise, axis=0)
    return out


def test_tau_of_ar1_processes_matches_one_plus_rho_over_one_minus_rho():
    rho = np.array([0.5, 0.8, 0.9])
    chain = ar1_chain(rho, steps=20000, walkers=32, seed=11)
    tau = estimate_tau(chain)
    expected = (1 + rho) / (1 - rho)  # 3, 9, 19
    # Measured scatter of this estimator at this chain size (10 seeds): 0.8 %, 1.4 %,
    # 1.7 % relative, mean bias -1 % for rho = 0.9 (the window truncation); 6 % is ~3.5 sigma.
    np.testing.assert_allclose(tau, expected, rtol=0.06)


def test_short_chain_is_not_converged_long_stable_chain_is():
    policy = Policy(tau_factor=50.0, tau_rtol=0.05)
    rho = np.array([0.8, 0.8])  # tau = 9
    long_chain = ar1_chain(rho, steps=6000, walkers=32, seed=3)
    short = assess(long_chain[:300], None, policy)  # 300 < 50 * 9
    assert not short.length_ok and not short.converged
    tau_prev = estimate_tau(long_chain[:5000])
    result = assess(long_chain, tau_prev, policy)  # 6000 > 50 * 9, tau stable
    assert result.length_ok
    assert np.all(np.abs(result.tau - tau_prev) < 0.05 * result.tau)
    assert result.converged
    assert result.n_over_tau == pytest.approx(6000 / np.max(result.tau))


def test_changing_tau_blocks_convergence_and_first_check_never_converges():
    policy = Policy(tau_factor=10.0, tau_rtol=0.01)
    chain = ar1_chain(np.array([0.5]), steps=4000, walkers=16, seed=5)  # tau = 3
    tau = estimate_tau(chain)
    assert not assess(chain, None, policy).converged  # no previous estimate yet
    assert not assess(chain, tau * 1.05, policy).stable  # moved by 5 % > 1 %
    assert assess(chain, tau * 1.001, policy).converged


def test_burn_in_and_thinning_follow_the_factors():
    policy = Policy(burn_factor=2.0, thin_factor=0.5)
    tau = np.array([9.2, 19.4, 3.1])
    assert burn_in(tau, policy) == 39  # ceil(2 * 19.4)
    assert thinning(tau, policy) == 1  # int(0.5 * 3.1) = 1
    assert thinning(np.array([40.0, 60.0]), policy) == 20


def test_tau_discard_leaves_the_initial_transient_out():
    # An AR(1) chain (tau = 9) whose walkers start 10 sigma off and drift in over 2000
    # steps (like walkers drawn from a wide prior creeping along a ridge): on the whole
    # chain the transient inflates tau; on the second half tau is the stationary one (the
    # tolerance of the AR(1) test above).
    rho, steps = 0.8, 12000
    chain = ar1_chain(np.array([rho]), steps=steps, walkers=32, seed=7)
    chain += 10.0 * np.clip(1.0 - np.arange(steps) / 2000.0, 0.0, None)[:, None, None]
    whole = assess(chain, None, Policy(tau_factor=50.0))
    half_policy = Policy(tau_factor=50.0, tau_discard=0.5)
    half = assess(chain, None, half_policy)
    assert whole.tau[0] > 1.2 * 9.0
    np.testing.assert_allclose(half.tau, (1 + rho) / (1 - rho), rtol=0.06)
    assert half.length_ok  # 6000 counted steps > 50 * 9
    assert not assess(chain[:800], None, half_policy).length_ok  # 400 < 50 * 9
    assert burn_in(half.tau, half_policy, steps) == steps // 2  # at least the left-out part
    assert burn_in(half.tau, Policy(), steps) == 18  # ceil(2 * ~9), as before


def test_a_walker_that_never_moved_is_left_out_of_tau():
    # emcee's estimator divides by the lag-0 autocovariance: a frozen walker gives 0/0.
    chain = ar1_chain(np.array([0.8, 0.5]), steps=4000, walkers=16, seed=9)
    frozen = chain.copy()
    frozen[:, 3, 0] = 0.7  # walker 3 never moves in parameter 0
    tau = estimate_tau(frozen)
    assert np.all(np.isfinite(tau))
    assert tau[0] == pytest.approx(estimate_tau(np.delete(chain, 3, axis=1))[0], rel=1e-12)
    assert tau[1] == pytest.approx(estimate_tau(chain)[1], rel=1e-12)
    still = np.zeros((10, 4, 2))
    assert np.all(np.isinf(estimate_tau(still)))
    assert burn_in(estimate_tau(still), Policy(), 10) == 10 and thinning(
        estimate_tau(still), Policy()) == 1


def gaussian_log_prob(chain: np.ndarray) -> np.ndarray:
    """ln p of a unit Gaussian (max 0) at every position of a (steps, walkers, dim) chain."""
    return -0.5 * np.sum(chain**2, axis=-1)


def test_typical_floor_of_two_dimensions_is_ln_alpha_below_the_maximum():
    # chi^2 with 2 dof has P(chi^2 > q) = exp(-q/2) exactly (textbook), so the floor
    # ln p_max - q/2 at probability alpha is ln p_max + ln alpha.
    assert typical_floor(3.0, 2, alpha=1e-3) == pytest.approx(3.0 + np.log(1e-3), rel=1e-12)


def test_a_stray_walker_is_dropped_and_a_late_one_extends_the_burn_in():
    rho = np.array([0.5, 0.5])
    chain = ar1_chain(rho, steps=600, walkers=16, seed=5)
    chain[:, 3] += 8.0  # stuck in a poor local optimum: ln p ~ -64 all along
    chain[:250, 7] += 6.0  # arrives in the typical set only at step 250
    log_prob = gaussian_log_prob(chain)
    settled = settle(log_prob, burn=40, dim=2)
    assert settled.dropped == 1 and not settled.kept[3] and settled.kept.sum() == 15
    assert settled.burn_in == 250  # the late walker's first step in the typical set
    # the healthy walkers: stationary unit Gaussians are all kept (floor ln 1e-3 below the
    # maximum; each walker's median ln p ~ -ln 2 ~ -0.69, common practice chi^2 median)
    healthy = settle(gaussian_log_prob(ar1_chain(rho, 600, 16, seed=6)), burn=40, dim=2)
    assert healthy.dropped == 0 and healthy.burn_in < 60


def test_settle_keeps_everything_when_nothing_can_be_judged():
    log_prob = np.full((10, 4), -np.inf)
    settled = settle(log_prob, burn=-1, dim=3)
    assert settled.burn_in == 0 and settled.kept.all() and settled.floor == -np.inf


def test_every_chain_reader_drops_the_stray_walker(monkeypatch):
    """posterior_samples (the one reader of summary, figures, bands and verify) applies
    settle: the stray walker's samples never reach a summary or a figure."""
    assert inputs.posterior_samples is bands.posterior_samples is run.posterior_samples \
        is summary.posterior_samples
    chain = ar1_chain(np.array([0.5, 0.5]), steps=400, walkers=8, seed=2)
    chain[:, 5] += 8.0  # the stray
    extras = types.SimpleNamespace(burn_in=20, thin=2, names=("a", "b"))
    monkeypatch.setattr(runfile, "read", lambda path: types.SimpleNamespace(extras=extras))
    monkeypatch.setattr(runfile, "load_chain", lambda path: {
        "chain": chain, "log_prob": gaussian_log_prob(chain), "blobs": None})
    post = summary.posterior_samples("chain.h5")
    assert post["stray_walkers"] == 1 and post["walkers"] == 7
    assert post["samples"].shape == ((400 - post["burn_in"] + 1) // 2 * 7, 2)
    assert np.abs(post["samples"]).max() < 6.0  # nothing from the stray (offset 8)
    assert post["burn_in"] >= post["burn_in_tau"] == 20


def test_summary_ratio_counts_the_steps_tau_was_judged_on():
    """With tau_discard the stopping rule counts only the kept share of the chain, so the
    summary's N/max tau does too (and says so); without it, every step."""
    half = '[sampler]\ntau_discard = 0.5\n'
    assert judged_steps(half, 10_000) == 5_000
    assert judged_steps('[sampler]\nwalkers = 32\n', 10_000) == 10_000
    assert judged_steps('not = [toml', 10_000) == 10_000
    assert tau_discard_of(half) == 0.5
    info = {"converged": True, "status": "converged", "n_over_tau": 55.0, "tau_discard": 0.5,
            "acceptance_fraction": 0.3, "file": "chain.h5", "steps": 10_000, "walkers": 32,
            "burn_in": 5000, "thin": 20, "samples_used": 100, "tau": None, "parameters": {},
            "derived": {}, "invalid_reasons": {}}
    assert "N/max tau 55.0 (last 50 % of the chain)" in format_summary(info)
