"""Tasks on a Dask cluster (``dask.distributed``), behind the same seam as the local
executors.

A cluster is a scheduler and any number of workers, started by the user::

    dask scheduler                          # prints tcp://HOST:8786
    dask worker tcp://HOST:8786 --nthreads 1  # on each machine, as many as wanted

:class:`DaskExecutor` connects to the scheduler as a client. :meth:`~DaskExecutor.map`
submits one Dask task per task, :meth:`~DaskExecutor.map_shared` first sends the large
shared array to every worker once (``Client.scatter`` with ``broadcast=True``) and then
submits tasks that name it, so only the small task arguments travel per task; the same
array given again (the same object) is not sent again. Results come back in task order.

A worker that dies while it runs a task is replaced by the scheduler, which hands its
tasks to the workers left (up to the scheduler's ``allowed-failures``, 3 by default), so
the results are the same; a task that raises is tried again ``retries`` times (a
transient fault such as a full disk on one machine), then its error is raised here. The
workers must run the same topoaudit (and numpy, scikit-learn) as the client: a task is a
function of this package, sent by name.

**The workers' memory allocator.** Dask's nanny starts each worker with
``MALLOC_TRIM_THRESHOLD_=65536`` (its ``distributed.nanny.pre-spawn-environ``), so that
glibc gives freed memory back to the system at once. Setting it also fixes glibc's mmap
threshold at 128 KiB, and the audit's tasks allocate many arrays of a few hundred KiB
to a few MiB: each is then mapped and unmapped afresh, and the page faults took 40% more
time per task than in a plain process (measured on 2 cores: the same task of matrix
products 4.0 s on a nanny's worker, 2.9 s in a plain process, 3.0 s with both thresholds
raised). Each task therefore first raises, once per worker process, glibc's mmap
threshold to 32 MiB and its trim threshold to 256 MiB (``mallopt``; nothing is done
where the C library has no ``mallopt``). Freed memory below 256 MiB at the top of a
worker's heap is then kept for reuse instead of returned at once.

The client, the scheduler and the workers are Dask's; this module only names them and
turns their failures into :class:`~topoaudit.errors.ClusterError`, whose message names
the scheduler's address. ``distributed`` is imported only when a cluster is used.
"""

from __future__ import annotations

import contextlib
import functools
import time
import uuid
import weakref
from collections.abc import Callable, Sequence
from typing import Any, ClassVar

import numpy as np

from topoaudit._validation import SCHEDULER_ADDRESS, is_scheduler_address
from topoaudit.errors import ClusterError, ParameterError

__all__ = ["CONNECT_TIMEOUT_S", "NO_WORKERS_S", "DaskExecutor", "roomy_malloc"]

#: seconds to wait for a scheduler to answer before giving up
CONNECT_TIMEOUT_S = 10.0
#: seconds a cluster may stay without any worker while tasks wait, before giving up
NO_WORKERS_S = 60.0
_POLL_S = 2.0
_TICK_S = 0.05


def _handshake(address: str, timeout: float) -> None:
    """Open a connection to ``address`` and complete Dask's handshake, or raise
    ``OSError``/``TimeoutError`` after ``timeout`` seconds.

    ``distributed.Client`` waits without a limit for the handshake of a peer that accepts
    the connection and then says nothing; this bounded probe comes first. It runs in a
    thread of its own, so it also works where an event loop is running already.
    """
    import asyncio
    from concurrent.futures import ThreadPoolExecutor

    from distributed.comm import connect

    async def probe() -> None:
        comm = await connect(address, timeout=timeout)
        await comm.close()

    async def bounded() -> None:
        await asyncio.wait_for(probe(), timeout)

    with ThreadPoolExecutor(1) as pool:
        pool.submit(asyncio.run, bounded()).result()


def _lost_errors() -> tuple[type[BaseException], ...]:
    """What ``distributed`` raises when tasks are lost rather than failed: a task whose
    workers kept dying, futures cancelled with the connection, a closed client or comm."""
    from concurrent.futures import CancelledError

    from distributed.client import ClosedClientError
    from distributed.comm.core import CommClosedError
    from distributed.scheduler import KilledWorker

    return (KilledWorker, CancelledError, ClosedClientError, CommClosedError)


#: glibc's ``mallopt`` parameters (malloc.h) and the values each worker takes
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3
_MMAP_THRESHOLD = 32 * 2**20
_TRIM_THRESHOLD = 256 * 2**20


@functools.cache
def roomy_malloc() -> bool:
    """Raise glibc's mmap and trim thresholds in this process (see the module docstring),
    once; True when they were set, False where there is no ``mallopt``."""
    import ctypes
    import ctypes.util

    with contextlib.suppress(OSError, AttributeError, TypeError):
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        return bool(libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD)) and bool(
            libc.mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD)
        )
    return False


def _in_worker(function: Callable[..., Any], *args: Any) -> Any:
    """A task as it runs on a worker: the allocator set once, then ``function(*args)``."""
    roomy_malloc()
    return function(*args)


def _close(client: Any) -> None:
    with contextlib.suppress(Exception):  # a client already cut off
        client.close()


class DaskExecutor:
    """Run tasks on the Dask cluster whose scheduler listens at ``address``.

    Parameters
    ----------
    address : str
        The scheduler, ``"tcp://host:port"`` (as ``dask scheduler`` prints it).
    timeout : float, default=10.0
        Seconds to wait for the scheduler to answer, and then for at least one worker.
    retries : int, default=1
        How many more times a task that raised is tried before its error is raised here.

    Notes
    -----
    The connection is made at the first :meth:`map` or :meth:`map_shared` (or
    :meth:`connect`) and kept until :meth:`close`; use the executor as a context manager
    to close it. A cluster that does not answer raises :class:`ClusterError` after
    ``timeout`` seconds; so does one left without workers for ``NO_WORKERS_S`` seconds
    while tasks wait, or one whose scheduler goes away.
    """

    reports_progress: ClassVar[bool] = True

    def __init__(self, address: str, *, timeout: float = CONNECT_TIMEOUT_S, retries: int = 1):
        if not is_scheduler_address(address):
            msg = f"DaskExecutor needs {SCHEDULER_ADDRESS.describe()}; got {address!r}."
            raise ParameterError(msg)
        self.address = address
        self.timeout = float(timeout)
        self.retries = int(retries)
        self._client: Any = None
        self._shared: tuple[np.ndarray, Any] | None = None

    # -- the connection -----------------------------------------------------------------

    def connect(self) -> Any:
        """The ``distributed.Client`` of this executor, connecting (and waiting for a
        worker) the first time."""
        if self._client is not None:
            return self._client
        from distributed import Client

        try:
            _handshake(self.address, self.timeout)
            client = Client(self.address, timeout=self.timeout, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            detail = f" ({exc})" if str(exc) else ""
            msg = (
                f"No Dask scheduler answered at {self.address} within {self.timeout:g} s"
                f"{detail}; start one with `dask scheduler` and give the address it prints."
            )
            raise ClusterError(msg) from None
        try:
            client.wait_for_workers(1, timeout=self.timeout)
        except (OSError, TimeoutError):
            _close(client)
            msg = (
                f"The Dask scheduler at {self.address} has no workers (none joined within "
                f"{self.timeout:g} s); start some with `dask worker {self.address}`."
            )
            raise ClusterError(msg) from None
        self._client = client
        weakref.finalize(self, _close, client)
        return client

    def close(self) -> None:
        """Release the shared array on the workers and close the connection."""
        client, self._client, self._shared = self._client, None, None
        if client is not None:
            _close(client)

    def __enter__(self) -> DaskExecutor:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __getstate__(self) -> dict[str, Any]:  # a copy sent elsewhere connects anew
        return {**self.__dict__, "_client": None, "_shared": None}

    # -- tasks ----------------------------------------------------------------------------

    def _share(self, client: Any, shared: np.ndarray) -> Any:
        """The future of ``shared`` on every worker, sending it only if it is not the
        array sent last."""
        if self._shared is not None and self._shared[0] is shared:
            return self._shared[1]
        self._shared = None  # the array sent before is released on the workers
        future = client.scatter(shared, broadcast=True, hash=False)
        self._shared = (shared, future)
        return future

    def _submit(
        self,
        function: Callable[..., Any],
        calls: list[tuple[Any, ...]],
        weights: Sequence[float] | None,
        progress: Callable[[int], None] | None,
    ) -> list[Any]:
        client = self.connect()
        token = uuid.uuid4().hex[:12]
        name = getattr(function, "__name__", "task").strip("_") or "task"
        rank = np.argsort(np.argsort(weights, kind="stable")) if weights is not None else None
        futures = [
            client.submit(
                _in_worker,
                function,
                *args,
                key=f"{name}-{token}-{i}",
                pure=False,
                retries=self.retries,
                priority=int(rank[i]) if rank is not None else -i,
            )
            for i, args in enumerate(calls)
        ]
        try:
            self._wait(client, futures, progress)
            return client.gather(futures)
        except ClusterError:
            client.cancel(futures)
            raise
        except Exception as exc:
            client.cancel(futures)
            if isinstance(exc, _lost_errors()):
                msg = (
                    f"The Dask cluster at {self.address} lost the tasks of {name} "
                    f"({type(exc).__name__}: {exc}); its workers died repeatedly or the "
                    "scheduler went away."
                )
                raise ClusterError(msg) from exc
            raise

    def _wait(
        self, client: Any, futures: list[Any], progress: Callable[[int], None] | None
    ) -> None:
        """Wait for every future (saying how many are done as they finish), giving up when
        the cluster has no worker for ``NO_WORKERS_S`` seconds or the connection is lost."""
        alone_since: float | None = None
        checked = time.monotonic()
        pending = list(futures)
        while pending:
            time.sleep(_TICK_S)
            left = [f for f in pending if not f.done()]
            if progress is not None and len(left) < len(pending):
                progress(len(futures) - len(left))
            pending = left
            if not pending or time.monotonic() - checked < _POLL_S:
                continue
            checked = time.monotonic()
            if client.status not in ("running", "connecting"):
                msg = f"Lost the connection to the Dask scheduler at {self.address}."
                raise ClusterError(msg)
            if client.nthreads():
                alone_since = None
                continue
            alone_since = alone_since or checked
            if checked - alone_since > NO_WORKERS_S:
                msg = (
                    f"The Dask cluster at {self.address} has had no workers for "
                    f"{NO_WORKERS_S:g} s while tasks waited; start some with "
                    f"`dask worker {self.address}`."
                )
                raise ClusterError(msg)

    def map(
        self,
        function: Callable[..., Any],
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Callable[[int], None] | None = None,
    ) -> list[Any]:
        """Apply ``function(*task)`` to every task on the cluster; results in task order.

        ``function`` must be importable by the workers (defined at module level of a
        package they have); ``weights`` (expected costs) hand the costliest out first;
        ``progress`` is called with the number of tasks finished as they finish.
        """
        return self._submit(function, [tuple(t) for t in tasks], weights, progress)

    def map_shared(
        self,
        function: Callable[..., Any],
        shared: np.ndarray,
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
        progress: Callable[[int], None] | None = None,
    ) -> list[Any]:
        """Apply ``function(shared, *task)`` to every task on the cluster.

        ``shared`` is sent to every worker once (scatter, broadcast) and each task names
        it; giving the same array object again reuses the copies already there.
        """
        client = self.connect()
        ref = self._share(client, shared)
        return self._submit(function, [(ref, *t) for t in tasks], weights, progress)

    def __repr__(self) -> str:
        return f"DaskExecutor({self.address!r})"
