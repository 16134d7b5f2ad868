"""Where independent tasks run: the clustering of cover elements, resamples, reruns.

Each task is a pure function of its arguments, so tasks can run anywhere in any order.
An executor is any object with ``map(function, tasks) -> list`` that returns results in
task order; serial and local-process executors are here, a Dask cluster's in
:mod:`topoaudit.mapper.dask_executor`, and any other engine only needs the same method.

Executors may also offer ``map_shared(function, shared, tasks, weights=None)``, which
returns ``[function(shared, *task) for task in tasks]`` for one large array ``shared``
common to every task (the data set, with tasks naming row positions). All three do: the
serial one passes the array itself, the process executor writes it once to a
memory-mapped file that every worker reads, the Dask one sends it to each worker once,
so the data are neither copied per task nor sent through pipes. :func:`map_shared`
calls it, or ``map`` for an executor without it.

The executors of this package also take ``progress``, called with the number of tasks
finished as they finish, and say so with ``reports_progress = True``; :func:`map_tasks`
and :func:`map_shared` pass it on to them only.
"""

from __future__ import annotations

import contextlib
import gc
import importlib
import numbers
import os
import tempfile
import uuid
from collections.abc import Callable, Iterator, Sequence
from typing import Any, ClassVar, Protocol

import numpy as np

from topoaudit.errors import ParameterError

__all__ = [
    "Executor",
    "ProcessExecutor",
    "SerialExecutor",
    "make_executor",
    "map_shared",
    "map_tasks",
    "open_executor",
    "usable_cores",
]

_THREAD_VARIABLES = (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
    "BLIS_NUM_THREADS",
    "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS",
)
_IDLE_TIMEOUT_S = 300

#: called with the number of tasks finished so far
Done = Callable[[int], None]

# Per worker process: the thread limit already applied by threadpoolctl, and whether the
# objects present after the first imports were frozen out of the garbage collector's view.
_limited_to: int | None = None
_frozen = False


class Executor(Protocol):
    def map(self, function: Callable[..., Any], tasks: Sequence[tuple[Any, ...]]) -> list[Any]:
        """Apply ``function(*task)`` to every task; results in task order."""
        ...


def usable_cores() -> int:
    """The cores this process may run on (its CPU affinity where the system has one)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1


class SerialExecutor:
    """Run every task in this process, one after the other."""

    reports_progress: ClassVar[bool] = True

    def map(
        self,
        function: Callable[..., Any],
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Done | None = None,
    ) -> list[Any]:
        """Apply ``function(*task)`` to every task; results in task order."""
        out = []
        for task in tasks:
            out.append(function(*task))
            if progress is not None:
                progress(len(out))
        return out

    def map_shared(
        self,
        function: Callable[..., Any],
        shared: np.ndarray,
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Done | None = None,
    ) -> list[Any]:
        """Apply ``function(shared, *task)`` to every task; results in task order."""
        return self.map(function, [(shared, *task) for task in tasks], progress=progress)

    def __repr__(self) -> str:
        return "SerialExecutor()"


def _settle(n_threads: int) -> None:
    """Prepare this worker process for tasks (does the work only once per process).

    Caps the BLAS and OpenMP thread pools at ``n_threads``, and freezes the objects that
    exist once the engine is imported (``gc.freeze``): loky collects garbage between
    tasks, and a full collection that walks the whole import graph of scikit-learn and
    scipy takes tens of milliseconds each time.
    """
    global _limited_to, _frozen
    if _limited_to != n_threads:
        from threadpoolctl import threadpool_limits

        threadpool_limits(limits=n_threads)
        _limited_to = n_threads
    if not _frozen:
        gc.collect()
        gc.freeze()
        _frozen = True


def _run(n_threads: int, function: Callable[..., Any], *task: Any) -> Any:
    """Worker side of :meth:`ProcessExecutor.map`."""
    _settle(n_threads)
    return function(*task)


def _run_shared(n_threads: int, path: str, function: Callable[..., Any], *task: Any) -> Any:
    """Worker side of :meth:`ProcessExecutor.map_shared`: map the shared array read-only."""
    _settle(n_threads)
    return function(np.load(path, mmap_mode="r"), *task)


def _preload(n_threads: int, modules: tuple[str, ...]) -> None:
    """Worker side of :meth:`ProcessExecutor.start`."""
    for name in modules:
        importlib.import_module(name)
    _settle(n_threads)


def _shared_dir(nbytes: int) -> str:
    """A folder for the shared array: ``/dev/shm`` when it has room, else the temp folder."""
    shm = "/dev/shm"
    try:
        stats = os.statvfs(shm)
        if os.access(shm, os.W_OK) and stats.f_bavail * stats.f_frsize > 2 * nbytes:
            return shm
    except (OSError, AttributeError):
        pass
    return tempfile.gettempdir()


class ProcessExecutor:
    """Run tasks in ``n_jobs`` local worker processes (joblib's loky backend).

    Tasks are handed out largest first (by the ``weights`` given to :meth:`map`, else in
    order), which keeps workers evenly loaded when cover elements differ in size; each
    worker limits its BLAS and OpenMP threads to ``cores // n_jobs`` (at least 1), by
    environment variables when it starts and by threadpoolctl, so that ``n_jobs``
    workers do not oversubscribe the cores, and keeps the objects of its imports out of
    the garbage collector's view (``gc.freeze``). The worker processes are kept for reuse by
    later calls in the same process and stop after five idle minutes, or at
    :meth:`shutdown`.

    Parameters
    ----------
    n_jobs : int, default=2
        Number of worker processes.
    """

    _pool: ClassVar[Any] = None
    reports_progress: ClassVar[bool] = True

    def __init__(self, n_jobs: int = 2) -> None:
        if not isinstance(n_jobs, numbers.Integral) or isinstance(n_jobs, bool) or n_jobs < 1:
            msg = f"ProcessExecutor needs n_jobs, an int >= 1; got {n_jobs!r}."
            raise ParameterError(msg)
        self.n_jobs = int(n_jobs)

    @property
    def threads_per_worker(self) -> int:
        """BLAS and OpenMP threads each worker may use."""
        return max(1, usable_cores() // self.n_jobs)

    def _executor(self) -> Any:
        from joblib.externals.loky import get_reusable_executor

        env = {name: str(self.threads_per_worker) for name in _THREAD_VARIABLES}
        pool = get_reusable_executor(max_workers=self.n_jobs, timeout=_IDLE_TIMEOUT_S, env=env)
        ProcessExecutor._pool = pool
        return pool

    def start(self, preload: Sequence[str] = ()) -> None:
        """Start the worker processes now, without waiting for them.

        Parameters
        ----------
        preload : sequence of str, default=()
            Modules each worker imports as it starts, so that this work overlaps with
            whatever the caller does before its first :meth:`map`.
        """
        pool = self._executor()
        for _ in range(self.n_jobs):
            pool.submit(_preload, self.threads_per_worker, tuple(preload))

    def _gather(
        self,
        calls: list[tuple[Any, ...]],
        weights: Sequence[float] | None,
        progress: Done | None = None,
    ) -> list[Any]:
        from concurrent.futures import as_completed

        pool = self._executor()
        order = list(range(len(calls)))
        if weights is not None:
            order.sort(key=lambda i: -weights[i])
        futures = {pool.submit(*calls[i]): i for i in order}
        out: list[Any] = [None] * len(calls)
        try:
            for done, future in enumerate(as_completed(futures), start=1):
                out[futures[future]] = future.result()
                if progress is not None:
                    progress(done)
        except BaseException:
            for future in futures:
                future.cancel()
            raise
        return out

    def map(
        self,
        function: Callable[..., Any],
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Done | None = None,
    ) -> list[Any]:
        """Apply ``function(*task)`` to every task in the workers; results in task order.

        Parameters
        ----------
        function : callable
            A function the workers can import (defined at module level).
        tasks : sequence of tuple
            Arguments of each call.
        weights : sequence of float or None, default=None
            Expected cost of each task; the costliest are handed out first.
        progress : callable or None, default=None
            Called with the number of tasks finished, each time one finishes.

        Returns
        -------
        list
            One result per task, in task order.
        """
        n = self.threads_per_worker
        return self._gather([(_run, n, function, *task) for task in tasks], weights, progress)

    def map_shared(
        self,
        function: Callable[..., Any],
        shared: np.ndarray,
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Done | None = None,
    ) -> list[Any]:
        """Apply ``function(shared, *task)`` to every task in the workers.

        ``shared`` is written once to a file (in ``/dev/shm`` when it has room, else in the
        temporary folder) that each worker maps read-only, so only the small task arguments
        travel per task; the file is removed when the call returns. If the file cannot be
        written, ``shared`` travels with every task instead.

        Parameters
        ----------
        function : callable
            A function the workers can import; it must not write to ``shared``.
        shared : ndarray
            The array common to every task.
        tasks : sequence of tuple
            The other arguments of each call.
        weights : sequence of float or None, default=None
            Expected cost of each task; the costliest are handed out first.
        progress : callable or None, default=None
            Called with the number of tasks finished, each time one finishes.

        Returns
        -------
        list
            One result per task, in task order.
        """
        shared = np.asarray(shared)
        n = self.threads_per_worker
        path = os.path.join(
            _shared_dir(shared.nbytes), f"topoaudit-{os.getpid()}-{uuid.uuid4().hex}.npy"
        )
        try:
            try:
                np.save(path, shared, allow_pickle=False)
            except OSError:  # no room or no writable folder: send the array with each task
                calls = [(_run, n, function, shared, *task) for task in tasks]
                return self._gather(calls, weights, progress)
            calls = [(_run_shared, n, path, function, *task) for task in tasks]
            return self._gather(calls, weights, progress)
        finally:
            with contextlib.suppress(OSError):
                os.remove(path)

    @classmethod
    def shutdown(cls) -> None:
        """Stop the worker processes kept for reuse, and wait until they have exited."""
        pool, cls._pool = cls._pool, None
        if pool is not None:
            pool.shutdown(wait=True)

    def __repr__(self) -> str:
        return f"ProcessExecutor(n_jobs={self.n_jobs})"


def make_executor(spec: Any) -> Any:
    """The executor that ``spec`` names.

    ``None``, ``"serial"`` or ``1``: serial; an int ``n > 1``: ``n`` local processes; a
    scheduler address ``"tcp://host:port"``: that Dask cluster
    (:class:`~topoaudit.mapper.dask_executor.DaskExecutor`, connected at its first task);
    an object with ``map``: itself.
    """
    if spec is None or spec == "serial" or (isinstance(spec, numbers.Integral) and spec == 1):
        return SerialExecutor()
    if isinstance(spec, numbers.Integral) and not isinstance(spec, bool) and spec > 1:
        return ProcessExecutor(int(spec))
    if isinstance(spec, str) and "://" in spec:
        from topoaudit.mapper.dask_executor import DaskExecutor

        return DaskExecutor(spec)
    if hasattr(spec, "map") and not isinstance(spec, str | numbers.Number):
        return spec
    msg = (
        "n_jobs must be 1 or None (serial), an int > 1 (local processes), a Dask scheduler "
        f"address tcp://HOST:PORT or an executor with a map(function, tasks) method; got {spec!r}."
    )
    raise ParameterError(msg)


@contextlib.contextmanager
def open_executor(spec: Any) -> Iterator[Any]:
    """:func:`make_executor` for a block: an executor made here from a scheduler address
    is closed (its connection dropped) when the block ends; one given is left open."""
    executor = make_executor(spec)
    try:
        yield executor
    finally:
        if executor is not spec and hasattr(executor, "close"):
            executor.close()


def map_tasks(
    executor: Any,
    function: Callable[..., Any],
    tasks: Sequence[tuple[Any, ...]],
    weights: Sequence[float] | None = None,
    progress: Done | None = None,
) -> list[Any]:
    """``[function(*task) for task in tasks]`` on ``executor``, with ``progress`` called
    with the number of tasks finished: as each finishes on the executors of this package,
    at the end on others."""
    if getattr(executor, "reports_progress", False):
        return executor.map(function, tasks, weights=weights, progress=progress)
    out = executor.map(function, tasks)
    if progress is not None:
        progress(len(out))
    return out


def map_shared(
    executor: Any,
    function: Callable[..., Any],
    shared: np.ndarray,
    tasks: Sequence[tuple[Any, ...]],
    weights: Sequence[float] | None = None,
    progress: Done | None = None,
) -> list[Any]:
    """``[function(shared, *task) for task in tasks]`` on ``executor``: through its
    ``map_shared`` when it has one (the array travels once), else through its ``map``
    with the array in every task. ``progress`` is called with the number of tasks
    finished: as each finishes on the executors of this package, at the end on others."""
    ours = getattr(executor, "reports_progress", False)
    extra = {"progress": progress} if ours else {}
    if hasattr(executor, "map_shared"):
        out = executor.map_shared(function, shared, tasks, weights=weights, **extra)
    else:
        out = executor.map(function, [(shared, *task) for task in tasks], **extra)
    if progress is not None and not ours:
        progress(len(out))
    return out
