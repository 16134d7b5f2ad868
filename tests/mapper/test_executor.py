"""The executor seam: results in task order wherever tasks run, the shared array handed to
tasks, progress as tasks finish, and the specs ``make_executor`` takes or refuses.

The Dask executor against a real cluster is tested in ``tests/test_cluster.py``."""

from __future__ import annotations

import numpy as np
import pytest

from topoaudit.errors import ParameterError
from topoaudit.mapper.dask_executor import DaskExecutor
from topoaudit.mapper.executor import (
    ProcessExecutor,
    SerialExecutor,
    make_executor,
    map_shared,
    map_tasks,
    open_executor,
)

pytestmark = pytest.mark.usefixtures("stop_local_workers")


def _row_sum(shared: np.ndarray, row: int, scale: float) -> float:
    return float(shared[row].sum() * scale)


def _power(x: int, p: int) -> int:
    return x**p


class OnlyMap:
    """An executor from elsewhere: ``map`` and nothing else (reverses the work order)."""

    def __init__(self) -> None:
        self.calls = 0

    def map(self, function, tasks):
        self.calls += 1
        return [function(*t) for t in reversed(list(tasks))][::-1]


SHARED = np.arange(12.0).reshape(4, 3)
# reference: numpy's own row sums (common practice, no source)
EXPECTED = [float(v) * 2.0 for v in SHARED.sum(axis=1)[[3, 0, 2, 1]]]
TASKS = [(3, 2.0), (0, 2.0), (2, 2.0), (1, 2.0)]


@pytest.mark.parametrize(
    "executor",
    [SerialExecutor(), ProcessExecutor(2), OnlyMap()],
    ids=["serial", "processes", "map-only"],
)
def test_map_shared_gives_each_task_the_shared_array_in_task_order(executor):
    seen: list[int] = []
    out = map_shared(executor, _row_sum, SHARED, TASKS, weights=[1, 4, 2, 3], progress=seen.append)
    assert out == EXPECTED
    # the executors here say how many tasks are done as each finishes; others once, at the end
    assert seen == ([4] if isinstance(executor, OnlyMap) else [1, 2, 3, 4])


@pytest.mark.parametrize(
    "executor",
    [SerialExecutor(), ProcessExecutor(2), OnlyMap()],
    ids=["serial", "processes", "map-only"],
)
def test_map_tasks_keeps_task_order_whatever_the_weights(executor):
    tasks = [(x, 3) for x in range(7)]
    assert map_tasks(executor, _power, tasks, weights=[0, 6, 1, 5, 2, 4, 3]) == [
        x**3 for x in range(7)
    ]


def test_a_task_that_raises_raises_in_the_caller():
    with pytest.raises(IndexError):
        map_shared(ProcessExecutor(2), _row_sum, SHARED, [(0, 1.0), (9, 1.0)])


@pytest.mark.parametrize(
    ("spec", "kind"),
    [
        (None, SerialExecutor),
        ("serial", SerialExecutor),
        (1, SerialExecutor),
        (2, ProcessExecutor),
        ("tcp://127.0.0.1:8786", DaskExecutor),
        ("tls://scheduler.example:8786", DaskExecutor),
    ],
)
def test_make_executor_reads_each_spec(spec, kind):
    executor = make_executor(spec)
    assert type(executor) is kind
    if kind is DaskExecutor:
        assert executor.address == spec
        assert executor._client is None  # nothing is connected before the first task


@pytest.mark.parametrize(
    "address",
    [
        "tcp://127.0.0.1",
        "tcp://127.0.0.1:0",
        "tcp://127.0.0.1:65536",
        "http://host:8786",
        "tcp://:1",
    ],
)
def test_a_malformed_scheduler_address_is_refused_by_name(address):
    with pytest.raises(ParameterError, match=r"tcp://HOST:PORT .*got " + repr(address)):
        make_executor(address)


def test_open_executor_closes_only_the_executor_it_made(monkeypatch):
    closed: list[str] = []

    class Closable(OnlyMap):
        def close(self) -> None:
            closed.append("given")

    given = Closable()
    with open_executor(given) as executor:
        assert executor is given
    assert closed == []
    monkeypatch.setattr(DaskExecutor, "close", lambda self: closed.append(self.address))
    with open_executor("tcp://127.0.0.1:8786") as executor:
        assert isinstance(executor, DaskExecutor)
    assert closed == ["tcp://127.0.0.1:8786"]
