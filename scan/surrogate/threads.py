"""Keep the BLAS thread pool to one thread while fitting (best effort).

The kernel matrices here are small (n ~ 100–2000), and on a shared machine OpenBLAS's
thread pool made one 96 × 96 Cholesky-and-inverse ~100x slower than a single thread
(measured: 13 ms vs 0.07 ms for ``dpotri``).  Training is parallel over *processes*
anyway, so the master fits with one BLAS thread.  The OpenBLAS builds that numpy and
scipy wheels bundle expose ``*openblas_set_num_threads*``; when none is found this is a
no-op (set ``OPENBLAS_NUM_THREADS=1`` in the environment instead).

The posterior's vectorised call (:meth:`scan.posterior.target.PosteriorTarget.
log_and_blobs`) runs inside it too: its products are small ((16 outputs, ~500 pairs) x
64 walkers for Omega_GW), and with the default pool on the 2-core machine with another
job on the other core the radiation form's Omega_GW for 64 walkers measured a median of
1.7-9.6 ms against 0.7-1.0 ms with one thread (entering the limit per call costs ~4 us:
0.7-0.9 ms), the QCD-era kernel's per-row forms 36-510 ms against 12 ms
(tests/bench/bench_gw_batch_kernel.py).
"""
from __future__ import annotations

import contextlib
import ctypes
import functools
from collections.abc import Iterator

_SETTERS = ("scipy_openblas_set_num_threads64_", "scipy_openblas_set_num_threads",
            "openblas_set_num_threads64_", "openblas_set_num_threads")


def _loaded_blas() -> list[str]:
    try:
        with open("/proc/self/maps", encoding="utf-8") as maps:
            return sorted({line.split()[-1] for line in maps if "openblas" in line.lower()
                           and line.split()[-1].startswith("/")})
    except OSError:
        return []


@functools.lru_cache(maxsize=1)
def _setters() -> tuple[tuple[object, object], ...]:
    """The (set, get) thread-count functions of every OpenBLAS loaded, found once per
    process (the posterior enters :func:`single_blas_thread` on every call)."""
    found = []
    for path in _loaded_blas():
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for name in _SETTERS:
            setter = getattr(lib, name, None)
            getter = getattr(lib, name.replace("set_", "get_"), None)
            if setter is not None and getter is not None:
                found.append((setter, getter))
                break
    return tuple(found)


@contextlib.contextmanager
def single_blas_thread() -> Iterator[None]:
    """Run the block with one BLAS thread, restoring the previous counts afterwards."""
    pairs = _setters()
    previous = [int(getter()) for _, getter in pairs]
    for setter, _ in pairs:
        setter(1)
    try:
        yield
    finally:
        for (setter, _), count in zip(pairs, previous):
            setter(count)
