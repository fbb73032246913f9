"""Run folders: ``<run.output_dir>/<run.name>/`` and the files a run keeps in it.

Every path of a run's files is built here (:class:`RunFolder`), so the commands, the
plots and resume agree on where a run lives.  A run name is one path component: no
separator, no ``..`` (:func:`name_problem`), so no key of a config can make a command
write outside ``run.output_dir``.
"""
from __future__ import annotations

import dataclasses
import os
from pathlib import Path
from typing import Any

#: The files of a run folder, by kind.
FILES: dict[str, str] = {"chain": "chain.h5", "grid": "grid.h5", "training": "training.h5",
                         "surrogate": "surrogate.h5"}
_SEPARATORS = {"/", "\\", os.sep} | ({os.altsep} if os.altsep else set())


def name_problem(name: str) -> str | None:
    """Why ``name`` cannot be a file or folder name inside the output folder (None: it
    can): empty, ``.`` or ``..``, a path separator, or a NUL character."""
    if not name.strip():
        return "is empty"
    if name in (".", ".."):
        return f"'{name}' names a folder relative to the output folder, not a run"
    if any(sep in name for sep in _SEPARATORS):
        return f"'{name}' contains a path separator"
    if "\0" in name:
        return "contains a NUL character"
    return None


@dataclasses.dataclass(frozen=True)
class RunFolder:
    """The folder of one run and the paths of its files.

    Attributes
    ----------
    root : Path
        ``<run.output_dir>/<run.name>``.
    """

    root: Path

    def __post_init__(self) -> None:
        object.__setattr__(self, "root", Path(self.root))

    @classmethod
    def of(cls, config: Any) -> RunFolder:
        """The run folder of a :class:`~scan.config.schema.RunConfig`."""
        return cls(Path(config.run.output_dir) / config.run.name)

    @classmethod
    def holding(cls, path: str | Path) -> RunFolder:
        """The run folder a RESULT argument names: the folder itself or a file in it."""
        path = Path(path)
        return cls(path if path.is_dir() else path.parent)

    def file(self, kind: str) -> Path:
        """The path of a file kind of :data:`FILES` (``chain``, ``grid``, ...)."""
        return self.root / FILES[kind]

    chain = property(lambda self: self.file("chain"),
                     doc="``chain.h5``: the posterior run (``zetascan sample``).")
    grid = property(lambda self: self.file("grid"),
                    doc="``grid.h5``: the exclusion grid (``zetascan grid``).")
    training = property(lambda self: self.file("training"),
                        doc="``training.h5``: the training store (``zetascan train``).")
    surrogate = property(lambda self: self.file("surrogate"),
                         doc="``surrogate.h5``: the trained surrogate (``zetascan train``).")

    @property
    def solve_result(self) -> Path:
        """``<output_dir>/<name>.h5``: a single solve sits beside the folder."""
        return self.root.with_name(self.root.name + ".h5")
