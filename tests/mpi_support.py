"""Shared by the MPI tests: why MPI cannot run here (empty string when it can)."""
from __future__ import annotations

import shutil


def mpi_missing() -> str:
    """Empty string if mpiexec and mpi4py are usable, else the reason to skip."""
    if shutil.which("mpiexec") is None:
        return "mpiexec not found (pip install 'zetascan[mpi]')"
    try:
        import mpi4py  # noqa: F401
    except ImportError:
        return "mpi4py not installed (pip install 'zetascan[mpi]')"
    return ""
