"""Where the clustering of cover elements runs.

Clustering one cover element is a pure function of (its rows' data, the clusterer's
settings), so elements can run anywhere in any order. An executor is any object with
``map(function, tasks) -> list`` that returns results in task order; serial and
local-process executors are provided, and a distributed engine only needs the same
method.
"""

from __future__ import annotations

import numbers
from collections.abc import Callable, Sequence
from typing import Any, Protocol

from topoaudit.errors import ParameterError

__all__ = ["Executor", "ProcessExecutor", "SerialExecutor", "make_executor"]


class Executor(Protocol):
    def map(self, function: Callable[..., Any], tasks: Sequence[tuple[Any, ...]]) -> list[Any]:
        """Apply ``function(*task)`` to every task; results in task order."""
        ...


class SerialExecutor:
    """Run every task in this process, one after the other."""

    def map(self, function: Callable[..., Any], tasks: Sequence[tuple[Any, ...]]) -> list[Any]:
        return [function(*task) for task in tasks]

    def __repr__(self) -> str:
        return "SerialExecutor()"


class ProcessExecutor:
    """Run tasks in ``n_jobs`` local worker processes (joblib's loky backend).

    Tasks are handed out largest first (by the ``weights`` given to :meth:`map`, else in
    order), which keeps workers evenly loaded when cover elements differ in size; each
    worker limits its BLAS threads so that ``n_jobs`` workers do not oversubscribe the
    cores.
    """

    def __init__(self, n_jobs: int = 2) -> None:
        if not isinstance(n_jobs, numbers.Integral) or isinstance(n_jobs, bool) or n_jobs < 1:
            msg = f"ProcessExecutor needs n_jobs, an int >= 1; got {n_jobs!r}."
            raise ParameterError(msg)
        self.n_jobs = int(n_jobs)

    def map(
        self,
        function: Callable[..., Any],
        tasks: Sequence[tuple[Any, ...]],
        weights: Sequence[float] | None = None,
    ) -> list[Any]:
        from joblib import Parallel, delayed

        order = list(range(len(tasks)))
        if weights is not None:
            order.sort(key=lambda i: -weights[i])
        results = Parallel(n_jobs=self.n_jobs, backend="loky", pre_dispatch="all", batch_size=1)(
            delayed(function)(*tasks[i]) for i in order
        )
        out: list[Any] = [None] * len(tasks)
        for i, r in zip(order, results, strict=True):
            out[i] = r
        return out

    def __repr__(self) -> str:
        return f"ProcessExecutor(n_jobs={self.n_jobs})"


def make_executor(spec: Any) -> Any:
    """``None``, ``"serial"`` or ``1`` -> serial; an int ``n > 1`` -> ``n`` processes;
    an object with ``map`` -> itself."""
    if spec is None or spec == "serial" or (isinstance(spec, numbers.Integral) and spec == 1):
        return SerialExecutor()
    if isinstance(spec, numbers.Integral) and not isinstance(spec, bool) and spec > 1:
        return ProcessExecutor(int(spec))
    if hasattr(spec, "map") and not isinstance(spec, str | numbers.Number):
        return spec
    msg = (
        "n_jobs must be 1 or None (serial), an int > 1 (local processes) or an executor "
        f"with a map(function, tasks) method; got {spec!r}."
    )
    raise ParameterError(msg)
