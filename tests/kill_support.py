"""Kill a writer midway: start a script, wait until its file shows progress, SIGKILL it."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from collections.abc import Callable


def sigkill_after_progress(script: str, progress: Callable[[], int], at_least: int,
                           not_ready: tuple[type[BaseException], ...] = (OSError, KeyError),
                           poll_s: float = 0.05, timeout_s: float = 60.0) -> None:
    """Run ``python -c script``; SIGKILL it once ``progress()`` reaches ``at_least`` (or
    after ``timeout_s``, or when it ends by itself), and check it died of the SIGKILL.

    ``progress()`` reads the script's file; the exceptions ``not_ready`` mean it is not
    readable yet (being created) and are retried.
    """
    proc = subprocess.Popen([sys.executable, "-c", script])
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline and proc.poll() is None:
        time.sleep(poll_s)
        try:
            if progress() >= at_least:
                break
        except not_ready:
            continue
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert proc.returncode == -signal.SIGKILL
