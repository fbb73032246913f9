"""``zetascan train --refine-from CHAIN``: exact solves where the posterior lies, refit.

Runs on the analytic stand-in solver (a TEST DOUBLE, tests/test_surrogate_standin.py) and a
short real chain on its surrogate, so every step is the product's code except the solve.
Checked: the new points are posterior samples (after burn-in/thinning) with their own
stage, well apart from the planned points; the hold-out set is untouched and never
trained on; rounds number up; bad input is a one-line exit 2.  Iterating an emulator on
its own posterior samples is common practice in emulator-driven inference.
"""
from __future__ import annotations

import shutil

import numpy as np
import pytest
from test_sampler_posterior import make_config
from test_surrogate_standin import SPACE, StandinSolve

from scan.cli import main
from scan.errors import InputFileError
from scan.pool import choose_pool
from scan.sampler import plan_run, posterior_samples, run_chain
from scan.store import RunLock
from scan.surrogate import design
from scan.surrogate.from_chain import chain_samples_unit, plan_chain_round, refine_from_chain
from scan.surrogate.identity import identity
from scan.surrogate.record import shape_grid
from scan.surrogate.space import ParameterSpace
from scan.surrogate.store import BUSY, StoreWriter, read_plan, read_points
from scan.surrogate.surrogate_file import write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map, training_set
from scan.surrogate.validate import validate

X = shape_grid(3.0, 41)


@pytest.fixture(scope="module")
def sampled(tmp_path_factory):
    """A 64-point stand-in surrogate and a 30-step chain on it (seconds)."""
    tmp_path = tmp_path_factory.mktemp("from_chain")
    cfg = make_config(tmp_path)
    folder = tmp_path / "standin"
    folder.mkdir()
    em, train, hold = run_training(folder / "training.h5", cfg, SPACE, StandinSolve(X),
                                   serial_map, TrainingPlan.from_config(cfg))
    write_surrogate(folder / "surrogate.h5", cfg, SPACE, em, validate(em, train, hold),
                    identity(cfg, SPACE))
    plan = plan_run(cfg, folder / "chain.h5")
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool)
    return cfg, folder


@pytest.fixture()
def copied(sampled, tmp_path):
    """A private copy of the sampled run folder (for tests that add to its store)."""
    cfg, folder = sampled
    shutil.copytree(folder, tmp_path / "standin")
    return cfg, tmp_path / "standin"


def test_a_round_adds_spread_posterior_points_and_keeps_the_holdout(copied):
    cfg, folder = copied
    store = folder / "training.h5"
    u0, stages0, _ = read_plan(store)
    hold0 = training_set(store, SPACE, X, holdout=True)
    samples = chain_samples_unit(folder / "chain.h5", SPACE)
    post = posterior_samples(folder / "chain.h5")
    assert len(samples) == len(post["samples"])  # every sample lies in the prior box

    chain_round, em, data, hold = refine_from_chain(store, cfg, SPACE, folder / "chain.h5",
                                                    10, StandinSolve(X), serial_map)
    assert chain_round.stage == design.STAGE_POSTERIOR and chain_round.pending == 0
    assert 0 < chain_round.planned <= 10
    u, stages, _ = read_plan(store)
    assert np.array_equal(u[:len(u0)], u0) and np.array_equal(stages[:len(u0)], stages0)
    new = u[len(u0):]
    assert np.all(stages[len(u0):] == design.STAGE_POSTERIOR)
    assert len(new) == chain_round.planned
    # each new point is one of the chain's posterior samples
    assert all(np.min(np.abs(samples - p).max(axis=1)) < 1e-12 for p in new)
    # ... at least half the local spacing away from every other planned point
    spacing = design.posterior_spacing(samples, u0, 10)
    assert design.min_distances(new, u0).min() >= 0.5 * spacing
    pairs = np.linalg.norm(new[:, None] - new[None], axis=-1)[np.triu_indices(len(new), 1)]
    assert pairs.min() >= 0.5 * spacing
    # all solved; trained on; the hold-out set is the same and not trained on
    assert len(read_points(store).index) == len(u)
    assert len(data.u) == int(np.sum(~np.isin(stages0, design.HOLDOUT_STAGES))) + len(new)
    assert np.array_equal(hold.u, hold0.u)
    assert design.min_distances(hold.u, data.u).min() > 0.0

    again = plan_chain_round(store, SPACE, folder / "chain.h5", 5, 3)
    assert again.stage == design.STAGE_POSTERIOR + 1  # the next round has its own stage


def test_an_interrupted_round_is_finished_before_a_new_one(copied):
    cfg, folder = copied
    store = folder / "training.h5"
    with RunLock(store, BUSY) as lock, StoreWriter(store, lock) as writer:
        writer.add_plan(np.full((1, 3), 0.5), design.STAGE_POSTERIOR, np.arange(1))
    chain_round = plan_chain_round(store, SPACE, folder / "chain.h5", 10, 3)
    assert chain_round.stage is None and chain_round.pending == 1


def test_a_chain_of_other_parameters_is_refused(sampled):
    cfg, folder = sampled
    one = ParameterSpace(("model.alpha",), ("uniform",), (0.5,), (2.0,))
    assert chain_samples_unit(folder / "chain.h5", one).shape[1] == 1  # columns by name
    bad = ParameterSpace(("model.poles[0].power",), ("uniform",), (0.5,), (1.5,))
    with pytest.raises(InputFileError, match="model.poles"):
        chain_samples_unit(folder / "chain.h5", bad)


def test_cli_errors_are_one_line_exit_2(sampled, tmp_path, capsys):
    cfg, folder = sampled
    toml = tmp_path / "c.toml"
    toml.write_text(cfg.effective_text)
    assert main(["train", str(toml), "--processes", "1", "--refine-from",
                 str(tmp_path / "nowhere.h5")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "nowhere.h5" in err[0]
    fresh = tmp_path / "fresh.toml"
    assert cfg.run.output_dir in cfg.effective_text
    fresh.write_text(cfg.effective_text.replace(cfg.run.output_dir, str(tmp_path / "empty")))
    assert main(["train", str(fresh), "--processes", "1", "--refine-from",
                 str(folder / "chain.h5")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "train" in err[0] and "first" in err[0]
