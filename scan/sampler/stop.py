"""Clean stops: SIGTERM and Ctrl-C set a flag that the sampling loop checks each step."""
from __future__ import annotations

import contextlib
import signal
from collections.abc import Iterator

#: Exit codes of ``zetascan sample`` after a clean stop (128 + signal number, the shell
#: convention).
EXIT_CODES: dict[str, int] = {"SIGINT": 130, "SIGTERM": 143}


class StopFlag:
    """Set by a signal handler; the sampler stops after the current step."""

    def __init__(self) -> None:
        self.signal_name: str | None = None

    def __call__(self) -> bool:
        """True once a stop was requested."""
        return self.signal_name is not None

    def request(self, name: str) -> None:
        """Ask for a stop (a second Ctrl-C raises KeyboardInterrupt at once)."""
        if name == "SIGINT" and self.signal_name == "SIGINT":
            raise KeyboardInterrupt
        self.signal_name = name


@contextlib.contextmanager
def graceful_stop() -> Iterator[StopFlag]:
    """Install SIGTERM/SIGINT handlers that set a :class:`StopFlag` (restored on exit)."""
    flag = StopFlag()
    handlers = {}
    for sig in (signal.SIGTERM, signal.SIGINT):
        handlers[sig] = signal.signal(sig, lambda num, frame: flag.request(
            signal.Signals(num).name))
    try:
        yield flag
    finally:
        for sig, old in handlers.items():
            signal.signal(sig, old)
