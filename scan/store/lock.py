"""One writer per run file: a lock file beside it, held while a command writes the file.

``<file>.lock`` (e.g. ``chain.h5.lock``) is locked with ``flock`` by the process that
writes ``<file>`` and holds that process's PID, so a second command on the same run is
refused with the holder named.  The operating system releases the lock when its holder
ends, even by SIGKILL: a stale lock file never blocks anyone.  A command holds the lock
for its whole run and hands it to the writer it opens (:class:`scan.store.SingleWriter`).
"""
from __future__ import annotations

import fcntl
import os
from pathlib import Path

from scan.errors import InputFileError


def lock_path(path: str | Path) -> Path:
    """The lock file of ``path``: ``<path>.lock`` beside it."""
    path = Path(path)
    return path.with_name(path.name + ".lock")


def holder_pid(path: str | Path) -> int | None:
    """The PID written in the lock file of ``path`` (None when unreadable or empty)."""
    try:
        text = lock_path(path).read_text(encoding="ascii").strip()
    except (OSError, UnicodeDecodeError):
        return None
    return int(text) if text.isdigit() else None


class RunLock:
    """Be the one writer of ``path`` (use as a context manager, or :meth:`release`).

    Parameters
    ----------
    path : str or Path
        The run file (it need not exist yet; its folder is created).
    busy : str
        What to do when another holder exists (appended to the message).

    Raises
    ------
    InputFileError
        Another holder (another process, or another open lock in this one) has the
        lock; the message names the PID written in the lock file.
    """

    def __init__(self, path: str | Path, busy: str = "wait for it to finish or stop it "
                 "first") -> None:
        self.path = Path(path)
        self.file = lock_path(self.path)
        self.file.parent.mkdir(parents=True, exist_ok=True)
        # opened without truncation: the holder's PID stays readable for the refusal
        handle = open(os.open(self.file, os.O_RDWR | os.O_CREAT, 0o644), "r+",
                      encoding="ascii")
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.close()
            pid = holder_pid(self.path)
            who = f"process {pid}" if pid is not None else "another process"
            raise InputFileError(str(self.path), f"{who} is writing this run file (lock "
                                 f"{self.file.name}); {busy}") from None
        handle.truncate(0)
        handle.write(f"{os.getpid()}\n")
        handle.flush()
        self._handle = handle

    def __enter__(self) -> "RunLock":
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()

    @property
    def held(self) -> bool:
        """True until :meth:`release`."""
        return not self._handle.closed

    def release(self, remove: bool = False) -> None:
        """Give the lock back; ``remove`` first deletes the lock file (nobody else can
        hold it while we do)."""
        if self._handle.closed:
            return
        if remove:
            self.file.unlink(missing_ok=True)
        self._handle.close()
