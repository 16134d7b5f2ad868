"""Interrupted runs: ``publish``, ``site build`` and ``audit`` killed with SIGKILL mid-way.

Each command first runs once with every write it makes logged (see ``killer.py``); the
kill points are then every rename and exchange (the commit points), the write just after
each, and writes spread evenly over the rest. After each kill the archive must verify,
the site must be byte for byte the old one or the new one, nothing published may be lost,
and the same command run again must succeed. That a process killed with SIGKILL runs no
clean-up of its own is POSIX (signal(7): SIGKILL cannot be caught or ignored).
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import light
from topoaudit.demo import write_demo_project
from topoaudit.report.archive import CHECKSUMS, bundle_findings, verify_archive, write_checksums

KILLER = Path(__file__).with_name("killer.py")
MODEL = "meter-failure"
SPREAD = 6  # writes picked evenly besides the commit points


def _run(kill_at: int, root: Path, *args: str, log: Path | None = None):
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1", SOURCE_DATE_EPOCH="1767225600")
    cmd = [sys.executable, str(KILLER), str(kill_at), str(log or "-"), str(root), "--", *args]
    return subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=300)


def _kill_points(root: Path, *args: str, limit: int, least: int = 5) -> list[int]:
    log = root / "writes.log"
    done = _run(0, root, *args, log=log)
    assert done.returncode == 0, done.stderr
    events = [line.split("\t") for line in log.read_text().splitlines()]
    log.unlink()
    n = len(events)
    commits = [int(i) for i, name, _ in events if name in ("os.rename", "topoaudit.exchange")]
    points = {p for c in commits for p in (c, c + 1) if p <= n}
    points |= {1 + round(k * (n - 1) / (SPREAD - 1)) for k in range(SPREAD)}
    chosen = sorted(points)
    if len(chosen) > limit:  # keep every commit point, thin the rest
        keep = {p for c in commits for p in (c, c + 1)}
        rest = [p for p in chosen if p not in keep]
        chosen = sorted(keep | set(rest[:: max(1, len(rest) // max(1, limit - len(keep)))]))
    assert len(chosen) >= least, (n, chosen)
    print(f"{' '.join(args[:2])}: kill points {chosen} of {n} writes")  # shown with -s
    return chosen


def _digests(folder: Path) -> dict[str, str]:
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and p.name != "sitemap.xml.gz"  # gzip stores a time of its own
    }


def _recorded(archive: Path) -> list[str]:
    """Every checksums.json in the archive (current, history, pending), as text."""
    return sorted(p.read_text() for p in archive.rglob(CHECKSUMS))


def _fresh(fixture_archive, root: Path) -> Path:
    archive = root / "archive"
    shutil.copytree(fixture_archive[2], archive)
    return archive


def _assert_killed(done) -> None:
    assert done.returncode == -9, (done.returncode, done.stderr[-2000:])


@pytest.fixture(scope="module")
def new_release_bundle(fixture_archive, tmp_path_factory):
    """A bundle of a third release, 2026.3 (release 2026.2 renamed, checksums renewed)."""
    bundle = tmp_path_factory.mktemp("third") / "2026.3"
    shutil.copytree(fixture_archive[1]["2026.2"], bundle)
    doc = json.loads((bundle / "analysis.json").read_text())
    doc["release"] = "2026.3"
    (bundle / "analysis.json").write_text(json.dumps(doc, sort_keys=True))
    write_checksums(bundle)
    return bundle


@pytest.mark.parametrize("replace", [False, True], ids=["new release", "replace"])
def test_publish_killed_anywhere_loses_nothing_and_the_next_run_succeeds(
    fixture_archive, new_release_bundle, tmp_path, replace
):
    bundle = fixture_archive[1]["2026.2"] if replace else new_release_bundle
    args = ["publish", str(bundle), "--archive"]
    extra = ["--replace"] if replace else []
    probe = tmp_path / "probe"
    probe.mkdir()
    points = _kill_points(probe, *args, str(_fresh(fixture_archive, probe)), *extra, limit=8)
    release = "2026.2" if replace else "2026.3"
    for k in points:
        root = tmp_path / f"kill-{k}"
        root.mkdir()
        archive = _fresh(fixture_archive, root)
        before = _recorded(archive)
        _assert_killed(_run(k, root, *args, str(archive), *extra))
        v = verify_archive(archive)
        assert v.ok, (k, v.report())
        after = _recorded(archive)
        assert set(before) <= set(after), f"kill at write {k} lost a published bundle"
        again = _run(-1, root, *args, str(archive), *extra)
        assert again.returncode == 0, (k, again.stderr)
        assert verify_archive(archive).ok
        assert set(before) <= set(_recorded(archive))
        assert not list((archive / MODEL).glob(".incoming-*"))
        assert (archive / MODEL / release / CHECKSUMS).exists()


def test_site_build_killed_anywhere_leaves_the_old_site_or_the_new_one(fixture_archive, tmp_path):
    archive = _fresh(fixture_archive, tmp_path)
    old_site = tmp_path / "old-site"
    assert (
        _run(
            -1, tmp_path, "site", "build", "--archive", str(archive), "--out", str(old_site)
        ).returncode
        == 0
    )
    # the archive gains a replaced release, so the next build differs from the old one
    done = _run(
        -1,
        tmp_path,
        "publish",
        str(fixture_archive[1]["2026.1"]),
        "--archive",
        str(archive),
        "--replace",
    )
    assert done.returncode == 0, done.stderr
    new_site = tmp_path / "new-site"
    assert (
        _run(
            -1, tmp_path, "site", "build", "--archive", str(archive), "--out", str(new_site)
        ).returncode
        == 0
    )
    old, new = _digests(old_site), _digests(new_site)
    assert old != new
    archive_before = _digests(archive)

    probe = tmp_path / "probe"
    shutil.copytree(old_site, probe / "site")
    points = _kill_points(
        probe, "site", "build", "--archive", str(archive), "--out", str(probe / "site"), limit=5
    )
    for k in points:
        root = tmp_path / f"kill-{k}"
        site = root / "site"
        shutil.copytree(old_site, site)
        _assert_killed(
            _run(k, root, "site", "build", "--archive", str(archive), "--out", str(site))
        )
        now = _digests(site)
        assert now in (old, new), f"kill at write {k} left a site that is neither old nor new"
        assert _digests(archive) == archive_before
        again = _run(-1, root, "site", "build", "--archive", str(archive), "--out", str(site))
        assert again.returncode == 0, (k, again.stderr)
        assert _digests(site) == new
        assert sorted(p.name for p in root.iterdir()) == ["site"], "a build folder was left"


def test_audit_killed_while_writing_leaves_no_bundle_and_the_next_run_succeeds(tmp_path):
    config = write_demo_project(tmp_path / "project", 800, seed=3)
    config.write_text(light(config.read_text()), encoding="utf-8")
    probe = tmp_path / "probe"
    probe.mkdir()
    out = ["audit", str(config), "--quiet", "--release", "2026.1", "--out"]
    points = _kill_points(probe, *out, str(probe / "bundle"), limit=3, least=3)
    for k in points:
        root = tmp_path / f"kill-{k}"
        root.mkdir()
        _assert_killed(_run(k, root, *out, str(root / "bundle")))
        bundle = root / "bundle"
        if bundle.exists() and any(bundle.iterdir()):  # killed after the commit rename
            assert bundle_findings(bundle) == [], k
            assert sorted(_digests(bundle)) == sorted(_digests(probe / "bundle"))
            continue
        again = _run(-1, root, *out, str(bundle))
        assert again.returncode == 0, (k, again.stderr)
        assert sorted(p.name for p in root.iterdir()) == ["bundle"], "a partial folder was left"
        # the same files as an uninterrupted run (analysis.json differs: it records --out)
        assert sorted(_digests(bundle)) == sorted(_digests(probe / "bundle"))
        assert bundle_findings(bundle) == []
