"""The training store survives SIGKILL: resume loses no finished point, duplicates none."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np

from scan.surrogate.record import shape_grid
from scan.surrogate.store import read_plan, read_points
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from test_surrogate import config
from test_surrogate_standin import SPACE, StandinSolve

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
    proc = subprocess.Popen([sys.executable, "-c", SCRIPT.format(tests=str(TESTS),
                                                                 path=str(path))])
    deadline = time.monotonic() + 60
    seen = 0
    while time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.1)
        try:
            seen = len(read_points(path).index)
        except (OSError, KeyError):
            continue  # the file is being created
        if seen >= 10:
            break
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert proc.returncode == -signal.SIGKILL
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
