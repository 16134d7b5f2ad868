"""A fixture archive: two releases of the invented demo model, audited once per session,
and the pieces other fixtures build their own archives from."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from pathlib import Path

import pytest

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
    """The demo config with the light audit and shape settings."""
    return config_text.replace('filter = "pca"', LIGHT_GRAPH.strip(), 1) + LIGHT_AUDIT


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


@pytest.fixture(scope="session")
def fixture_archive(tmp_path_factory):
    """(folder, bundles by release, archive) for a small two-release demo project."""
    with fixed_build_date():
        folder = tmp_path_factory.mktemp("fixture")
        config_path = write_demo_project(folder / "project", FIXTURE_ROWS, seed=7)
        config_path.write_text(light(config_path.read_text(encoding="utf-8")))
        bundles, archive = audit_and_publish(config_path, folder)
        yield folder, bundles, archive
