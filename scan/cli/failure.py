"""How a command ends when something goes wrong: one line on the screen, never a traceback.

* A user-side failure the library did not already word as a
  :class:`~scan.errors.ZetascanError` — the disk is full or read-only, a path is missing or
  is a folder, memory runs out, HDF5 cannot read a damaged file — becomes one line naming
  the file and the fix (exit 2).
* Anything else is a bug in zetascan (exit 1): the traceback goes to a log file in
  ``$ZETASCAN_LOG_DIR`` (default ``~/.cache/zetascan/logs``, or the system's temporary
  folder when that cannot be written) and one line says where it is and where to report it.
"""
from __future__ import annotations

import datetime as _dt
import errno
import os
import platform
import sys
import tempfile
import traceback
from pathlib import Path

import h5py

from scan.constants import ZETASCAN_VERSION as __version__
from scan.store import write_problem

#: Where to report an internal error.
REPORT_TO = "please report it on the zetascan issue tracker with that log file attached"

#: Environment variable naming the folder of crash logs.
LOG_DIR_VARIABLE = "ZETASCAN_LOG_DIR"

_READ_PROBLEMS = {errno.ENOENT: ("no such file or folder", "check the path"),
                  errno.EISDIR: ("is a folder, not a file", "give a file name")}


def _filename(err: OSError) -> str:
    """The file an OSError is about (h5py puts it in the message, not in ``filename``)."""
    if err.filename:
        return str(err.filename)
    text = str(err)
    marker = "filename = '"
    if marker in text:
        return text.split(marker, 1)[1].split("'", 1)[0]
    return "output"


def _innermost_frames(err: BaseException) -> list:
    frames, tb = [], err.__traceback__
    while tb is not None:
        frames.append(tb.tb_frame)
        tb = tb.tb_next
    return frames[::-1]


def _hdf5_file(err: BaseException) -> str | None:
    """The HDF5 file whose reading raised ``err`` inside h5py, or None if h5py did not."""
    frames = _innermost_frames(err)
    if not frames or not frames[0].f_globals.get("__name__", "").startswith("h5py"):
        return None
    for frame in frames:
        for value in frame.f_locals.values():
            if isinstance(value, (h5py.File, h5py.Group, h5py.Dataset)):
                try:
                    return str(value.file.filename)
                except Exception:  # noqa: BLE001 -- a damaged file may not even say that
                    continue
    return "an HDF5 file"


def user_message(err: BaseException) -> str | None:
    """The one-line message of a user-side failure, or None for a bug."""
    damaged = _hdf5_file(err) if not isinstance(err, OSError) or err.errno is None else None
    if damaged is not None:
        first = str(err).splitlines()[0][:200] if str(err) else type(err).__name__
        return (f"{damaged}: HDF5 cannot read it ({first}); the file is damaged or not the "
                "kind this command reads (give an intact zetascan result file)")
    if isinstance(err, MemoryError):
        return ("out of memory: the input table or the grids (n_k, n_f, n_m) are too large "
                "for this machine (use a smaller table or grid)")
    if not isinstance(err, OSError):
        return None
    code = getattr(err, "errno", None)
    if code in _READ_PROBLEMS:
        problem, fix = _READ_PROBLEMS[code]
        return f"{_filename(err)}: {problem} ({fix})"
    problem = write_problem(err)
    if problem is None:
        return None
    return (f"{_filename(err)}: cannot write: {problem} (free some space or choose a "
            "writable folder with run.output_dir or --out; what was written before is kept, "
            "and a run resumes from it)")


def _log_folder() -> Path:
    chosen = os.environ.get(LOG_DIR_VARIABLE)
    if chosen:
        return Path(chosen)
    cache = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(cache) / "zetascan" / "logs"


def _log_text(err: BaseException, argv: list[str]) -> str:
    lines = [f"zetascan {__version__} on Python {platform.python_version()} "
             f"({platform.platform()})",
             "command: zetascan " + " ".join(argv),
             f"time (UTC): {_dt.datetime.now(_dt.timezone.utc).isoformat(timespec='seconds')}",
             "", *traceback.format_exception(err)]
    worker = getattr(err, "worker_traceback", None)
    if worker:
        lines += ["", "in the worker process:", worker]
    return "\n".join(line.rstrip("\n") for line in lines) + "\n"


def write_log(err: BaseException, argv: list[str]) -> Path | None:
    """Write the traceback of ``err`` to a new log file; return its path (None if no
    folder could take it)."""
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    name = f"crash-{stamp}-{os.getpid()}.log"
    text = _log_text(err, argv)
    for folder in (_log_folder(), Path(tempfile.gettempdir())):
        try:
            folder.mkdir(parents=True, exist_ok=True)
            (folder / name).write_text(text, encoding="utf-8")
            return folder / name
        except OSError:
            continue
    return None


def report_internal(verb: str, err: BaseException, argv: list[str]) -> None:
    """Log the traceback and print the one line of an internal error (stderr)."""
    where = write_log(err, argv)
    summary = f"{type(err).__name__}: {err}".splitlines()[0][:300]
    if where is None:  # nowhere to write: the traceback must not be lost
        traceback.print_exception(err, file=sys.stderr)
        place = "the traceback is above (no folder could take a log file)"
    else:
        place = f"the traceback is in {where}"
    print(f"zetascan {verb}: internal error (a bug in zetascan, not in your input): "
          f"{summary}; {place}; {REPORT_TO}", file=sys.stderr)
