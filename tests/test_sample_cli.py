"""``zetascan sample`` / ``summary``: resume after SIGKILL, SIGTERM, config changes, MPI."""
from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from mpi_support import mpi_missing

from scan.cli import main

CONFIG = """
[run]
name = "g"
seed = 3
[model]
potential = "t_model"
alpha = 1.0
[[parameters]]
key = "model.alpha"
prior = "gaussian"
mean = 1.0
sigma = 0.1
low = 0.0
[[nuisance]]
name = "a"
prior = "gaussian"
mean = 0.0
sigma = 2.0
[sampler]
target = "gaussian_test"
walkers = 8
max_steps = {steps}
check_every = 100
write_every = 20
progress_every_s = 0.05
test_correlation = 0.3
"""


def write_config(folder: Path, steps: int) -> Path:
    path = folder / "g.toml"
    text = CONFIG.format(steps=steps).replace('seed = 3', f'seed = 3\noutput_dir = "{folder}"')
    path.write_text(text)
    return path


def cli(*args: str, **kw) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "scan", *args], capture_output=True,
                          text=True, timeout=180, **kw)


def chain_contents(path: Path) -> dict[str, np.ndarray]:
    with h5py.File(path, "r") as f:
        g, s = f["mcmc"], f["sampler"]
        n = int(g.attrs["iteration"])
        return {"iteration": n, "chain": g["chain"][:n], "log_prob": g["log_prob"][:n],
                "blobs": g["blobs"][:n], "accepted": g["accepted"][...],
                "counts": s["reason_counts"][...], "tau_steps": s["tau_steps"][...],
                "tau_history": s["tau_history"][...], "status": s.attrs["status"]}


def start_and_signal(config: Path, sig: int, min_step: int) -> subprocess.Popen:
    """Start the CLI, wait for a progress line (stderr) at >= min_step, send ``sig``."""
    proc = subprocess.Popen([sys.executable, "-m", "scan", "sample", str(config)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    for line in proc.stderr:
        if line.startswith("sample: ") and int(line.split()[1].split("/")[0]) >= min_step:
            proc.send_signal(sig)
            break
        assert time.monotonic() < deadline
    return proc


def test_sigkill_then_resume_equals_an_uninterrupted_run(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    steps = 3000
    full = cli("sample", str(write_config(tmp_path / "a", steps)))
    assert full.returncode == 0, full.stderr
    config_b = write_config(tmp_path / "b", steps)
    proc = start_and_signal(config_b, signal.SIGKILL, min_step=300)
    proc.communicate(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    killed = chain_contents(tmp_path / "b" / "g" / "chain.h5")
    assert 0 < killed["iteration"] < steps and killed["iteration"] % 20 == 0  # written ones
    resumed = cli("sample", str(config_b))
    assert resumed.returncode == 0, resumed.stderr
    assert "resumed" in resumed.stdout
    a = chain_contents(tmp_path / "a" / "g" / "chain.h5")
    b = chain_contents(tmp_path / "b" / "g" / "chain.h5")
    assert a["iteration"] == b["iteration"] > killed["iteration"]
    for key in ("chain", "log_prob", "blobs", "accepted", "counts", "tau_steps",
                "tau_history"):
        assert np.array_equal(a[key], b[key]), key  # bit-identical
    assert a["status"] == b["status"]
    assert np.array_equal(a["chain"][:killed["iteration"]], killed["chain"])


def test_sigterm_stops_cleanly_with_exit_143(tmp_path):
    config = write_config(tmp_path, 200000)
    proc = start_and_signal(config, signal.SIGTERM, min_step=100)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err
    assert "stopped by SIGTERM" in out and "Traceback" not in err
    got = chain_contents(tmp_path / "g" / "chain.h5")
    n = got["iteration"]
    assert got["status"] == "stopped" and n >= 100
    assert np.all(np.isfinite(got["log_prob"])) and np.all(got["chain"][:, :, 0] != 0.0)
    assert got["counts"].sum() == 8 * (n + 1)  # initial walkers + every proposal, no loss
    info = json.loads(cli("summary", str(tmp_path / "g"), "--json").stdout)
    assert info["steps"] == n and info["status"] == "stopped" and not info["converged"]


def test_changed_config_is_refused_with_the_diff_unless_restart(tmp_path, capsys):
    config = write_config(tmp_path, 150)
    assert main(["sample", str(config)]) == 0
    capsys.readouterr()
    code = main(["sample", str(config), "--set", "sampler.walkers=10",
                 "--set", "nuisance[0].sigma=3.0"])
    err = capsys.readouterr().err
    assert code == 2
    assert "nuisance[0].sigma: 2.0 -> 3.0" in err and "sampler.walkers: 8 -> 10" in err
    assert "--restart" in err
    assert main(["sample", str(config), "--set", "sampler.max_steps=250"]) == 0  # resumable
    assert "250 steps (100 in this run, resumed)" in capsys.readouterr().out
    assert main(["sample", str(config), "--set", "sampler.walkers=10", "--restart"]) == 0
    got = chain_contents(tmp_path / "g" / "chain.h5")
    assert got["chain"].shape == (150, 10, 2)
    assert main(["summary", str(tmp_path / "g")]) == 0
    text = capsys.readouterr().out
    assert "model.alpha" in text and "68%" in text and "95%" in text


def test_posterior_target_refuses_unknown_nuisance_in_one_line(tmp_path, capsys):
    config = write_config(tmp_path, 10)
    config.write_text(config.read_text().replace('"gaussian_test"', '"posterior"'))
    assert main(["sample", str(config)]) == 2
    err = capsys.readouterr().err
    # the Gaussian-test config's nuisance 'a' is no parameter of the physics likelihood
    assert "nuisance[0].name" in err and "A_smbhb" in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1




@pytest.mark.skipif(bool(mpi_missing()), reason=mpi_missing() or "MPI available")
def test_mpi_smoke_run_matches_serial(tmp_path):
    (tmp_path / "mpi").mkdir()
    (tmp_path / "serial").mkdir()
    mpi = subprocess.run(["mpiexec", "-n", "3", sys.executable, "-m", "mpi4py.futures",
                          "-m", "scan", "sample", str(write_config(tmp_path / "mpi", 100)),
                          "--mpi"], capture_output=True, text=True, timeout=180)
    assert mpi.returncode == 0, mpi.stderr
    assert "MPIPool(workers=2)" in mpi.stdout
    serial = cli("sample", str(write_config(tmp_path / "serial", 100)))
    assert serial.returncode == 0, serial.stderr
    a = chain_contents(tmp_path / "mpi" / "g" / "chain.h5")
    b = chain_contents(tmp_path / "serial" / "g" / "chain.h5")
    assert a["iteration"] == 100 and np.array_equal(a["chain"], b["chain"])


def test_a_second_sample_on_a_running_chain_exits_2_naming_the_first(tmp_path, capsys):
    # issue 19 item 4: one writer per run file; the second process (and a --restart) is
    # refused with the holder's PID and the first finishes unharmed
    config = write_config(tmp_path, 200000)
    config.write_text(config.read_text().replace("check_every = 100", "check_every = 100000"))
    first = start_and_signal(config, 0, min_step=50)  # signal 0: only wait for progress
    others = [subprocess.Popen([sys.executable, "-m", "scan", "sample", str(config), *extra],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
              for extra in ((), ("--restart",))]
    results = [p.communicate(timeout=120) for p in others]
    assert first.poll() is None  # still sampling while both were refused
    for proc, (_, err) in zip(others, results):
        assert proc.returncode == 2, err
        assert f"process {first.pid} is writing this run file" in err
        assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    first.send_signal(signal.SIGTERM)
    out, err = first.communicate(timeout=60)
    assert first.returncode == 143 and "Traceback" not in err, err
    got = chain_contents(tmp_path / "g" / "chain.h5")  # the file was not deleted
    n = got["iteration"]
    assert n >= 50 and np.all(np.isfinite(got["log_prob"]))
    assert got["counts"].sum() == 8 * (n + 1)  # every evaluation counted: nothing lost
    code = main(["sample", str(config), "--set", f"sampler.max_steps={n + 20}"])
    assert code == 0  # and it resumes once the first has ended
    assert f"{n + 20} steps (20 in this run, resumed)" in capsys.readouterr().out


def test_a_moved_run_folder_resumes_from_its_new_place(tmp_path, capsys):
    # issue 19 item 5: where the folder sits is not part of the run's identity
    (tmp_path / "old").mkdir()
    config = write_config(tmp_path / "old", 150)
    assert main(["sample", str(config)]) == 0
    (tmp_path / "new").mkdir()
    (tmp_path / "old" / "g").rename(tmp_path / "new" / "g")
    capsys.readouterr()
    assert main(["sample", str(config), "--set", f"run.output_dir='{tmp_path / 'new'}'",
                 "--set", "sampler.max_steps=180"]) == 0
    assert "180 steps (30 in this run, resumed)" in capsys.readouterr().out
    assert not (tmp_path / "old" / "g").exists()
