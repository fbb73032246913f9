"""The parallel path: every pool maps alike; worker errors abort with their traceback."""
from __future__ import annotations

import math
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
from mpi_support import mpi_missing

from scan.pool import PoolError, ProcessPool, SerialPool, VectorPool, choose_pool


def square_rows(batch: np.ndarray) -> list[float]:
    """A vectorised function: one result per stacked item."""
    return list(np.asarray(batch) ** 2)


def write_pid(folder: str) -> None:
    """Initializer: leave one file per worker process."""
    Path(folder, f"{os.getpid()}.txt").write_text("loaded")


def test_serial_vector_and_process_pools_agree_in_order():
    items = [float(i) for i in range(23)]
    expected = [math.sqrt(v) for v in items]
    with SerialPool() as pool:
        assert pool.map(math.sqrt, items) == expected
    with VectorPool() as pool:
        assert pool.map(np.sqrt, items) == pytest.approx(expected, rel=1e-15)
        assert pool.map(square_rows, [1.0, 2.0, 3.0]) == [1.0, 4.0, 9.0]
    with choose_pool(2, False) as pool:
        assert isinstance(pool, ProcessPool) and pool.workers == 2
        assert pool.map(math.sqrt, items) == expected


def test_workers_run_single_threaded_and_initialise_once(tmp_path):
    with choose_pool(2, False, initializer=write_pid, initargs=(str(tmp_path),)) as pool:
        values = pool.map(os.getenv, ["OMP_NUM_THREADS"] * 8)
        pids = set(pool.map(_pid, range(8)))
    assert values == ["1"] * 8
    files = {int(p.stem) for p in tmp_path.glob("*.txt")}
    assert len(files) == 2 and pids <= files  # one initializer run per worker
    assert os.getpid() not in files


def _pid(_: int) -> int:
    return os.getpid()


def test_worker_exception_aborts_with_its_traceback_and_does_not_hang():
    start = time.monotonic()
    with pytest.raises(ValueError, match="math domain error") as info:
        with choose_pool(2, False) as pool:
            pool.map(math.log, [1.0, 2.0, -1.0, 3.0] * 10)
    notes = "\n".join(getattr(info.value, "__notes__", []))
    assert "worker traceback" in notes and "ValueError: math domain error" in notes
    assert time.monotonic() - start < 60


def test_each_as_completed_yields_every_key_once_with_its_result():
    """Serial pools yield in order, process pools in completion order; a worker's error
    is raised with its traceback, as ``map`` does."""
    keyed = [(f"k{i}", float(i)) for i in range(13)]
    expected = {key: math.sqrt(v) for key, v in keyed}
    with SerialPool() as pool:
        assert list(pool.each_as_completed(math.sqrt, keyed)) == list(expected.items())
    with choose_pool(2, False) as pool:
        got = list(pool.each_as_completed(math.sqrt, keyed))
    assert len(got) == len(keyed) and dict(got) == expected
    with pytest.raises(ValueError, match="math domain error") as info:
        with choose_pool(2, False) as pool:
            list(pool.each_as_completed(math.log, [(0, 1.0), (1, -1.0), (2, 2.0)]))
    assert "worker traceback" in "\n".join(getattr(info.value, "__notes__", []))


def test_contradictory_options_are_refused():
    with pytest.raises(PoolError, match="not both"):
        choose_pool(2, True)
    with pytest.raises(PoolError, match="vectorize"):
        choose_pool(2, False, vectorized=True)
    with pytest.raises(PoolError, match=">= 1"):
        choose_pool(0, False)
    assert isinstance(choose_pool(None, False), SerialPool)
    assert isinstance(choose_pool(1, False, vectorized=True), VectorPool)




MPI_SCRIPT = textwrap.dedent("""
    import math
    from scan.pool import choose_pool

    if __name__ == "__main__":
        with choose_pool(None, True) as pool:
            print("workers", pool.workers, flush=True)
            print("sum", sum(pool.map(math.sqrt, [float(i) for i in range(100)])), flush=True)
            try:
                pool.map(math.log, [1.0, -1.0])
            except ValueError as err:
                print("raised", err, "worker traceback" in "".join(err.__notes__), flush=True)
""")


@pytest.mark.skipif(bool(mpi_missing()), reason=mpi_missing() or "MPI available")
def test_mpi_pool_maps_and_propagates_errors(tmp_path):
    script = tmp_path / "mpi_job.py"
    script.write_text(MPI_SCRIPT)
    out = subprocess.run(["mpiexec", "-n", "3", sys.executable, "-m", "mpi4py.futures",
                          str(script)], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert "workers 2" in lines
    expected = sum(math.sqrt(i) for i in range(100))
    assert any(line.startswith("sum ") and abs(float(line[4:]) - expected) < 1e-9
               for line in lines)
    assert "raised math domain error True" in lines
