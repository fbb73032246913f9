"""What the command line prints: a result as text or strict JSON, notes, and progress.

Every verb takes ``--quiet`` and ``-v``; verbs that report take ``--json``.

* The result goes to stdout: text, or with ``--json`` one strict JSON document (RFC 8259:
  NaN and infinities become ``null``, numpy values plain numbers) and nothing else.
* Notes (warnings the user must see: perturbativity, conventions, truncated spectra) go to
  stdout with the text and to stderr beside JSON; ``--quiet`` keeps them (they are part of
  the answer), it drops only chatter and progress.
* Progress goes to stderr through :class:`ProgressLine`: a tqdm bar on a terminal, plain
  lines every few seconds otherwise.
* ``-v`` adds detail lines (on stderr beside JSON).
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import math
import sys
import time
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any, TextIO

import numpy as np
from tqdm import tqdm


def add_output_options(parser: argparse.ArgumentParser, json_result: bool = True) -> None:
    """``--quiet`` and ``-v`` (every verb), ``--json`` (verbs that report a result)."""
    if json_result:
        parser.add_argument("--json", action="store_true",
                            help="print the result as one strict JSON document on stdout "
                                 "(missing and non-finite numbers are null); notes and "
                                 "progress go to stderr")
    parser.add_argument("-q", "--quiet", action="store_true",
                        help="no progress and no chatter: only the result, notes and errors")
    parser.add_argument("-v", "--verbose", action="count", default=0,
                        help="more detail (repeatable)")


def jsonable(value: Any) -> Any:
    """``value`` with only JSON types: NaN and ±inf → None, numpy → Python, Path → str."""
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return jsonable(dataclasses.asdict(value))
    if isinstance(value, (list, tuple, set, np.ndarray)):
        return [jsonable(v) for v in (value.tolist() if isinstance(value, np.ndarray) else value)]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, Path):
        return str(value)
    if value is None or isinstance(value, str):
        return value
    return str(value)


def strict_json(value: Any) -> str:
    """Strict JSON text of ``value`` (see :func:`jsonable`)."""
    return json.dumps(jsonable(value), indent=2, allow_nan=False)


@dataclasses.dataclass(frozen=True)
class Output:
    """How one invocation prints (from its ``--json``, ``--quiet``, ``-v``)."""

    json: bool = False
    quiet: bool = False
    verbose: int = 0

    @classmethod
    def of(cls, args: argparse.Namespace) -> Output:
        return cls(bool(getattr(args, "json", False)), bool(getattr(args, "quiet", False)),
                   int(getattr(args, "verbose", 0) or 0))

    @property
    def side(self) -> TextIO:
        """The stream for lines beside the result: stderr when stdout carries JSON."""
        return sys.stderr if self.json else sys.stdout

    def info(self, text: str) -> None:
        """Chatter (what is being done): dropped by --quiet, on stderr beside JSON."""
        if not self.quiet:
            print(text, file=self.side, flush=True)

    def note(self, text: str) -> None:
        """A note or warning the user must see (kept by --quiet)."""
        print(text, file=self.side, flush=True)

    def detail(self, text: str) -> None:
        """Shown with -v only."""
        if self.verbose:
            print(text, file=self.side, flush=True)

    def result(self, data: Any, text: str | Callable[[], str]) -> None:
        """The verb's answer: ``text`` (or ``text()``, formatted only when shown), or with
        --json the strict JSON of ``data``."""
        if self.json:
            print(strict_json(data), flush=True)
        else:
            print(text() if callable(text) else text, flush=True)

    def progress(self, label: str, unit: str, every_s: float = 30.0) -> ProgressLine:
        """A :class:`ProgressLine` on stderr (silent with --quiet)."""
        return ProgressLine(label, unit, every_s, enabled=not self.quiet)


class ProgressLine:
    """Progress on stderr: a tqdm bar on a terminal, else one plain line at most every
    ``every_s`` seconds (and at the end) with the rate and the time left.

    Parameters
    ----------
    label : str
        What is counted, e.g. ``"grid"``; :meth:`update` may change it (a new phase).
    unit : str
        The counted unit, e.g. ``"point"``.
    every_s : float [s]
        Interval of the plain lines.
    enabled : bool
        False: print nothing.
    """

    def __init__(self, label: str, unit: str, every_s: float = 30.0,
                 enabled: bool = True, stream: TextIO | None = None) -> None:
        self.label, self.unit, self.every_s, self.enabled = label, unit, every_s, enabled
        self.stream = sys.stderr if stream is None else stream
        self.bar: tqdm | None = None
        self.last = -math.inf
        self.t0 = time.monotonic()
        self.n0: int | None = None

    def update(self, done: int, total: int, label: str | None = None, extra: str = "") -> None:
        """``done`` of ``total`` finished; ``extra`` is appended (e.g. acceptance, tau)."""
        if not self.enabled:
            return
        if label is not None and label != self.label:
            self.close()
            self.label, self.n0, self.last = label, None, -math.inf
        if self.stream.isatty():
            self._bar(done, total, extra)
            return
        now = time.monotonic()
        if self.n0 is None:
            self.n0, self.t0 = done, now
        if now - self.last >= self.every_s or done >= total:
            rate = (done - self.n0) / max(now - self.t0, 1e-9)
            eta = f"{(total - done) / rate:.0f} s" if rate > 0 else "-"
            tail = f", {extra}" if extra else ""
            print(f"{self.label}: {done}/{total} {self.unit}s, {rate:.2f} {self.unit}s/s, "
                  f"ETA {eta}{tail}", file=self.stream, flush=True)
            self.last = now

    def _bar(self, done: int, total: int, extra: str) -> None:
        if self.bar is None:
            self.bar = tqdm(total=total, initial=done, desc=self.label, unit=self.unit,
                            file=self.stream, dynamic_ncols=True)
        self.bar.total = total
        self.bar.update(done - self.bar.n)
        if extra:
            self.bar.set_postfix_str(extra, refresh=False)
        if done >= total:
            self.close()

    def close(self) -> None:
        """Close a terminal bar (plain lines need nothing)."""
        if self.bar is not None:
            self.bar.close()
            self.bar = None
