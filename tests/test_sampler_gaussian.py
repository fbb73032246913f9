"""The emcee driver recovers known Gaussian targets (plumbing test).

Checking an ensemble sampler on a correlated multivariate normal — means, widths, KS
tests of the marginals, the chi-squared distribution of the Mahalanobis distance, and an
acceptance fraction between 0.2 and 0.5-0.7 — is common practice (it is how emcee's own
test suite checks its moves; Foreman-Mackey et al. 2013, arXiv:1202.3665 for the sampler
and the acceptance-fraction guidance).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from scan.config import load_config_text
from scan.pool import choose_pool
from scan.sampler import plan_run, posterior_samples, run_chain, summarize
from scan.sampler.runfile import load_chain, read

MEANS = (1.0, -2.0, 0.5, 3.0)
SIGMAS = (0.1, 1.0, 0.3, 2.0)


def gaussian_config(tmp_path, means=MEANS, sigmas=SIGMAS, rho=0.5, steps=3000, extra="",
                    lows=None, sampler_extra="") -> str:
    text = f'[run]\nname = "g"\nseed = 5\noutput_dir = "{tmp_path}"\n'
    text += '[model]\npotential = "t_model"\nalpha = 1.0\n'
    for i, (m, s) in enumerate(zip(means, sigmas)):
        low = "" if lows is None or lows[i] is None else f"low = {lows[i]}\n"
        text += f'[[nuisance]]\nname = "p{i}"\nprior = "gaussian"\nmean = {m}\nsigma = {s}\n{low}'
    text += (f'[sampler]\ntarget = "gaussian_test"\nwalkers = 32\nmax_steps = {steps}\n'
             f'check_every = 250\ntest_correlation = {rho}\nvectorize = true\n{sampler_extra}')
    return text + extra


def run(text: str):
    plan = plan_run(load_config_text(text, "g.toml"))
    with choose_pool(None, False, vectorized=True) as pool:
        return plan, run_chain(plan, pool)


def independent_samples(path) -> tuple[np.ndarray, np.ndarray, float]:
    """Samples after burn-in, thinned by ceil(max tau) so they are ~independent."""
    stored = read(path)
    tau_max = float(np.max(stored.extras.tau))
    data = load_chain(path)
    step = math.ceil(tau_max)
    chain = data["chain"][stored.extras.burn_in::step]
    blobs = data["blobs"][stored.extras.burn_in::step]
    return chain.reshape(-1, chain.shape[-1]), blobs.reshape(-1), tau_max


def check_means_and_widths(samples: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Assert means and widths of ~independent samples of MEANS, SIGMAS; return both."""
    n = len(samples)
    mean, sigma = np.array(MEANS), np.array(SIGMAS)
    # Means within 4 standard errors (independent samples after thinning by tau).
    np.testing.assert_array_less(np.abs(samples.mean(axis=0) - mean), 4 * sigma / np.sqrt(n))
    # Widths: the standard error of a sample standard deviation is sigma / sqrt(2 n).
    np.testing.assert_array_less(np.abs(samples.std(axis=0) / sigma - 1), 4 / np.sqrt(2 * n))
    return mean, sigma


def test_correlated_4d_gaussian_is_recovered(tmp_path):
    plan, outcome = run(gaussian_config(tmp_path))
    assert outcome.steps == 3000 and outcome.status in ("converged", "max_steps")
    samples, blobs, tau_max = independent_samples(outcome.path)
    n = len(samples)
    assert n > 1000
    mean, sigma = check_means_and_widths(samples)
    corr = np.corrcoef(samples.T)[np.triu_indices(4, 1)]
    np.testing.assert_array_less(np.abs(corr - 0.5), 4 * (1 - 0.25) / np.sqrt(n))
    for i in range(4):
        assert stats.kstest(samples[:, i], stats.norm(mean[i], sigma[i]).cdf).pvalue > 0.01
    # The derived blob chi2 (Mahalanobis distance squared) is chi-squared with 4 dof.
    assert stats.kstest(blobs["chi2"], stats.chi2(4).cdf).pvalue > 0.01
    np.testing.assert_allclose(blobs["total"], samples.sum(axis=1), rtol=1e-12, atol=1e-12)
    assert 0.2 < outcome.acceptance < 0.7
    info = summarize(outcome.path)
    assert info["parameters"]["p3"]["median"] == pytest.approx(3.0, abs=4 * 2.0 / np.sqrt(n))
    assert sum(info["invalid_reasons"].values()) == 32 * 3001  # initial + every proposal
    assert len(info["tau_history"]["steps"]) == 12  # a check every 250 steps


def test_truncation_is_counted_as_invalid_and_respected(tmp_path):
    # Uncorrelated, p0 truncated at its mean: its marginal is a half-normal.
    plan, outcome = run(gaussian_config(tmp_path, means=(0.0, 1.0), sigmas=(1.0, 0.5),
                                        rho=0.0, steps=1500, lows=(0.0, None)))
    assert outcome.reason_counts["outside_support"] > 0
    samples, blobs, _ = independent_samples(outcome.path)
    assert samples[:, 0].min() >= 0.0
    assert stats.kstest(samples[:, 0], stats.halfnorm().cdf).pvalue > 0.01
    assert np.all(blobs["reason"] == 0)  # the chain never holds an invalid model
    stored = read(outcome.path)
    total = outcome.reason_counts["ok"] + outcome.reason_counts["outside_support"]
    assert total == 32 * (stored.iteration + 1)


def test_process_pool_gives_the_same_chain_as_serial(tmp_path):
    text = gaussian_config(tmp_path, steps=60).replace("vectorize = true", "vectorize = false")
    chains = []
    for processes, sub in ((None, "serial"), (2, "processes")):
        plan = plan_run(load_config_text(text.replace(str(tmp_path), str(tmp_path / sub)),
                                         "g.toml"))
        with choose_pool(processes, False) as pool:
            run_chain(plan, pool)
        chains.append(load_chain(plan.path))
    assert np.array_equal(chains[0]["chain"], chains[1]["chain"])
    assert np.array_equal(chains[0]["blobs"], chains[1]["blobs"])
    vector = posterior_samples(plan.path)  # also readable through the summary helper
    assert vector["samples"].shape[1] == 4
