"""The peak training rounds (``[surrogate] peak_points``) and the peak hold-out window, on
the analytic stand-in (a test double, tests/test_surrogate_standin.py, never the product):
where the points go, that they are trained on and planned before the peak hold-out set,
that runs are deterministic and a resumed store with a larger peak_holdout is extended."""
from __future__ import annotations

import shutil

import numpy as np
import pytest
from test_surrogate import X, config
from test_surrogate_standin import SPACE, StandinSolve, standin_truth

from scan.surrogate import design
from scan.surrogate.store import read_plan
from scan.surrogate.train import TrainingPlan, run_training, serial_map

PEAK = ("surrogate.points=64", "surrogate.holdout=4", "surrogate.refine_rounds=0",
        "surrogate.peak_points=6", "surrogate.peak_rounds=2", "surrogate.peak_points_min=-1.5",
        "surrogate.peak_points_max=-1.2", "surrogate.peak_holdout=4",
        "surrogate.peak_holdout_min=-1.5")
#: The stand-in emulator's log10 P_peak error at 64 points is ~1e-3 dex (the accuracy test
#: of tests/test_surrogate.py); picks are judged against the window widened by a margin far
#: larger than that (common practice: margin >> emulator error).
MARGIN = 0.05


def train(path, *overrides):
    cfg = config(*PEAK, *overrides)
    return run_training(path, cfg, SPACE, StandinSolve(X), serial_map,
                        TrainingPlan.from_config(cfg), resume=path.exists())


@pytest.fixture(scope="module")
def peak_run(tmp_path_factory):
    path = tmp_path_factory.mktemp("peak") / "training.h5"
    _, data, hold = train(path)
    return path, data, hold


def test_peak_rounds_sit_in_the_window_and_are_trained_on(peak_run):
    path, data, hold = peak_run
    u, stage, seq = read_plan(path)
    for r in (0, 1):
        mine = stage == design.STAGE_PEAK + r
        assert mine.sum() == 6 and np.array_equal(seq[mine], np.arange(6))
        truth = standin_truth(SPACE.from_unit(u[mine]))["log10_P_peak"]
        assert np.all((truth >= -1.5 - MARGIN) & (truth <= -1.2 + MARGIN))
    assert len(data.u) == 64 + 12 and len(hold.u) == 4 + 4
    peak_rows = np.isin(stage, (design.STAGE_PEAK, design.STAGE_PEAK + 1))
    trained = np.array([np.any(np.all(np.isclose(data.u, p), axis=1)) for p in u[peak_rows]])
    assert trained.all()
    # planned before the peak hold-out set, which stays out of training
    held = np.flatnonzero(stage == design.STAGE_HOLDOUT_PEAK)
    assert len(held) == 4 and held.min() > np.flatnonzero(peak_rows).max()
    assert not np.any([np.any(np.all(np.isclose(data.u, p), axis=1)) for p in u[held]])


def test_peak_rounds_are_deterministic_and_a_resume_extends_the_peak_holdout(peak_run,
                                                                             tmp_path):
    path, _, _ = peak_run
    u0, stage0, _ = read_plan(path)
    again = tmp_path / "again.h5"
    train(again)
    u1, stage1, _ = read_plan(again)
    assert np.array_equal(u0, u1) and np.array_equal(stage0, stage1)
    # a larger peak_holdout on resume: the first 4 stay, 3 more are drawn in the window
    grown = tmp_path / "grown.h5"
    shutil.copy(path, grown)
    _, _, hold = train(grown, "surrogate.peak_holdout=7", "surrogate.peak_holdout_max=-1.2")
    u2, stage2, seq2 = read_plan(grown)
    assert np.array_equal(u2[:len(u0)], u0)
    held = stage2 == design.STAGE_HOLDOUT_PEAK
    assert np.array_equal(seq2[held], np.arange(7)) and len(hold.u) == 4 + 7
    extra = standin_truth(SPACE.from_unit(u2[len(u0):]))["log10_P_peak"]
    assert len(extra) == 3 and np.all((extra >= -1.5 - MARGIN) & (extra <= -1.2 + MARGIN))
    # a rerun plans nothing more
    train(grown, "surrogate.peak_holdout=7", "surrogate.peak_holdout_max=-1.2")
    assert len(read_plan(grown)[0]) == len(u2)


def test_peak_round_points_split_between_largest_sd_and_random_draws():
    """``peak_variance_fraction`` of a round goes to the largest predictive sd (kept apart
    by :func:`design.greedy_spread`), the rest are the hold-out-like random draws."""
    rng = np.random.default_rng(0)
    cand = rng.random((400, 3))
    window = cand[:, 2] > 0.5                       # a stand-in window: half the cube
    sd = np.where(cand[window, 0] > 0.9, 1.0, 0.01)  # uncertain only in a corner of it
    existing = rng.random((50, 3))
    pts = design.peak_round_points(cand, window, sd, existing, 10, 0.5, 3, (500, 2))
    assert len(pts) == 10 and np.all(pts[:, 2] > 0.5)
    assert np.all(pts[:5, 0] > 0.9)                 # the 5 by sd sit where sd is large
    assert len({tuple(p) for p in pts}) == 10       # no candidate taken twice
    # fraction 0: exactly the random draw of the peak hold-out points with the same stream
    random_only = design.peak_round_points(cand, window, sd, existing, 10, 0.0, 3, (500, 2))
    same = design.peak_holdout_points(cand, np.where(window, 0.0, -9.0), np.ones(400), -1.0,
                                      10, 3, stream=(500, 2))
    assert np.array_equal(random_only, same)
