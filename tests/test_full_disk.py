"""Full and read-only disks: ``sample`` and ``train`` stop cleanly (exit 2, one line), keep
everything written readable, and a rerun after space is freed continues from the last
completed write — bit for bit as an uninterrupted run.

Where the test can mount a small tmpfs (root, Linux) the disk really fills; everywhere the
same path is also driven by injecting a full disk (``scan.store.free_bytes`` patched).
"""
from __future__ import annotations

import contextlib
import os
import subprocess
from pathlib import Path

import h5py
import numpy as np
import pytest
from test_surrogate import BASE, X, config
from test_surrogate_standin import SPACE, StandinSolve

import scan.cli.train as train_cli
from scan import store
from scan.cli import main
from scan.errors import OutputError
from scan.sampler import runfile
from scan.surrogate.store import read_plan, read_points
from scan.surrogate.train import TrainingPlan, run_training, serial_map

ROOT = Path(__file__).resolve().parents[1]
KIB = 1024
MAX_STEPS = 400


def gaussian_config(folder: Path, out: Path, max_steps: int = MAX_STEPS) -> Path:
    """The shipped Gaussian test run (fast, no physics) writing under ``out``, 10 steps
    per write."""
    text = (ROOT / "configs" / "gaussian_test.toml").read_text()
    text = text.replace('seed = 7', f'seed = 7\noutput_dir = "{out}"')
    text = text.replace("max_steps = 4000", f"max_steps = {max_steps}\nwrite_every = 10")
    path = folder / f"g_{out.name}.toml"
    path.write_text(text)
    return path


@contextlib.contextmanager
def small_tmpfs(folder: Path, size_kib: int = 8192):
    """Mount a tmpfs of ``size_kib`` at ``folder`` (skip the test when that is impossible)."""
    folder.mkdir()
    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root; the injected full disk covers this path")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size_kib}k", "tmpfs",
                           str(folder)], capture_output=True, text=True, check=False)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip()}")
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", str(folder)], capture_output=True, check=False)


def leave_free(folder: Path, nbytes: int) -> Path:
    """Fill ``folder``'s file system with a ballast file until ``nbytes`` remain free."""
    ballast = folder / "ballast"
    ballast.write_bytes(b"\0" * max(store.free_bytes(folder) - nbytes, 0))
    return ballast


def one_error_line(capsys) -> str:
    """The one error line on stderr (progress lines aside)."""
    err = [line for line in capsys.readouterr().err.splitlines() if line.startswith("zetascan")]
    assert len(err) == 1, err
    return err[0]


def chain_of(path: Path) -> np.ndarray:
    with h5py.File(path, "r") as handle:
        n = int(handle["mcmc"].attrs["iteration"])
        return handle["mcmc/chain"][:n]


@pytest.fixture(scope="module")
def reference_chain(tmp_path_factory) -> np.ndarray:
    """The chain of an uninterrupted run."""
    folder = tmp_path_factory.mktemp("reference")
    assert main(["sample", str(gaussian_config(folder, folder / "out"))]) == 0
    return chain_of(folder / "out" / "gaussian_test" / "chain.h5")


def check_stopped_then_resumed(capsys, cfg: Path, chain: Path, free_space,
                               reference: np.ndarray) -> None:
    """Exit 2 with one line, a readable partial chain, then a rerun equal to the reference."""
    assert main(["sample", str(cfg)]) == 2
    line = one_error_line(capsys)
    assert "no space left on device" in line and "run the same command again" in line
    kept = runfile.read(chain).iteration
    assert 0 < kept < MAX_STEPS, kept  # stopped midway, and the file reads back
    free_space()
    assert main(["sample", str(cfg)]) == 0
    assert "resumed" in capsys.readouterr().out
    assert np.array_equal(chain_of(chain), reference)


def test_sample_on_a_full_tmpfs_stops_cleanly_and_resumes(tmp_path, capsys, reference_chain):
    """The chain's chunk rows: 192 KiB at step 0, blobs 29 KiB per 100 steps, 163 KiB at
    step 256, and ~0.6 KiB of HDF5 metadata per step: 420 KiB beyond the margin run out
    before step 256."""
    with small_tmpfs(tmp_path / "disk") as disk:
        ballast = leave_free(disk, store.SPACE_MARGIN + 420 * KIB)
        cfg = gaussian_config(tmp_path, disk)
        check_stopped_then_resumed(capsys, cfg, disk / "gaussian_test" / "chain.h5",
                                   ballast.unlink, reference_chain)


class FillingDisk:
    """``free_bytes`` of a disk that is full after ``calls`` checks until :meth:`free`."""

    def __init__(self, calls: int) -> None:
        self.left, self.full = calls, False

    def __call__(self, path) -> int:
        self.left -= 1
        self.full = self.full or self.left < 0
        return 0 if self.full else 1 << 40

    def free(self) -> None:
        self.left, self.full = 1 << 30, False


def test_sample_disk_full_injected_stops_cleanly_and_resumes(tmp_path, capsys, monkeypatch,
                                                             reference_chain):
    disk = FillingDisk(calls=20)  # the writability check, then 19 writes of 10 steps
    monkeypatch.setattr(store, "free_bytes", disk)
    out = tmp_path / "out"
    check_stopped_then_resumed(capsys, gaussian_config(tmp_path, out),
                               out / "gaussian_test" / "chain.h5", disk.free, reference_chain)


def test_read_only_or_missing_output_is_one_line_exit_2(tmp_path, capsys):
    """A read-only folder (or a file where the folder should be) is refused before any
    sampling, naming the folder; --out pointing at a folder names it too."""
    blocker = tmp_path / "not_a_folder"
    blocker.write_text("a file")
    cfg = gaussian_config(tmp_path, blocker)
    assert main(["sample", str(cfg)]) == 2
    assert "not_a_folder" in one_error_line(capsys)
    assert main(["sample", str(cfg), "--out", str(tmp_path)]) == 2
    assert "is a folder" in one_error_line(capsys)
    if os.geteuid() != 0:  # root writes through permission bits: only a read-only mount
        locked = tmp_path / "locked"
        locked.mkdir(mode=0o555)
        assert main(["sample", str(gaussian_config(tmp_path, locked))]) == 2
        assert "permission denied" in one_error_line(capsys)


def _train_config(out: Path, points: int) -> Path:
    text = BASE.replace('seed = 3', f'seed = 3\noutput_dir = "{out}"') + (
        f"[surrogate]\npoints = {points}\nholdout = 8\nrefine_rounds = 0\n"
        "shape_points = 41\nshape_span = 3.0\nfit_iterations = 10\n")
    path = out.parent / f"train_{out.name}.toml"
    path.write_text(text)
    return path


@pytest.fixture
def standin_train(monkeypatch):
    """``zetascan train`` on the analytic stand-in (no exact solves; tests only)."""
    monkeypatch.setattr(train_cli, "from_config", lambda cfg: SPACE)
    monkeypatch.setattr(train_cli, "SolvePoint", lambda cfg, keys: StandinSolve(X))
    monkeypatch.setattr(train_cli, "observables_for", lambda cfg, space: None)


def test_train_on_a_full_tmpfs_stops_cleanly_and_resumes(tmp_path, capsys, standin_train):
    """The store takes 36 KiB per 64 points: with 80 KiB beyond the margin the first
    chunk rows fit and the second (at point 64) does not."""
    with small_tmpfs(tmp_path / "disk") as disk:
        ballast = leave_free(disk, store.SPACE_MARGIN + 80 * KIB)
        cfg = _train_config(disk, points=150)
        assert main(["train", str(cfg), "--processes", "1"]) == 2
        line = one_error_line(capsys)
        assert "no space left on device" in line and "--resume" in line
        path = disk / "standin" / "training.h5"
        kept = read_points(path)
        assert 0 < len(kept.index) < 158
        ballast.unlink()
        assert main(["train", str(cfg), "--processes", "1", "--resume"]) == 0
        final = read_points(path)
        assert sorted(final.index.tolist()) == list(range(158))
        assert np.array_equal(final.params[np.isin(final.index, kept.index)], kept.params)


def test_train_disk_full_injected_keeps_points_and_resumes(tmp_path, monkeypatch):
    """Injected: the store stops between appends and ``resume`` continues to the same
    points as an uninterrupted run."""
    cfg = config("surrogate.points=40", "surrogate.holdout=8", "surrogate.refine_rounds=0",
                 "surrogate.fit_iterations=10")
    plan = TrainingPlan.from_config(cfg)
    ref = tmp_path / "ref.h5"
    run_training(ref, cfg, SPACE, StandinSolve(X), serial_map, plan, chunk=4)
    disk = FillingDisk(calls=5)  # two plan appends, then three batches of 4 points
    monkeypatch.setattr(store, "free_bytes", disk)
    path = tmp_path / "training.h5"
    with pytest.raises(OutputError, match="keeps the 12 points solved before"):
        run_training(path, cfg, SPACE, StandinSolve(X), serial_map, plan, chunk=4)
    assert len(read_points(path).index) == 12
    disk.free()
    run_training(path, cfg, SPACE, StandinSolve(X), serial_map, plan, chunk=4, resume=True)
    a, b = read_points(path), read_points(ref)
    assert np.array_equal(a.index, b.index) and np.array_equal(a.params, b.params)
    assert np.array_equal(a.shape, b.shape, equal_nan=True)
    assert np.array_equal(read_plan(path)[0], read_plan(ref)[0])


def test_read_only_disk_is_refused_before_any_work(tmp_path, capsys):
    """A chain on a disk that became read-only: sample (resume or --restart), solve and
    observe refuse in one line naming the folder, before computing anything."""
    with small_tmpfs(tmp_path / "disk") as disk:
        cfg = gaussian_config(tmp_path, disk, max_steps=20)
        assert main(["sample", str(cfg)]) == 0
        capsys.readouterr()
        done = subprocess.run(["mount", "-o", "remount,ro", str(disk)], capture_output=True,
                              text=True, check=False)
        if done.returncode != 0:
            pytest.skip(f"cannot remount read-only here: {done.stderr.strip()}")
        table = tmp_path / "s.csv"
        k = np.geomspace(1.0, 1e6, 40)
        np.savetxt(table, np.c_[k, 1e-2 * np.exp(-np.log(k / 1e3) ** 2)], delimiter=",",
                   header="k,P_zeta", comments="")
        for argv in (["sample", str(cfg)], ["sample", str(cfg), "--restart"],
                     ["solve", str(cfg), "--no-figures"],
                     ["observe", str(table), "--out", str(disk / "o.h5")]):
            assert main(argv) == 2, argv
            line = one_error_line(capsys)
            assert str(disk) in line and "read-only file system" in line, line
        assert runfile.read(disk / "gaussian_test" / "chain.h5").iteration == 20  # intact
