"""A prior on the physical width mapped onto the wall coordinate (issue 14 item 2).

The density in the sampled coordinate c is the change of variables
π_c(c) = π_w(w(c)) |dw/dc| with w = w_w/ρ(c) (the change-of-variables rule for a
probability density of a monotone function of a random variable, e.g. Papoulis & Pillai
2002, "Probability, Random Variables and Stochastic Processes", 4th ed., ch. 5 — chapter
from memory); checked here against Monte-Carlo draws of w mapped to c.
"""
from __future__ import annotations

import math

import h5py
import numpy as np
import pytest
from scipy import integrate

from scan.cli import main
from scan.config import load_config_text
from scan.config.priors import Prior, PriorSet, apply_parameters
from scan.config.width_prior import MappedWidthPrior, ratio_of_pole, wall_coordinate_of
from scan.errors import ConfigError
from scan.pipeline.solve import wall_sharpness, wall_width
from scan.posterior.exact import exact_ln_wall_width
from scan.sampler import runfile
from scan.surrogate.adapter import solve_point
from scan.surrogate.emulator import TrainingSet, fit_emulator, predict_unit
from scan.surrogate.record import SCALARS, TrainingRecord
from scan.surrogate.space import from_config
from scan.surrogate.store import StoreWriter, create_store, read_points

W_WALL = 0.03  # a fixed w_w [M_p] for the pure checks (any positive value)
BOX = Prior("model.poles[0].wall_ratio", "rho", "uniform", 1.0, 3.0)

BASE = """
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.2
wall_ratio = 1.05
power = 1.0
"""
WALL_PARAMETER = """
[[parameters]]
key = "model.poles[0].position"
prior = "uniform"
low = 5.0
high = 5.4
[[parameters]]
key = "model.poles[0].wall_ratio"
prior = "uniform"
low = 1.0
high = 3.0
width_prior = { prior = "log_uniform", low = 0.012, high = 0.028 }
"""


def mapped(width: Prior, coordinate: str = "wall_ratio", box: Prior = BOX) -> MappedWidthPrior:
    return MappedWidthPrior(index=0, key=f"model.poles[0].{coordinate}", coordinate=coordinate,
                            width=width, box=box)


@pytest.mark.parametrize("coordinate, shift", [("wall_ratio", 0.0), ("wall_distance", 1.0)])
@pytest.mark.parametrize("width", [
    Prior("w", "w", "log_uniform", 0.012, 0.028),
    Prior("w", "w", "uniform", 0.012, 0.028),
    Prior("w", "w", "gaussian", 0.012, 0.028, mean=0.02, sigma=0.004),
], ids=["log_uniform", "uniform", "gaussian"])
def test_density_in_the_coordinate_matches_mapped_width_draws(width, coordinate, shift):
    # draw w from its prior, map to c = w_w/w - shift, histogram vs the density in c
    rng = np.random.default_rng(3)
    n = 400_000
    c = W_WALL / width.from_unit(rng.uniform(size=n)) - shift
    box = Prior("c", "c", "uniform", 1.0 - shift, 3.0 - shift)
    prior = mapped(width, coordinate, box)
    edges = np.linspace(W_WALL / 0.028 - shift, W_WALL / 0.012 - shift, 25)
    counts, _ = np.histogram(c, edges)
    expected = n * np.array([integrate.quad(
        lambda x: math.exp(prior.log_density(np.array(x), math.log(W_WALL))), a, b)[0]
        for a, b in zip(edges[:-1], edges[1:])])
    # Poisson counting error of each bin: |counts - expected| < 5 sqrt(expected) (a 5-sigma
    # bound per bin, common practice; 24 bins of ~1.7e4 counts, 0.8 % relative each)
    assert np.all(np.abs(counts - expected) < 5.0 * np.sqrt(expected)), (counts, expected)
    assert expected.sum() == pytest.approx(n, rel=1e-8)  # all of the width prior is in the box


def test_log_uniform_width_prior_is_one_over_rho_log_ratio_inside_its_bounds():
    prior = mapped(Prior("w", "w", "log_uniform", 0.012, 0.028))
    rho = np.linspace(W_WALL / 0.028, W_WALL / 0.012, 9)[1:-1]  # the ends: bounds test
    # pi_w(w) |dw/drho| = [1/(w ln(b/a))] (w_w/rho^2) = 1/(rho ln(b/a)) for w = w_w/rho
    np.testing.assert_allclose(np.exp(prior.log_density(rho, math.log(W_WALL))),
                               1.0 / (rho * math.log(0.028 / 0.012)), rtol=1e-12)


def test_bounds_follow_the_wall_width_and_the_box():
    prior = mapped(Prior("w", "w", "log_uniform", 0.012, 0.028))
    ln_ww = math.log(W_WALL)
    lo, hi = W_WALL / 0.028, W_WALL / 0.012  # rho = w_w / w at the width bounds
    inside = prior.log_density(np.array([lo * 1.001, hi * 0.999]), ln_ww)
    outside = prior.log_density(np.array([lo * 0.999, hi * 1.001]), ln_ww)
    assert np.all(np.isfinite(inside)) and np.all(outside == -np.inf)
    # a wider wall moves the bounds: w = 2 w_w/rho > 0.028 there for w_w twice as large
    assert prior.log_density(np.array(lo * 1.001), math.log(2 * W_WALL)) == -np.inf
    assert prior.log_density(np.array(2.0), math.nan) == -np.inf  # w_w unknown
    # outside the sampled box (rho in [1, 3]) the ratio to the box density is -inf
    wide = mapped(Prior("w", "w", "log_uniform", 0.005, 0.05))
    assert wide.log_ratio(np.array([0.9, 3.1]), ln_ww).tolist() == [-np.inf, -np.inf]
    inside = wide.log_ratio(np.array(2.0), ln_ww)
    assert inside == pytest.approx(float(wide.log_density(np.array(2.0), ln_ww))
                                   + math.log(2.0))  # minus ln(1/2), the box density


def test_prior_set_replaces_the_box_density_of_the_mapped_coordinate():
    priors = PriorSet.from_config(load_config_text(BASE + WALL_PARAMETER, "w.toml"))
    assert priors.width_prior is not None and priors.width_prior.index == 1
    theta = np.array([[5.2, 1.5], [5.3, 2.0]])
    ln_ww = np.log([W_WALL, W_WALL])
    position = -math.log(0.4)  # uniform on [5.0, 5.4]
    expected = position - np.log(theta[:, 1] * math.log(0.028 / 0.012))
    np.testing.assert_allclose(priors.log_prior_mapped(theta, ln_ww), expected, rtol=1e-12)
    # the box prior itself (unit cube, nested sampling) is unchanged
    np.testing.assert_allclose(priors.log_prior(theta), position - math.log(2.0), rtol=1e-12)
    with pytest.raises(ValueError, match="ln w_w"):
        priors.log_prior_mapped(theta, None)


def test_wall_coordinates_are_recognised_by_key_and_section():
    assert wall_coordinate_of("model.poles[2].wall_ratio") == (2, "wall_ratio")
    assert wall_coordinate_of("model.poles[0].wall_distance") == (0, "wall_distance")
    assert wall_coordinate_of("model.poles[0].width") is None
    assert ratio_of_pole(load_config_text(BASE, "b.toml").model.poles[0]) == 1.05


@pytest.mark.parametrize("replace, key, words", [
    (('key = "model.poles[0].wall_ratio"', 'key = "model.poles[0].power"'),
     "parameters[1].width_prior", "not a pole's wall coordinate"),
    (('prior = "uniform"\nlow = 1.0', 'prior = "gaussian"\nmean = 1.5\nsigma = 0.2\nlow = 1.0'),
     "parameters[1].prior", "must be uniform or log_uniform"),
    (('low = 0.012, ', ''), "parameters[1].width_prior.low", "needs low"),
])
def test_bad_width_priors_stop_with_exit_2_naming_the_key(tmp_path, capsys, replace, key,
                                                          words):
    text = (BASE + WALL_PARAMETER).replace(*replace)
    if "power" in replace[1]:
        text = text.replace("low = 1.0\nhigh = 3.0", "low = 0.9\nhigh = 1.1")
    config = tmp_path / "bad.toml"
    config.write_text(f'[run]\noutput_dir = "{tmp_path / "out"}"\n' + text)
    assert main(["sample", str(config)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert key in err and words in err
    with pytest.raises(ConfigError):
        PriorSet.from_config(load_config_text(text, "bad.toml"))


def test_chain_file_records_the_mapping(tmp_path):
    config = load_config_text(BASE + WALL_PARAMETER, "w.toml")
    priors = PriorSet.from_config(config)
    extras = runfile.Extras(priors.names, priors.labels, ("ok",), np.zeros(1, np.int64))
    path = tmp_path / "chain.h5"
    runfile.create(path, config, extras, np.ones((4, 2)))
    with h5py.File(path, "r") as handle:
        attrs = dict(handle[runfile.EXTRA].attrs)
    assert attrs["width_prior_key"] == "model.poles[0].wall_ratio"
    assert attrs["width_prior_kind"] == "log_uniform"
    assert (attrs["width_prior_low"], attrs["width_prior_high"]) == (0.012, 0.028)
    assert "w_w / rho^2 applied" in attrs["width_prior_jacobian"]


def test_emulator_interpolates_ln_wall_width_and_needs_none_without_it():
    # ln w_w below is linear in the inputs and the regressor's mean is linear
    # (scan/surrogate/gp.py): it is reproduced up to rounding
    rng = np.random.default_rng(5)
    u = rng.uniform(size=(24, 2))
    x = np.linspace(-3.0, 3.0, 9)
    scalars = np.column_stack([20 + u[:, 0], -3 + u[:, 1], np.full(24, 0.96), np.full(24, -3.0),
                               np.full(24, -9.0), np.full(24, 55.0),
                               np.log(0.03) - 2.0 * u[:, 0]])  # ln w_w: not a function of rho
    shapes = -0.5 * x[None, :] ** 2 * np.ones((24, 1))
    data = TrainingSet(u, np.ones(24, bool), scalars, shapes, x)
    pred = predict_unit(fit_emulator(data), u)
    np.testing.assert_allclose(pred.ln_wall_width, scalars[:, 6], rtol=0, atol=1e-9)
    six = TrainingSet(u, np.ones(24, bool), scalars[:, :6], shapes, x)
    emulator = fit_emulator(six)
    assert emulator.wall is None and np.all(np.isnan(predict_unit(emulator, u).ln_wall_width))


def test_training_record_carries_the_exact_wall_width():
    # w_w = (1 - p/2)|V'/V|(phi_1)/lambda_w (configs/README.md, model.poles[].sharpness) with
    # the T-model V = V0 tanh^2(phi/sqrt(6 alpha)) (Kallosh & Linde 2013, arXiv:1306.5220):
    # V'/V = 4/(sqrt(6 alpha) sinh(2 phi/sqrt(6 alpha))) by differentiation
    config = load_config_text(BASE + WALL_PARAMETER, "w.toml")
    record = solve_point(config, [5.2, 1.05])
    lam_w = wall_sharpness(apply_parameters(config, [5.2, 1.05]), 0)
    s = math.sqrt(6.0)
    expected = 0.5 * 4.0 / (s * math.sinh(2.0 * 5.2 / s)) / lam_w
    # same lambda_w, analytic V'/V on both sides: they differ by float rounding only
    assert record.ln_wall_width == pytest.approx(math.log(expected), abs=1e-12)
    assert record.scalar_targets()[SCALARS.index("ln_wall_width")] == record.ln_wall_width
    # verify's exact side finds the same wall (cached per model)
    assert exact_ln_wall_width(config, np.array([[5.2, 1.05]]))[0] == record.ln_wall_width
    canonical = load_config_text(BASE.replace("wall_ratio = 1.05", "width = 0.02"), "c.toml")
    assert math.isnan(wall_width(canonical))  # no wall coordinate: no wall width


def test_a_store_made_before_the_wall_column_reads_it_as_nan_and_keeps_six(tmp_path):
    config = load_config_text(BASE + WALL_PARAMETER, "w.toml")
    space = from_config(config)
    path = tmp_path / "training.h5"
    create_store(path, config, space, np.linspace(-3.0, 3.0, 5), {})
    with h5py.File(path, "r+", libver="latest") as handle:  # the old six-column layout
        del handle["points/scalars"]
        handle["points"].create_dataset("scalars", shape=(0, 6), maxshape=(None, 6),
                                        dtype="f8", chunks=(64, 6))
    record = TrainingRecord(np.array([5.2, 1.5]), True, "", 20.0, -3.0, np.zeros(5), 0.96,
                            1e-3, -9.0, 55.0, math.log(W_WALL))
    with StoreWriter(path) as writer:
        writer.append([0], [record])
    with h5py.File(path, "r") as handle:
        assert handle["points/scalars"].shape == (1, 6)
    points = read_points(path)
    # read as the current columns (ln w_w and the delta-N map's fit): NaN
    assert points.scalars.shape == (1, 9) and np.all(np.isnan(points.scalars[0, 6:]))
    np.testing.assert_array_equal(points.scalars[0, :6], record.scalar_targets()[:6])


@pytest.mark.parametrize("width", [Prior("w", "w", "log_uniform", 0.012, 0.028),
                                   Prior("w", "w", "gaussian", 0.005, np.inf, mean=0.02,
                                         sigma=0.01)], ids=["log_uniform", "gaussian"])
@pytest.mark.parametrize("ln_ww", [math.log(0.03), math.log(0.05)])
def test_kept_mass_is_the_integral_of_the_mapped_density_over_the_box(width, ln_ww):
    # two routes to the same number: the width prior's CDF at the box's image, and the
    # mapped density integrated over the box (adaptive quadrature, epsrel 1e-10)
    prior = mapped(width, box=Prior("c", "c", "uniform", 1.2, 2.0))
    kept = float(prior.kept_mass(np.array(ln_ww)))
    points = [math.exp(ln_ww) / b for b in (width.low, width.high) if math.isfinite(b)]
    mass, _ = integrate.quad(lambda c: math.exp(prior.log_density(np.array(c), ln_ww)),
                             1.2, 2.0, points=[p for p in points if 1.2 < p < 2.0],
                             epsabs=0.0, epsrel=1e-10, limit=200)
    assert 0.0 < kept < 1.0
    assert kept == pytest.approx(mass, rel=1e-8)
