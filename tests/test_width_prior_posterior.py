"""The posterior target applies a width prior stated for the wall coordinate.

The surrogate is trained on the analytic stand-in solver (a TEST DOUBLE of the exact
solver, tests/test_surrogate_standin.py) re-parametrised by the wall ratio: the stand-in's
width is w = w_w/ρ with an invented wall width w_w(position) that the records carry as
ln w_w, as the exact solves of a wall-coordinate model do.
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from test_surrogate_standin import standin_solve

from scan.config import load_config_text
from scan.config.priors import PriorSet
from scan.errors import ConfigError
from scan.posterior.build import posterior_target, width_prior_note
from scan.surrogate.identity import identity
from scan.surrogate.record import TrainingRecord, shape_grid
from scan.surrogate.space import from_config
from scan.surrogate.surrogate_file import write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from scan.surrogate.validate import validate

ROOT = Path(__file__).resolve().parents[1]
CURVES = [ROOT / "constraints" / "demo" / "pta_excess_kestrel.csv"]
TEXT = """
[run]
name = "wallstandin"
seed = 4
output_dir = "{out}"
[model]
potential = "t_model"
kinetic = "poles"
[[model.poles]]
position = 1.6
wall_ratio = 1.5
power = 1.0
[surrogate]
points = 64
holdout = 8
refine_rounds = 0
[[parameters]]
key = "model.poles[0].wall_ratio"
prior = "uniform"
low = 1.0
high = 3.0
{width_prior}
[[parameters]]
key = "model.poles[0].position"
prior = "uniform"
low = 1.5
high = 1.7
[[parameters]]
key = "model.alpha"
prior = "uniform"
low = 0.5
high = 2.0
[[nuisance]]
name = "A_smbhb"
prior = "log_uniform"
low = 1e-16
high = 1e-14
[sampler]
target = "posterior"
walkers = 16
vectorize = true
[likelihood]
curves = [{curves}]
surrogate = "{out}/wallstandin/surrogate.h5"
"""
WIDTH_PRIOR = 'width_prior = { prior = "log_uniform", low = 0.012, high = 0.028 }'


def ln_wall_width(position: np.ndarray) -> np.ndarray:
    """The stand-in's invented wall width, ln w_w(position) [ln M_p]."""
    return math.log(0.03) + (np.asarray(position, float) - 1.6)


class WallStandin:
    """``solve(rho, position, alpha)``: the stand-in at w = w_w/rho, with ln w_w recorded."""

    def __init__(self, x: np.ndarray) -> None:
        self.x = x

    def __call__(self, theta: np.ndarray) -> TrainingRecord:
        rho, position, alpha = theta
        ln_ww = float(ln_wall_width(position))
        record = standin_solve(np.array([math.exp(ln_ww) / rho, position, alpha]), self.x)
        return dataclasses.replace(record, params=np.asarray(theta, float),
                                   ln_wall_width=ln_ww)


def config_of(tmp: Path, width_prior: str):
    curves = ", ".join(f'"{p}"' for p in CURVES)
    return load_config_text(TEXT.format(out=tmp, curves=curves, width_prior=width_prior),
                            "wall_posterior.toml")


@pytest.fixture(scope="module")
def targets(tmp_path_factory):
    """The posterior targets with and without the width prior, on one stand-in surrogate."""
    tmp = tmp_path_factory.mktemp("wallposterior")
    mapped, plain = config_of(tmp, WIDTH_PRIOR), config_of(tmp, "")
    space = from_config(plain)
    (tmp / "wallstandin").mkdir()
    em, train, hold = run_training(tmp / "wallstandin" / "training.h5", plain, space,
                                   WallStandin(shape_grid(3.0, 41)), serial_map,
                                   TrainingPlan.from_config(plain))
    write_surrogate(tmp / "wallstandin" / "surrogate.h5", plain, space, em,
                    validate(em, train, hold), identity(plain, space))
    # the same emulator as a surrogate made before ln w_w was emulated
    write_surrogate(tmp / "old.h5", plain, space, dataclasses.replace(em, wall=None),
                    validate(em, train, hold), identity(plain, space))
    return (posterior_target(mapped, PriorSet.from_config(mapped)),
            posterior_target(plain, PriorSet.from_config(plain)), tmp)


def test_the_target_adds_the_mapped_width_prior_with_the_emulated_wall(targets):
    mapped, plain, _ = targets
    rng = np.random.default_rng(8)
    theta = np.column_stack([rng.uniform(1.0, 3.0, 200), rng.uniform(1.5, 1.7, 200),
                             rng.uniform(0.5, 2.0, 200), np.full(200, 1e-15)])
    log_mapped, blobs = mapped.log_and_blobs(theta)
    log_plain, _ = plain.log_and_blobs(theta)
    ln_ww = mapped.loaded["surrogate"].predict(theta[:, :3]).ln_wall_width
    # the emulated wall is the recorded one: this ln w_w is linear in the position and the
    # regressor's mean is linear in its inputs (scan/surrogate/gp.py), so only rounding is left
    assert np.max(np.abs(ln_ww - ln_wall_width(theta[:, 1]))) < 1e-9
    ratio = mapped.priors.width_prior.log_ratio(theta[:, 0], ln_ww)
    both = np.isfinite(log_mapped) & np.isfinite(log_plain)
    assert both.sum() > 20
    np.testing.assert_allclose(log_mapped[both] - log_plain[both], ratio[both], rtol=0,
                               atol=1e-9)
    # where w = w_w/rho leaves [0.012, 0.028] the mapped target says outside_prior
    outside = ~np.isfinite(ratio) & np.isfinite(log_plain)
    assert outside.any()
    reasons = {mapped.reasons[int(r)] for r in blobs["reason"][outside]}
    assert reasons == {"outside_prior"}


def test_a_surrogate_without_the_wall_block_is_refused_for_a_width_prior(targets):
    tmp = targets[2]
    config = config_of(tmp, WIDTH_PRIOR)
    config = dataclasses.replace(config, likelihood=dataclasses.replace(
        config.likelihood, surrogate=str(tmp / "old.h5")))
    with pytest.raises(ConfigError, match="does not emulate ln w_w"):
        posterior_target(config, PriorSet.from_config(config))


def test_sample_notes_how_much_of_the_width_prior_the_box_keeps(targets):
    mapped, plain, _ = targets
    note = width_prior_note(mapped)
    theta = mapped.priors.sample(np.random.default_rng(mapped.config.run.seed), 512)
    kept = mapped.priors.width_prior.kept_mass(ln_wall_width(theta[:, 1]))
    assert note.startswith("width prior of model.poles[0].wall_ratio: the sampled box keeps "
                           f"{np.median(kept):.0%} of its mass")
    assert width_prior_note(plain) is None
