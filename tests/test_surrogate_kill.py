"""The training store survives SIGKILL: resume loses no finished point, duplicates none."""
from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
from kill_support import sigkill_after_progress
from test_surrogate import config
from test_surrogate_standin import SPACE, StandinSolve

from scan.surrogate.record import shape_grid
from scan.surrogate.store import read_plan, read_points
from scan.surrogate.train import TrainingPlan, run_training, serial_map

TESTS = Path(__file__).resolve().parent
SCRIPT = textwrap.dedent("""
    import sys
    sys.path.insert(0, {tests!r})
    from test_surrogate import config
    from test_surrogate_standin import SPACE, StandinSolve
    from scan.surrogate.record import shape_grid
    from scan.surrogate.train import TrainingPlan, run_training, serial_map
    cfg = config("surrogate.points=40", "surrogate.holdout=8", "surrogate.refine_rounds=0")
    run_training({path!r}, cfg, SPACE, StandinSolve(shape_grid(3.0, 41), delay=0.05),
                 serial_map, TrainingPlan.from_config(cfg), chunk=1)
""")


def test_sigkill_midway_then_resume(tmp_path):
    path = tmp_path / "training.h5"
    sigkill_after_progress(SCRIPT.format(tests=str(TESTS), path=str(path)),
                           lambda: len(read_points(path).index), 10, poll_s=0.1)
    killed = read_points(path)
    assert 10 <= len(killed.index) < 48  # interrupted midway, file readable
    cfg = config("surrogate.points=40", "surrogate.holdout=8", "surrogate.refine_rounds=0")
    run_training(path, cfg, SPACE, StandinSolve(shape_grid(3.0, 41)), serial_map,
                 TrainingPlan.from_config(cfg), resume=True)
    final = read_points(path)
    u, _, _ = read_plan(path)
    assert len(u) == 48
    assert sorted(final.index.tolist()) == list(range(48))  # none lost, none twice
    with __import__("h5py").File(path, "r") as handle:  # no duplicate rows on disk either
        raw = handle["points/index"][()]
    assert len(raw[raw >= 0]) == len(set(raw[raw >= 0].tolist())) == 48
    before = np.isin(final.index, killed.index)
    assert np.array_equal(final.params[before], killed.params)
    assert np.array_equal(final.valid[before], killed.valid)


class _StopAfter:
    """A solver that raises after ``n`` solves (a run interrupted between points)."""

    def __init__(self, n: int) -> None:
        self.inner, self.left = StandinSolve(shape_grid(3.0, 41)), n

    def __call__(self, theta):
        if self.left == 0:
            raise KeyboardInterrupt
        self.left -= 1
        return self.inner(theta)


def test_a_torn_row_is_overwritten_not_paired_with_the_next_index(tmp_path):
    """A kill between a point's values and its index leaves the values one row longer
    than ``points/index`` (and ``plan/u`` longer than ``plan/seq``).  The resumed writer
    must overwrite those torn rows: every stored index keeps its own parameters (the
    plan point it names), none lost, none twice."""
    import h5py

    path = tmp_path / "training.h5"
    cfg = config("surrogate.points=40", "surrogate.holdout=8", "surrogate.refine_rounds=0")
    plan = TrainingPlan.from_config(cfg)
    try:
        run_training(path, cfg, SPACE, _StopAfter(12), serial_map, plan, chunk=1)
    except KeyboardInterrupt:
        pass
    assert len(read_points(path).index) == 12
    with h5py.File(path, "a", libver="latest") as handle:   # the torn row of a kill
        pts = handle["points"]
        for name in ("params", "valid", "reason", "scalars", "shape"):
            dset = pts[name]
            dset.resize(dset.shape[0] + 1, axis=0)
            dset[-1] = dset[0]                   # plausible-looking values of point 0
        u = handle["plan/u"]
        u.resize(u.shape[0] + 1, axis=0)
        u[-1] = 0.5
    run_training(path, cfg, SPACE, StandinSolve(shape_grid(3.0, 41)), serial_map, plan,
                 resume=True)
    final = read_points(path)
    u, _, seq = read_plan(path)
    assert len(u) == len(seq) == 48
    assert sorted(final.index.tolist()) == list(range(48))
    np.testing.assert_array_equal(final.params, SPACE.from_unit(u[final.index]))
