"""Priors: densities against scipy.stats, unit-cube transforms, config validation."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

from scan.config import load_config_text
from scan.config.priors import Prior, PriorSet, apply_parameters, get_key
from scan.errors import ConfigError

BASE = """
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.0
width = 0.02
power = 1.0
"""

PARAMS = BASE + """
[[parameters]]
key = "model.poles[0].position"
prior = "uniform"
low = 4.0
high = 6.0
[[parameters]]
key = "model.poles[0].width"
prior = "log_uniform"
low = 0.001
high = 0.1
[[nuisance]]
name = "pbh.threshold"
prior = "gaussian"
mean = 0.45
sigma = 0.05
low = 0.4
"""


def priors() -> PriorSet:
    return PriorSet.from_config(load_config_text(PARAMS, "p.toml"))


def test_log_uniform_density_is_one_over_x_log_ratio():
    prior = Prior("w", "w", "log_uniform", 1e-3, 1e-1)
    x = np.geomspace(1e-3, 1e-1, 7)
    expected = 1.0 / (x * np.log(1e-1 / 1e-3))  # p(x) = 1/(x ln(b/a)) on [a, b]
    np.testing.assert_allclose(np.exp(prior.log_pdf(x)), expected, rtol=1e-12)
    np.testing.assert_allclose(prior.log_pdf(x), stats.loguniform(1e-3, 1e-1).logpdf(x),
                               rtol=1e-12)
    mass, _ = integrate.quad(lambda v: np.exp(prior.log_pdf(v)), 1e-3, 1e-1, limit=200)
    assert mass == pytest.approx(1.0, rel=1e-8)
    assert prior.log_pdf(np.array([5e-4, 0.2])).tolist() == [-np.inf, -np.inf]


def test_truncated_gaussian_matches_scipy_truncnorm():
    prior = Prior("d", "d", "gaussian", 0.4, np.inf, mean=0.45, sigma=0.05)
    x = np.linspace(0.41, 0.7, 9)
    ref = stats.truncnorm((0.4 - 0.45) / 0.05, np.inf, loc=0.45, scale=0.05)
    np.testing.assert_allclose(prior.log_pdf(x), ref.logpdf(x), rtol=1e-10)
    np.testing.assert_allclose(prior.from_unit(np.array([0.1, 0.5, 0.9])),
                               ref.ppf([0.1, 0.5, 0.9]), rtol=1e-10)


def test_joint_log_prior_is_vectorised_sum_of_marginals():
    ps = priors()
    rng = np.random.default_rng(0)
    theta = ps.sample(rng, 20).reshape(5, 4, 3)
    got = ps.log_prior(theta)
    assert got.shape == (5, 4)
    expected = sum(p.scipy().logpdf(theta[..., i]) for i, p in enumerate(ps.priors))
    np.testing.assert_allclose(got, expected, rtol=1e-10)
    outside = theta[0, 0].copy()
    outside[1] = 0.5  # width above its log-uniform upper bound
    assert ps.log_prior(outside) == -np.inf


def test_unit_cube_round_trip_and_uniformity():
    ps = priors()
    rng = np.random.default_rng(1)
    u = rng.uniform(size=(1000, 3))
    np.testing.assert_allclose(ps.to_unit(ps.from_unit(u)), u, atol=1e-10)
    theta = ps.sample(rng, 2000)
    np.testing.assert_allclose(ps.from_unit(ps.to_unit(theta)), theta, rtol=1e-9)
    for i, p in enumerate(ps.priors):  # prior draws follow the prior (KS, 2000 draws)
        assert stats.kstest(theta[:, i], p.scipy().cdf).pvalue > 0.01


def test_ball_stays_inside_support_around_the_model_value():
    ps = priors()
    assert ps.priors[0].start == 5.0 and ps.priors[1].start == 0.02  # the config's values
    ball = ps.ball(np.random.default_rng(2), 50, 0.01)
    assert np.all(np.isfinite(ps.log_prior(ball)))
    assert np.all(np.abs(ps.to_unit(ball) - ps.to_unit(np.array([p.start for p in ps.priors])))
                  <= 0.01 + 1e-12)


def test_apply_parameters_sets_the_varied_keys_only():
    cfg = load_config_text(PARAMS, "p.toml")
    new = apply_parameters(cfg, [4.5, 0.03, 0.5])  # trailing nuisance value ignored
    assert new.model.poles[0].position == 4.5 and new.model.poles[0].width == 0.03
    assert new.model.poles[0].power == 1.0 and new.model.alpha == 1.0
    assert cfg.model.poles[0].position == 5.0  # the original is unchanged (frozen)
    assert apply_parameters(cfg, {"model.poles[0].width": 0.05}).model.poles[0].width == 0.05
    assert get_key(new, "model.poles[0].position") == 4.5


@pytest.mark.parametrize("table, key, hint", [
    ('key = "model.alpha"\nprior = "uniform"\nlow = 2.0\nhigh = 1.0\n',
     "parameters[0].high", "low < high"),
    ('key = "model.alpha"\nprior = "log_uniform"\nlow = 0.0\nhigh = 1.0\n',
     "parameters[0].low", "low > 0"),
    ('key = "model.alpha"\nprior = "uniform"\nlow = 1.0\n', "parameters[0].high", "needs high"),
    ('key = "model.alpha"\nprior = "gaussian"\nmean = 1.0\n', "parameters[0].sigma",
     "needs sigma"),
    ('key = "model.alpha"\nprior = "gaussian"\nmean = 1.0\nsigma = -1.0\n',
     "parameters[0].sigma", "> 0.0"),
    ('key = "model.alpha"\nprior = "unifrom"\nlow = 1.0\nhigh = 2.0\n', "parameters[0].prior",
     "did you mean 'uniform'"),
])
def test_prior_table_errors_name_the_key(table, key, hint):
    with pytest.raises(ConfigError) as info:
        load_config_text(BASE + "[[parameters]]\n" + table, "bad.toml")
    assert key in str(info.value) and hint in str(info.value)


@pytest.mark.parametrize("key, hint", [
    ("model.poles[3].position", "not a key of this config"),
    ("model.alpah", "not a key of this config"),
    ("model.potential", "not a numeric key"),
    ("run.seed", "not a numeric key of the model"),
])
def test_parameter_key_must_name_a_numeric_model_key(key, hint):
    cfg = load_config_text(BASE + f'[[parameters]]\nkey = "{key}"\nprior = "uniform"\n'
                           'low = 1.0\nhigh = 2.0\n', "bad.toml")
    with pytest.raises(ConfigError) as info:
        PriorSet.from_config(cfg)
    message = str(info.value)
    assert message.startswith("bad.toml: parameters[0].key") and hint in message
