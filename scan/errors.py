"""The package's exception classes.

Every error a user can cause by what they give us (a config, a table, a bound curve)
or by where they ask us to write (a full or read-only disk: :class:`OutputError`) is a
:class:`ZetascanError`: the command line prints its one-line message and exits 2.
Anything else is a bug: exit 1, the traceback goes to a log file and one line says where
(see :mod:`scan.cli.failure`).

An invalid *model* is not an exception: physics stages return values with
``valid=False`` and a ``reason`` (see ``scan.background.Background``).
"""
from __future__ import annotations

import difflib
from collections.abc import Iterable


class ZetascanError(Exception):
    """Base class of all errors caused by user input; the message says how to fix it."""


def _edit_distance(a: str, b: str) -> int:
    """Optimal-string-alignment distance (insert, delete, substitute, swap neighbours)."""
    rows = [list(range(len(b) + 1))]
    for i, ca in enumerate(a, 1):
        row = [i]
        for j, cb in enumerate(b, 1):
            cost = min(rows[-1][j] + 1, row[j - 1] + 1, rows[-1][j - 1] + (ca != cb))
            if i > 1 and j > 1 and ca == b[j - 2] and a[i - 2] == cb:
                cost = min(cost, rows[-2][j - 2] + 1)
            row.append(cost)
        rows.append(row)
    return rows[-1][-1]


def closest(word: str, options: Iterable[str]) -> str | None:
    """Return the option closest to ``word`` (for "did you mean ...?" hints), or None.

    Candidates within a third of the word's length in edit distance win (typos, swapped
    letters); otherwise difflib's similarity picks one, or nothing when none is close.
    """
    word, options = str(word), [str(o) for o in options]
    if not options:
        return None
    best = min(options, key=lambda o: (_edit_distance(word.lower(), o.lower()), o))
    if _edit_distance(word.lower(), best.lower()) <= max(1, len(word) // 3):
        return best
    matches = difflib.get_close_matches(word, options, n=1, cutoff=0.6)
    return matches[0] if matches else None


def did_you_mean(word: str, options: Iterable[str]) -> str:
    """A ``"; did you mean 'x'?"`` suffix, or an empty string when nothing is close."""
    best = closest(word, options)
    return f"; did you mean '{best}'?" if best else ""


class ConfigError(ZetascanError):
    """A run configuration is wrong.

    Parameters
    ----------
    source : str
        The file the value came from (or ``"--set"`` for a command-line override).
    key : str
        Dotted key path, e.g. ``"model.poles[0].power"``.
    problem : str
        What is wrong, in physics words where possible.
    fix : str, optional
        How to fix it.
    """

    def __init__(self, source: str, key: str, problem: str, fix: str = "") -> None:
        self.source, self.key, self.problem, self.fix = source, key, problem, fix
        where = f"{source}: {key}" if key else source
        message = f"{where}: {problem}"
        if fix:
            message += f" ({fix})"
        super().__init__(message)


class InputFileError(ZetascanError):
    """A data file (table, bound curve, result file) cannot be used.

    Parameters
    ----------
    path : str
        The file.
    problem : str
        What is wrong and how to fix it.
    line : int, optional
        1-based line number in the file.
    column : str, optional
        Column name.
    """

    def __init__(self, path: str, problem: str, line: int | None = None,
                 column: str | None = None) -> None:
        self.path, self.problem, self.line, self.column = str(path), problem, line, column
        where = str(path)
        if line is not None:
            where += f": line {line}"
        if column is not None:
            where += f", column '{column}'"
        super().__init__(f"{where}: {problem}")


class OutputError(ZetascanError):
    """Results cannot be written where the run asks (full, read-only or missing folder).

    Parameters
    ----------
    path : str
        The file or folder that cannot be written.
    problem : str
        What is wrong (e.g. "no space left on device").
    fix : str
        How to go on; for a run that stopped, say what was kept and how to resume.
    """

    def __init__(self, path: str, problem: str, fix: str) -> None:
        self.path, self.problem, self.fix = str(path), problem, fix
        super().__init__(f"{path}: {problem} ({fix})")
