"""Result files: atomic writes, provenance, units attributes."""
from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest

from scan import store
from scan.errors import InputFileError


def test_atomic_write_renames_on_success(tmp_path):
    path = tmp_path / "run.h5"
    with store.atomic_h5(path) as handle:
        store.write_attrs(handle, store.provenance("x = 1\n", seed=3))
        store.write_config(handle, "x = 1\n", ("a.b=2",))
        grp = handle.create_group("background")
        store.write_dataset(grp, "N", np.arange(3.0), "e-folds")
        assert not path.exists()
    with h5py.File(path, "r") as handle:
        assert handle["background/N"].attrs["units"] == "e-folds"
        assert handle.attrs["seed"] == 3
        assert handle.attrs["config_sha256"] == store.config_hash("x = 1\n")
        assert handle.attrs["version_numpy"] == np.__version__
        assert list(handle["config"].attrs["overrides"]) == ["a.b=2"]
    assert store.read_config_text(path) == "x = 1\n"


def test_failed_write_leaves_existing_file_untouched(tmp_path):
    path = tmp_path / "run.h5"
    with store.atomic_h5(path) as handle:
        handle.attrs["generation"] = 1
    with pytest.raises(RuntimeError):
        with store.atomic_h5(path) as handle:
            handle.attrs["generation"] = 2
            raise RuntimeError("crash mid-write")
    with h5py.File(path, "r") as handle:
        assert handle.attrs["generation"] == 1
    assert [p.name for p in tmp_path.iterdir()] == ["run.h5"]


def test_reading_a_non_result_file_is_a_clear_error(tmp_path):
    from scan.errors import InputFileError
    junk = tmp_path / "junk.h5"
    junk.write_text("not hdf5")
    with pytest.raises(InputFileError, match="cannot open as HDF5"):
        store.read_config_text(junk)


def test_run_lock_names_the_holder_and_frees_on_exit(tmp_path):
    # issue 19 item 4: a second writer is refused with the holder's PID; the OS frees the
    # lock when its holder ends (even by SIGKILL); one holder within this process too
    path = tmp_path / "run" / "chain.h5"
    script = ("import sys, time; from scan.store import RunLock; "
              f"lock = RunLock({str(path)!r}); print('held', flush=True); time.sleep(60)")
    holder = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE,
                              text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        assert store.holder_pid(path) == holder.pid
        with pytest.raises(InputFileError, match=f"process {holder.pid} is writing"):
            store.RunLock(path, "wait for it")
    finally:
        holder.kill()
        holder.wait()
    deadline = time.monotonic() + 10
    while True:  # the kernel drops the dead holder's lock
        try:
            outer = store.RunLock(path)
            break
        except InputFileError:
            assert time.monotonic() < deadline
            time.sleep(0.05)
    with outer:
        assert outer.held and store.holder_pid(path) == os.getpid()
        with pytest.raises(InputFileError, match=f"process {os.getpid()}"):
            store.RunLock(path)  # one holder, in this process too
    assert not outer.held
    store.RunLock(path).release()


def test_one_table_says_what_a_file_is(tmp_path):
    # issue 18 item 4: plot, summary and resume ask store.identify / store.require
    from scan.config import load_config_text
    from scan.grid.store import KIND as GRID
    from scan.sampler import runfile
    from scan.surrogate.store import KIND as TRAINING
    from scan.surrogate.surrogate_file import KIND as SURROGATE
    from scan.verify.partial import KIND as PARTIAL

    config = load_config_text('[model]\npotential = "t_model"\n', "c.toml")
    chain = tmp_path / "run" / "chain.h5"
    runfile.create(chain, config, runfile.Extras(("a",), ("a",), ("ok",),
                                                 np.zeros(1, np.int64)), np.zeros((2, 1)))
    assert store.identify(chain) == "chain"
    for name, kind in (("grid", GRID), ("training", TRAINING), ("surrogate", SURROGATE),
                       ("verify_partial", PARTIAL)):
        with store.atomic_h5(tmp_path / f"{name}.h5") as handle:
            handle.attrs["kind"] = kind
        assert store.identify(tmp_path / f"{name}.h5") == name
    with store.atomic_h5(tmp_path / "solve.h5") as handle:
        handle.create_group("background")
    assert store.require(tmp_path / "solve.h5", "solve", "chain") == "solve"
    with pytest.raises(InputFileError, match=r"this is a chain file \(made by zetascan "
                       r"sample\), not a grid file \(made by zetascan grid\)"):
        store.require(chain, "grid")
    with store.atomic_h5(tmp_path / "other.h5") as handle:
        handle.create_group("something")
    with pytest.raises(InputFileError, match=r"not a zetascan chain file \(groups: something\)"):
        store.require(tmp_path / "other.h5", "chain")
    with pytest.raises(InputFileError, match="not a zetascan chain file .a grid file."):
        runfile.read(tmp_path / "grid.h5")  # resume asks the same table


def test_run_folder_builds_every_path_and_names_are_one_component():
    folder = store.RunFolder.of(type("C", (), {"run": type("R", (), {
        "output_dir": "results", "name": "pole_scan"})})())
    assert folder.chain == Path("results/pole_scan/chain.h5")
    assert folder.grid.name == "grid.h5" and folder.training.name == "training.h5"
    assert folder.surrogate.name == "surrogate.h5"
    assert folder.solve_result == Path("results/pole_scan.h5")
    assert store.name_problem("pole_scan") is None
    for bad in ("", "..", ".", "a/b", "../x", "/abs", "a\\b", "a\0b"):
        assert store.name_problem(bad) is not None, bad
