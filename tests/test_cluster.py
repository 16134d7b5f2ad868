"""Audits on a real Dask cluster on the loopback interface.

The module starts ``dask scheduler`` and two ``dask worker`` processes on 127.0.0.1 as a
user would (the commands of the README), on free ports, waits until the scheduler
reports both workers, and stops every process it started at the end (its process group,
so each worker's own child goes too). The bundle of an audit through the cluster is
compared byte for byte with the bundle of the same audit run serially in this process
and on local processes; one worker is killed while the stability reruns run and the
audit must still write the same bundle; a scheduler that does not answer must end the
command with exit status 2 within 30 s, naming the address.

Reference for the expected results: the serial audit of the same config and seed, in
this process (no cluster involved).
"""

from __future__ import annotations

import contextlib
import hashlib
import operator
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from tests.conftest import fixed_build_date, light
from topoaudit.audit.run import run_audit
from topoaudit.cli import audit_command
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project
from topoaudit.errors import ClusterError
from topoaudit.mapper.dask_executor import DaskExecutor

pytestmark = [
    pytest.mark.cluster,
    pytest.mark.xdist_group("cluster"),
    pytest.mark.usefixtures("stop_local_workers"),
]

BIN = Path(sys.executable).parent
ROWS = 3000
BUNDLE_FILES = ("analysis.json", "graph.json", "members.parquet")
EPOCH = "1767225600"  # SOURCE_DATE_EPOCH: the bundles' build date, fixed


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _stop(proc: subprocess.Popen) -> None:
    """Stop ``proc`` and its process group (a worker's nanny and its worker process)."""
    for sig, wait in ((signal.SIGTERM, 10), (signal.SIGKILL, 10)):
        if proc.poll() is not None:
            break
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, sig)
        with contextlib.suppress(subprocess.TimeoutExpired):
            proc.wait(timeout=wait)
    with contextlib.suppress(ProcessLookupError):
        os.killpg(proc.pid, signal.SIGKILL)  # whatever of the group is left


class Cluster:
    """A scheduler and its workers, started with the ``dask`` command."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.address = f"tcp://127.0.0.1:{_free_port()}"
        self.workers: dict[str, subprocess.Popen] = {}
        self.procs: list[subprocess.Popen] = []
        self.scheduler = self._spawn(
            "scheduler",
            ["scheduler", "--host", "127.0.0.1", "--port", self.address.rsplit(":", 1)[1]],
        )

    def _spawn(self, name: str, args: list[str]) -> subprocess.Popen:
        log = (self.folder / f"{name}.log").open("ab")
        proc = subprocess.Popen(
            [str(BIN / "dask"), *args, "--no-dashboard"],
            stdout=log,
            stderr=subprocess.STDOUT,
            start_new_session=True,
            cwd=self.folder,
        )
        log.close()
        self.procs.append(proc)
        return proc

    def start_worker(self, name: str) -> None:
        self.workers[name] = self._spawn(
            name,
            [
                "worker",
                self.address,
                "--name",
                name,
                "--nthreads",
                "1",
                "--host",
                "127.0.0.1",
                "--local-directory",
                str(self.folder / name),
            ],
        )

    def kill_worker(self, name: str) -> None:
        """SIGKILL the worker ``name`` and its nanny: a machine lost, not a shutdown."""
        proc = self.workers.pop(name)
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)

    def wait_for_workers(self, n: int, timeout: float = 60) -> None:
        from distributed import Client

        with Client(self.address, timeout=timeout, set_as_default=False) as client:
            client.wait_for_workers(n, timeout=timeout)

    def stop(self) -> None:
        for proc in reversed(self.procs):
            _stop(proc)


@pytest.fixture(scope="module")
def cluster(tmp_path_factory) -> Iterator[Cluster]:
    c = Cluster(tmp_path_factory.mktemp("cluster"))
    try:
        for name in ("w1", "w2"):
            c.start_worker(name)
        c.wait_for_workers(2)
        yield c
    finally:
        c.stop()


@pytest.fixture(scope="module")
def project(tmp_path_factory) -> tuple[Path, dict[str, str]]:
    """The light demo config, and the checksums of its serial bundle (the reference),
    written as ``topoaudit audit <config> --out bundle`` records it."""
    root = tmp_path_factory.mktemp("project")
    config_path = write_demo_project(root / "project", ROWS, seed=7)
    config_path.write_text(light(config_path.read_text(encoding="utf-8")), encoding="utf-8")
    with fixed_build_date():
        audit = run_audit(
            load_config(config_path),
            executor=None,
            command=audit_command(config_path, "bundle"),
        )
        folder = audit.write(root / "serial" / "bundle")
    return root, _checksums(folder)


def _checksums(folder: Path) -> dict[str, str]:
    return {name: hashlib.sha256((folder / name).read_bytes()).hexdigest() for name in BUNDLE_FILES}


def _audit_command(root: Path, name: str, *extra: str) -> tuple[list[str], Path]:
    """The command line of an audit of the project into ``root/name/bundle``, and its folder."""
    cwd = root / name
    cwd.mkdir()
    argv = [
        str(BIN / "topoaudit"),
        "audit",
        str(root / "project" / "audit.toml"),
        "--out",
        "bundle",
    ]
    return [*argv, "--progress", "plain", *extra], cwd


def _env() -> dict[str, str]:
    return {**os.environ, "SOURCE_DATE_EPOCH": EPOCH}


def test_tasks_come_back_in_order_and_the_shared_array_travels_once(cluster):
    shared = np.arange(40.0) * 1.5
    with DaskExecutor(cluster.address) as executor:
        # reference: numpy's and Python's own results in this process (common practice)
        assert executor.map(operator.pow, [(x, 3) for x in range(9)]) == [x**3 for x in range(9)]
        picks = [(i,) for i in (7, 0, 39, 12, 3, 3)]
        assert executor.map_shared(np.take, shared, picks) == [shared[i] for (i,) in picks]
        arrays = _arrays_held(executor)
        # one copy on each worker, whatever the number of tasks
        assert len(arrays) == 2 and all(len(keys) == 1 for keys in arrays.values())
        again = executor.map_shared(np.take, shared, [(5,), (6,)], progress=lambda k: None)
        assert again == [shared[5], shared[6]]
        assert _arrays_held(executor) == arrays  # the same array is not sent again


def test_each_task_runs_with_the_allocator_thresholds_raised(cluster):
    # Dask's nanny starts workers with MALLOC_TRIM_THRESHOLD_=65536 (its documented
    # distributed.nanny.pre-spawn-environ); every task first raises glibc's thresholds in
    # the worker process it runs in, once per process (one cached call), and mallopt
    # returned success.
    from topoaudit.mapper.dask_executor import roomy_malloc

    with DaskExecutor(cluster.address) as executor:
        assert executor.map(os.getenv, [("MALLOC_TRIM_THRESHOLD_",)] * 2) == ["65536"] * 2
        seen = executor.map(operator.methodcaller("cache_info"), [(roomy_malloc,)] * 6)
        assert executor.map(roomy_malloc, [()] * 6) == [True] * 6
    assert all(info.misses == 1 and info.currsize == 1 for info in seen), seen


def _arrays_held(executor: DaskExecutor) -> dict[str, list[str]]:
    """The arrays sent to each worker (scatter names them ndarray-<id>)."""
    held = executor.connect().has_what()
    return {w: [str(k) for k in keys if str(k).startswith("ndarray-")] for w, keys in held.items()}


def test_an_audit_through_the_cluster_writes_the_serial_bundle(cluster, project):
    root, expected = project
    with fixed_build_date():
        local = run_audit(
            load_config(root / "project" / "audit.toml"),
            executor=2,
            command=audit_command(root / "project" / "audit.toml", "bundle"),
        )
        assert _checksums(local.write(root / "processes" / "bundle")) == expected
    argv, cwd = _audit_command(root, "dask", "--scheduler", cluster.address)
    done = subprocess.run(argv, cwd=cwd, env=_env(), capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert f"connecting to the cluster at {cluster.address}" in done.stderr
    assert _checksums(cwd / "bundle") == expected
    # the page records the command without --scheduler: where it ran is no part of it
    assert "--scheduler" not in (cwd / "bundle" / "analysis.json").read_text(encoding="utf-8")


def _rerun_holder(client, names: dict[str, str]) -> str | None:
    """The name of a worker that holds a stability rerun now, if any."""
    for address, keys in client.processing().items():
        if any(str(k).startswith("rerun-") for k in keys):
            return names.get(address)
    return None


def test_a_worker_killed_during_the_reruns_leaves_the_bundle_unchanged(cluster, project):
    from distributed import Client

    root, expected = project
    argv, cwd = _audit_command(root, "killed", "--scheduler", cluster.address)
    killed: list[str] = []
    with Client(cluster.address, timeout=10, set_as_default=False) as client:
        names = {a: w["name"] for a, w in client.scheduler_info(n_workers=-1)["workers"].items()}
        log = (root / "killed.log").open("w")
        audit = subprocess.Popen(argv, cwd=cwd, env=_env(), stdout=log, stderr=log)
        try:
            deadline = time.monotonic() + 120
            while not killed and audit.poll() is None and time.monotonic() < deadline:
                holder = _rerun_holder(client, names)
                if holder is not None:
                    cluster.kill_worker(holder)
                    killed.append(holder)
                time.sleep(0.01)
            audit.wait(timeout=120)
        finally:
            if audit.poll() is None:
                audit.kill()
                audit.wait(timeout=10)
            log.close()
            for name in killed:  # the next test gets two workers again
                cluster.start_worker(name)
    cluster.wait_for_workers(2)
    said = (root / "killed.log").read_text(encoding="utf-8")
    assert killed, "no rerun was seen on a worker"
    assert audit.returncode == 0, said
    assert _checksums(cwd / "bundle") == expected


def test_a_scheduler_that_does_not_answer_ends_the_command_with_status_2(tmp_path):
    address = f"tcp://127.0.0.1:{_free_port()}"  # nothing listens there
    config_path = write_demo_project(tmp_path / "project", 600, seed=7)
    argv = [str(BIN / "topoaudit"), "audit", str(config_path), "--out", str(tmp_path / "b")]
    start = time.monotonic()
    done = subprocess.run(
        [*argv, "--scheduler", address, "--quiet"], capture_output=True, text=True, timeout=60
    )
    took = time.monotonic() - start
    assert done.returncode == 2
    assert f"No Dask scheduler answered at {address} within 10 s" in done.stderr
    assert "Traceback" not in done.stderr
    assert took < 30, f"gave up after {took:.0f} s"
    assert not (tmp_path / "b").exists()


@pytest.fixture
def silent_listener() -> Iterator[str]:
    """An address where a socket accepts connections and never says a word."""
    server = socket.create_server(("127.0.0.1", 0))
    held: list[socket.socket] = []
    stop = threading.Event()

    def accept() -> None:
        server.settimeout(0.1)
        while not stop.is_set():
            with contextlib.suppress(OSError):
                held.append(server.accept()[0])

    thread = threading.Thread(target=accept, daemon=True)
    thread.start()
    try:
        yield f"tcp://127.0.0.1:{server.getsockname()[1]}"
    finally:
        stop.set()
        thread.join(timeout=5)
        for conn in held:
            conn.close()
        server.close()


def test_a_listener_that_never_answers_is_named_after_the_timeout(silent_listener):
    executor = DaskExecutor(silent_listener, timeout=2)
    start = time.monotonic()
    with pytest.raises(ClusterError, match=f"No Dask scheduler answered at {silent_listener}"):
        executor.connect()
    assert time.monotonic() - start < 20


def test_a_scheduler_without_workers_is_named_after_the_timeout(tmp_path):
    lonely = Cluster(tmp_path)  # a scheduler, no worker
    try:
        executor = DaskExecutor(lonely.address, timeout=3)
        with pytest.raises(
            ClusterError,
            match=f"The Dask scheduler at {lonely.address} has no workers .*"
            f"`dask worker {lonely.address}`",
        ):
            executor.connect()
    finally:
        lonely.stop()
