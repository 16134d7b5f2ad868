"""A fixture archive: two releases of the invented demo model, audited once per session,
and the pieces other fixtures build their own archives from."""

from __future__ import annotations

import contextlib
import fcntl
import os
from collections.abc import Iterator
from pathlib import Path

import pytest
from threadpoolctl import threadpool_limits

from topoaudit.audit.run import run_audit
from topoaudit.cli import _write_bundle
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project
from topoaudit.report.site import publish

FIXTURE_ROWS = 3000
#: a small stability grid and one bootstrap resample: fast audits for tests
LIGHT_AUDIT = (
    "\n[audit]\nstability_intervals = [0, 2]\nstability_overlaps = [0.0]\nbootstrap_resamples = 1\n"
)
#: few resamples behind the confidence of the shape's features: fast audits for tests
LIGHT_GRAPH = 'filter = "pca"\nresamples = 8\n'


def light(config_text: str) -> str:
    """The demo config with the light audit and shape settings (added to its own [audit]
    table where it has one: TOML allows a table once)."""
    text = config_text.replace('filter = "pca"', LIGHT_GRAPH.strip(), 1)
    if "\n[audit]\n" in text:
        return text.replace("\n[audit]\n", LIGHT_AUDIT, 1)
    return text + LIGHT_AUDIT


def pytest_configure(config: pytest.Config) -> None:
    """Under pytest-xdist, share the cores among the workers: each worker's native thread
    pools (OpenMP in scikit-learn, OpenBLAS) get cores / workers threads, not all cores.

    Pools that each take every core oversubscribe it, and threads that spin while they
    wait make the whole suite slower. The variables also reach subprocesses.
    """
    workers = int(os.environ.get("PYTEST_XDIST_WORKER_COUNT", "0"))
    if not os.environ.get("PYTEST_XDIST_WORKER") or workers < 1:
        return
    threads = str(max(1, (os.cpu_count() or 1) // workers))
    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(name, threads)
    threadpool_limits(int(os.environ["OMP_NUM_THREADS"]))


@pytest.fixture(scope="module")
def stop_local_workers() -> Iterator[None]:
    """The local worker processes a module starts are stopped when it ends (use it with
    ``pytestmark = pytest.mark.usefixtures("stop_local_workers")``)."""
    from topoaudit.mapper.executor import ProcessExecutor

    try:
        yield
    finally:
        ProcessExecutor.shutdown()


@contextlib.contextmanager
def fixed_build_date() -> Iterator[None]:
    """SOURCE_DATE_EPOCH at 2026-01-01 for the block, restored after it."""
    old = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = "1767225600"
    try:
        yield
    finally:
        if old is None:
            os.environ.pop("SOURCE_DATE_EPOCH", None)
        else:
            os.environ["SOURCE_DATE_EPOCH"] = old


def audit_and_publish(config_path: Path, root: Path) -> tuple[dict[str, Path], Path]:
    """Audit every release of the config into ``root/bundles`` and publish each into
    ``root/archive``; returns (bundles by release, archive)."""
    config = load_config(config_path)
    archive = root / "archive"
    bundles = {}
    for release in config.releases:
        bundle = root / "bundles" / release.name
        _write_bundle(run_audit(config, release=release.name), bundle)
        publish(bundle, archive)
        bundles[release.name] = bundle
    return bundles, archive


@contextlib.contextmanager
def _exclusive(lock: Path) -> Iterator[None]:
    """Hold an exclusive lock on the file ``lock`` for the block (waits for it)."""
    with lock.open("a") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fh, fcntl.LOCK_UN)


@pytest.fixture(scope="session")
def fixture_archive(tmp_path_factory):
    """(folder, bundles by release, archive) for a small two-release demo project.

    Built once per test run: under pytest-xdist the first worker to ask builds it in the
    run's shared temporary folder while the others wait on a lock, then all read it. Tests
    copy what they change; nothing writes into it.
    """
    root = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        root = root.parent  # the folder of this run, above each worker's own
    folder = root / "fixture-archive"
    with fixed_build_date():
        with _exclusive(root / "fixture-archive.lock"):
            if not (folder / "built").exists():
                folder.mkdir(exist_ok=True)
                config_path = write_demo_project(folder / "project", FIXTURE_ROWS, seed=7)
                config_path.write_text(light(config_path.read_text(encoding="utf-8")))
                audit_and_publish(config_path, folder)
                (folder / "built").touch()
        releases = [r.name for r in load_config(folder / "project" / "audit.toml").releases]
        yield folder, {r: folder / "bundles" / r for r in releases}, folder / "archive"
