"""Benchmark: peak memory of ``zetascan observe`` on 1e4, 1e5 and 1e6-row spectra (target:
<= 1 GiB at 1e6 rows). Not a test.

Each run is its own process (``python -m scan observe``); its peak resident set comes from
``os.wait4`` (the child's ``getrusage``: ru_maxrss, KiB on Linux).  The spectrum is an
invented log-normal peak (synthetic, not data) over 10 decades of k on a floor of 2.1e-9,
written as CSV; a 500-row table (not resampled) is printed for scale.

Run: python tests/bench/bench_observe_memory.py [ROWS ...]
"""
from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROWS = (500, 10_000, 100_000, 1_000_000)
LIMIT_MIB = 1024.0


def synthetic_table(path: Path, rows: int) -> None:
    """A log-normal peak P = 1e-2 exp(-ln²(k/1e3 Mpc⁻¹)/(2·0.5²)) + 2.1e-9 (synthetic)."""
    k = np.geomspace(1e-2, 1e8, rows)
    P = 1e-2 * np.exp(-0.5 * (np.log(k / 1e3) / 0.5) ** 2) + 2.1e-9
    np.savetxt(path, np.c_[k, P], delimiter=",", header="k,P_zeta", comments="", fmt="%.17g")


def peak_rss_mib(table: Path, out: Path) -> tuple[float, int, str]:
    """Peak RSS [MiB], exit code and the warning lines of one ``observe`` process."""
    child = subprocess.Popen([sys.executable, "-m", "scan", "observe", str(table), "--out",
                              str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                             text=True)
    stdout = child.stdout.read()
    child.stderr.read()
    _, status, usage = os.wait4(child.pid, 0)
    child.returncode = os.waitstatus_to_exitcode(status)
    notes = [line for line in stdout.splitlines() if "resampled" in line]
    return usage.ru_maxrss / 1024.0, child.returncode, notes[0] if notes else ""


def main(rows: tuple[int, ...] = ROWS) -> None:
    with tempfile.TemporaryDirectory() as folder:
        for n in rows:
            table = Path(folder) / f"spectrum_{n}.csv"
            synthetic_table(table, n)
            mib, code, note = peak_rss_mib(table, Path(folder) / f"obs_{n}.h5")
            verdict = "ok" if mib <= LIMIT_MIB and code == 0 else "OVER LIMIT OR FAILED"
            print(f"{n:>9} rows ({table.stat().st_size / 2**20:6.1f} MiB CSV): peak RSS "
                  f"{mib:7.1f} MiB, exit {code}  [{verdict}]")
            if note:
                print(f"          {note[:160]}")


if __name__ == "__main__":
    main(tuple(int(a) for a in sys.argv[1:]) or ROWS)
