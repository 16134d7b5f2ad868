"""A fixture archive: two releases of the invented demo model, audited once per session."""

from __future__ import annotations

import os

import pytest

from topoaudit.audit.run import run_audit
from topoaudit.cli import _write_bundle
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project
from topoaudit.report.site import publish

FIXTURE_ROWS = 3000


@pytest.fixture(scope="session")
def fixture_archive(tmp_path_factory):
    """(folder, bundles by release, archive) for a small two-release demo project."""
    old = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = "1767225600"  # 2026-01-01
    try:
        folder = tmp_path_factory.mktemp("fixture")
        config_path = write_demo_project(folder / "project", FIXTURE_ROWS, seed=7)
        text = config_path.read_text(encoding="utf-8")
        text += "\n[audit]\nstability_intervals = [0, 2]\nstability_overlaps = [0.0]\n"
        text += "bootstrap_resamples = 1\n"
        config_path.write_text(text, encoding="utf-8")
        config = load_config(config_path)
        bundles = {}
        archive = folder / "archive"
        for release in config.releases:
            audit = run_audit(config, release=release.name)
            bundle = folder / "bundles" / release.name
            _write_bundle(audit, bundle)
            publish(bundle, archive)
            bundles[release.name] = bundle
        yield folder, bundles, archive
    finally:
        if old is None:
            os.environ.pop("SOURCE_DATE_EPOCH", None)
        else:
            os.environ["SOURCE_DATE_EPOCH"] = old
