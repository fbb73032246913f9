"""One parallel path for many independent evaluations: serial, vectorised, processes, MPI.

Every pool has the same small interface::

    with choose_pool(processes=4, mpi=False) as pool:
        results = pool.map(func, items)      # a list, in the order of ``items``

* :class:`SerialPool` — ``func`` called on each item in this process.
* :class:`VectorPool` — ``func`` called *once* with all items stacked along axis 0; it
  returns one result per item (surrogate likelihoods, emcee ``vectorize=True``).
* :class:`ProcessPool` — a :class:`concurrent.futures.ProcessPoolExecutor` whose workers
  run with ``OMP_NUM_THREADS=1`` (one BLAS thread per worker), ignore Ctrl-C (the master
  handles it) and run an optional initializer once (load data once per worker).
* :class:`MPIPool` — :class:`mpi4py.futures.MPIPoolExecutor`, imported only when asked for;
  start the job as ``mpiexec -n N python -m mpi4py.futures -m scan sample CONFIG --mpi``.

A worker's exception is re-raised in the master with the worker's traceback attached as a
note (:pep:`678`), and the pool shuts down without waiting for outstanding work: a failing
worker aborts the job, it never hangs it.  Only the master (the process that entered the
pool) writes files.
"""
from __future__ import annotations

import os
import signal
import traceback
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import as_completed
from typing import Any

import numpy as np

from scan.errors import ZetascanError

#: Environment variables set to 1 in every worker, so that workers do not oversubscribe
#: the cores with BLAS/OpenMP threads.
THREAD_VARIABLES: tuple[str, ...] = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS",
                                     "MKL_NUM_THREADS")


class PoolError(ZetascanError):
    """The requested parallel mode cannot be used (bad option or missing package)."""


class _Traced:
    """Wrap a function so a worker's exception carries its formatted traceback."""

    def __init__(self, func: Callable[[Any], Any]) -> None:
        self.func = func

    def __call__(self, item: Any) -> Any:
        try:
            return self.func(item)
        except Exception as err:
            err.worker_traceback = traceback.format_exc()  # pickled with the exception
            raise


def _worker_init(initializer: Callable[..., None] | None, initargs: tuple) -> None:
    """Run in each worker once: one BLAS thread, ignore SIGINT, then the user's setup."""
    for name in THREAD_VARIABLES:
        os.environ[name] = "1"
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if initializer is not None:
        initializer(*initargs)


def _noop(_: Any = None) -> int:
    """Used to start every worker eagerly."""
    return os.getpid()


def _reraise(err: BaseException) -> None:
    """Attach a worker traceback (if any) as a note and raise ``err`` again."""
    remote = getattr(err, "worker_traceback", None)
    if remote and hasattr(err, "add_note"):
        err.add_note("worker traceback:\n" + remote.rstrip())
    raise err


class BasePool:
    """The common interface; subclasses override :meth:`map` (and enter/exit)."""

    #: True when ``map`` calls the function once on the stacked items.
    vectorized: bool = False
    #: Number of processes evaluating the function.
    workers: int = 1

    def map(self, func: Callable[[Any], Any], items: Iterable[Any]) -> list[Any]:
        """Apply ``func`` to every item; return the results in order."""
        raise NotImplementedError

    def each_as_completed(self, func: Callable[[Any], Any],
                          keyed: Iterable[tuple[Any, Any]]) -> Iterator[tuple[Any, Any]]:
        """``(key, func(item))`` for ``(key, item)`` pairs, as each result is ready.

        Here one item per :meth:`map` call, in order; executor pools submit every item
        at once and yield in completion order (no worker waits for a slow neighbour).
        """
        for key, item in keyed:
            yield key, self.map(func, [item])[0]

    def describe(self) -> str:
        """One line for logs and provenance."""
        return f"{type(self).__name__}(workers={self.workers})"

    def __enter__(self) -> BasePool:
        return self

    def __exit__(self, *exc: object) -> None:
        return None


class SerialPool(BasePool):
    """Evaluate in this process, one item at a time."""

    def __init__(self, initializer: Callable[..., None] | None = None,
                 initargs: tuple = ()) -> None:
        if initializer is not None:
            initializer(*initargs)

    def map(self, func: Callable[[Any], Any], items: Iterable[Any]) -> list[Any]:
        """``[func(item) for item in items]``."""
        return [func(item) for item in items]


class VectorPool(BasePool):
    """Call the function once with all items stacked along axis 0."""

    vectorized = True

    def __init__(self, initializer: Callable[..., None] | None = None,
                 initargs: tuple = ()) -> None:
        if initializer is not None:
            initializer(*initargs)

    def map(self, func: Callable[[np.ndarray], Sequence[Any]],
            items: Iterable[Any]) -> list[Any]:
        """``list(func(np.stack(items)))``; ``func`` must return one result per item."""
        batch = np.asarray(list(items))
        results = list(func(batch))
        if len(results) != len(batch):
            raise ValueError(f"a vectorised function returned {len(results)} results for "
                             f"{len(batch)} items")
        return results


class _ExecutorPool(BasePool):
    """Shared map/exit logic of the executor-backed pools."""

    executor: Any = None

    def map(self, func: Callable[[Any], Any], items: Iterable[Any]) -> list[Any]:
        """Evaluate in the workers; a worker's exception aborts with its traceback."""
        if self.executor is None:
            raise RuntimeError("use the pool inside a 'with' block")
        items = list(items)
        chunk = max(1, len(items) // (4 * self.workers))
        try:
            return list(self.executor.map(_Traced(func), items, chunksize=chunk))
        except Exception as err:
            self._abort()
            _reraise(err)
            raise  # unreachable; keeps type checkers happy

    def each_as_completed(self, func: Callable[[Any], Any],
                          keyed: Iterable[tuple[Any, Any]]) -> Iterator[tuple[Any, Any]]:
        """``(key, func(item))`` in completion order; a worker's exception cancels the
        rest and is raised with its traceback (as :meth:`map`)."""
        if self.executor is None:
            raise RuntimeError("use the pool inside a 'with' block")
        futures = {self.executor.submit(_Traced(func), item): key for key, item in keyed}
        try:
            for future in as_completed(futures):
                yield futures[future], future.result()
        except Exception as err:
            self._abort()
            _reraise(err)

    def _abort(self) -> None:
        if self.executor is not None:
            self.executor.shutdown(wait=False, cancel_futures=True)
            self.executor = None

    def __exit__(self, exc_type: object, *exc: object) -> None:
        if self.executor is not None:
            if exc_type is None:
                self.executor.shutdown(wait=True)
                self.executor = None
            else:
                self._abort()


class ProcessPool(_ExecutorPool):
    """Worker processes on this machine (``spawn`` start method, one BLAS thread each).

    Parameters
    ----------
    processes : int
        Number of worker processes (>= 1).
    initializer : callable, optional
        Called once in each worker with ``initargs`` (e.g. to load data once per worker).
    initargs : tuple
        Arguments of ``initializer`` (picklable).
    """

    def __init__(self, processes: int, initializer: Callable[..., None] | None = None,
                 initargs: tuple = ()) -> None:
        if processes < 1:
            raise PoolError(f"--processes must be >= 1, got {processes}")
        self.workers = int(processes)
        self.initializer, self.initargs = initializer, tuple(initargs)

    def __enter__(self) -> ProcessPool:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        saved = {name: os.environ.get(name) for name in THREAD_VARIABLES}
        os.environ.update({name: "1" for name in THREAD_VARIABLES})  # inherited at spawn
        try:
            self.executor = ProcessPoolExecutor(
                max_workers=self.workers, mp_context=multiprocessing.get_context("spawn"),
                initializer=_worker_init, initargs=(self.initializer, self.initargs))
            list(self.executor.map(_noop, range(self.workers)))  # start workers now
        except Exception as err:
            self._abort()
            _reraise(err)
        finally:
            for name, value in saved.items():
                if value is None:
                    os.environ.pop(name, None)
                else:
                    os.environ[name] = value
        return self


class MPIPool(_ExecutorPool):
    """Workers are the other MPI ranks (``mpi4py.futures``), the master is rank 0.

    Run as ``mpiexec -n N python -m mpi4py.futures -m scan sample CONFIG --mpi``; N - 1
    ranks evaluate.  Give workers ``OMP_NUM_THREADS=1`` through mpiexec's environment
    (``mpiexec -genv OMP_NUM_THREADS 1 ...`` for MPICH) when the likelihood uses BLAS.
    """

    def __init__(self, initializer: Callable[..., None] | None = None,
                 initargs: tuple = ()) -> None:
        try:
            from mpi4py import futures  # noqa: F401  (imported only when asked for)
        except ImportError:
            raise PoolError("--mpi needs mpi4py and an MPI library: "
                            "pip install 'zetascan[mpi]'") from None
        self.initializer, self.initargs = initializer, tuple(initargs)

    def __enter__(self) -> MPIPool:
        from mpi4py.futures import MPIPoolExecutor

        self.executor = MPIPoolExecutor(initializer=_worker_init,
                                        initargs=(self.initializer, self.initargs))
        self.workers = max(1, int(self.executor.num_workers))
        return self


def choose_pool(processes: int | None, mpi: bool, *, vectorized: bool = False,
                initializer: Callable[..., None] | None = None,
                initargs: tuple = ()) -> BasePool:
    """The pool for the command-line options (not entered yet: use it in ``with``).

    Parameters
    ----------
    processes : int or None
        Worker processes on this machine; None or 1 evaluates in this process.
    mpi : bool
        Use the MPI ranks as workers (needs mpi4py; see :class:`MPIPool`).
    vectorized : bool
        Evaluate all items in one call (:class:`VectorPool`); excludes the other modes.
    initializer, initargs
        Run once per worker (and once in this process for the serial modes).

    Raises
    ------
    PoolError
        For contradictory options or a missing mpi4py.
    """
    if mpi and processes not in (None, 1):
        raise PoolError("choose either --mpi or --processes, not both")
    if vectorized and (mpi or processes not in (None, 1)):
        raise PoolError("sampler.vectorize = true evaluates all walkers in one call: do not "
                        "combine it with --mpi or --processes")
    if vectorized:
        return VectorPool(initializer, initargs)
    if mpi:
        return MPIPool(initializer, initargs)
    if processes is None or processes == 1:
        return SerialPool(initializer, initargs)
    return ProcessPool(processes, initializer, initargs)
