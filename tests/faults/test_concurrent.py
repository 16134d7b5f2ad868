"""Publishes at once: the archive lock (flock(2), released by the kernel when its holder
exits or dies) makes a second publish wait for the first."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time

from topoaudit.report.archive import LOCK, locked, verify_archive, write_checksums

MODEL = "meter-failure"


def _bundle(fixture_archive, tmp_path, release):
    bundle = tmp_path / release
    shutil.copytree(fixture_archive[1]["2026.2"], bundle)
    doc = json.loads((bundle / "analysis.json").read_text())
    doc["release"] = release
    (bundle / "analysis.json").write_text(json.dumps(doc))
    write_checksums(bundle)
    return bundle


def _publish(bundle, archive):
    return subprocess.Popen(
        [sys.executable, "-m", "topoaudit.cli", "publish", str(bundle), "--archive", str(archive)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        env=dict(os.environ, PYTHONDONTWRITEBYTECODE="1"),
    )


def test_a_publish_waits_while_another_holds_the_archive(fixture_archive, tmp_path):
    archive = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], archive)
    bundle = _bundle(fixture_archive, tmp_path, "2026.3")
    with locked(archive / LOCK):
        proc = _publish(bundle, archive)
        time.sleep(8)  # ample time for the publish to finish, were it not waiting
        assert proc.poll() is None, proc.communicate()
        assert not (archive / MODEL / "2026.3").exists()
    _out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert verify_archive(archive).ok


def test_concurrent_publishes_all_land_with_distinct_numbers(fixture_archive, tmp_path):
    archive = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], archive)
    releases = ("2026.3", "2026.4", "2026.5")
    procs = [_publish(_bundle(fixture_archive, tmp_path, r), archive) for r in releases]
    results = [p.communicate(timeout=300) for p in procs]
    assert [p.returncode for p in procs] == [0, 0, 0], results
    assert verify_archive(archive).ok
    numbers = sorted(
        json.loads((archive / MODEL / r / "published.json").read_text())["sequence"]
        for r in ("2026.1", "2026.2", *releases)
    )
    assert numbers == [1, 2, 3, 4, 5]
