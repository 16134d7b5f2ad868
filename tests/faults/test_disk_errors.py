"""Failures of the disk and of the tools underneath: the archive and the site survive.

ENOSPC ("No space left on device") is the POSIX error a full file system returns to a
write (errno(3)); it is raised here by patching the copy and write functions, since a
real full disk cannot be made safely on a shared test machine.
"""

from __future__ import annotations

import errno
import hashlib
import shutil

import pytest

from topoaudit.cli import main
from topoaudit.report import archive as archive_mod
from topoaudit.report import site as site_mod
from topoaudit.report.archive import ArchiveError, list_releases, verify_archive

MODEL = "meter-failure"


def _digests(folder):
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and p.name != "sitemap.xml.gz"
    }


@pytest.fixture
def archive(fixture_archive, tmp_path):
    copy = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], copy)
    return copy


def _full_disk_after(n, real):
    calls = {"n": 0}

    def copy(src, dst, *args, **kwargs):
        calls["n"] += 1
        if calls["n"] > n:
            raise OSError(errno.ENOSPC, "No space left on device", str(dst))
        return real(src, dst, *args, **kwargs)

    return copy


def test_a_full_disk_during_publish_changes_nothing(archive, fixture_archive, monkeypatch, capsys):
    before = _digests(archive)
    monkeypatch.setattr(archive_mod.shutil, "copyfile", _full_disk_after(3, shutil.copyfile))
    bundle = fixture_archive[1]["2026.2"]
    code = main(["publish", str(bundle), "--archive", str(archive), "--replace"])
    assert code == 2
    err = capsys.readouterr().err
    assert "No space left on device" in err and str(archive / MODEL) in err
    assert _digests(archive) == before
    assert not list((archive / MODEL).glob(".incoming-*"))


def test_a_failure_after_the_exchange_leaves_the_old_bundle_pending_not_lost(
    archive, fixture_archive, monkeypatch
):
    old = (archive / MODEL / "2026.2" / "checksums.json").read_text()

    def fail(*args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device", str(archive / MODEL / ".history"))

    monkeypatch.setattr(archive_mod, "_file_in_history", fail)
    with pytest.raises(OSError, match="No space left"):
        archive_mod.publish(fixture_archive[1]["2026.2"], archive, replace=True)
    v = verify_archive(archive)
    assert v.ok, v.report()
    assert [f.kind for f in v.findings] == ["pending"]
    monkeypatch.undo()
    archive_mod.publish(fixture_archive[1]["2026.1"], archive, replace=True)
    kept = archive / MODEL / ".history" / "2026.2" / "1" / "checksums.json"
    assert kept.read_text() == old
    assert verify_archive(archive).ok


def test_mkdocs_failing_keeps_the_old_site_and_leaves_no_build_folder(
    archive, tmp_path, monkeypatch
):
    site = site_mod.build_site(archive, tmp_path / "site")
    before = _digests(site)

    def broken(config):
        raise RuntimeError("theme template missing")

    import mkdocs.commands.build

    monkeypatch.setattr(mkdocs.commands.build, "build", broken)
    with pytest.raises(ArchiveError, match=r"mkdocs could not build the site.*theme template"):
        site_mod.build_site(archive, site)
    assert _digests(site) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["archive", "site"]


def test_a_full_disk_during_site_build_keeps_the_old_site(archive, tmp_path, monkeypatch, capsys):
    site = site_mod.build_site(archive, tmp_path / "site")
    before = _digests(site)
    monkeypatch.setattr(site_mod.shutil, "copyfile", _full_disk_after(0, shutil.copyfile))
    code = main(["site", "build", "--archive", str(archive), "--out", str(site)])
    assert code == 2
    assert "No space left on device" in capsys.readouterr().err
    assert _digests(site) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["archive", "site"]


def test_a_damaged_publication_record_is_named(archive):
    (archive / MODEL / "2026.1" / "published.json").write_text("{not json")
    with pytest.raises(ArchiveError, match=r"2026.1/published.json: cannot be read.*verify"):
        list_releases(archive, MODEL)
    v = verify_archive(archive)
    assert ("changed", f"{MODEL}/2026.1/published.json") in [(f.kind, f.path) for f in v.problems]


def test_audit_refuses_a_linked_output_folder(tmp_path, capsys):
    real = tmp_path / "real"
    real.mkdir()
    (tmp_path / "link").symlink_to(real)
    code = main(["audit", "missing.toml", "--out", str(tmp_path / "link")])
    assert code == 2
    assert "is a symbolic link" in capsys.readouterr().err
