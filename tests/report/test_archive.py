"""Archive integrity: checksums, ``archive verify``, safe names and paths, recovery.

Checksums are SHA-256 (FIPS 180-4); each expected digest below is recomputed here with
``hashlib``, the standard library's implementation, not taken from the code under test.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil

import pytest

from topoaudit.cli import main
from topoaudit.report import archive as archive_mod
from topoaudit.report.archive import (
    CHECKSUMS,
    ArchiveError,
    exchange_folders,
    publish,
    verify_archive,
)
from topoaudit.report.site import SITE_MARKER, build_site

MODEL = "meter-failure"


@pytest.fixture
def archive(fixture_archive, tmp_path):
    """A private copy of the two-release fixture archive, free to damage."""
    copy = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], copy, symlinks=True)
    return copy


@pytest.fixture
def bundles(fixture_archive):
    return fixture_archive[1]


def _kinds(v):
    return sorted((f.kind, f.path) for f in v.findings)


def _listing(folder):
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def test_each_published_bundle_records_the_sha256_of_every_file(archive):
    bundle = archive / MODEL / "2026.1"
    recorded = json.loads((bundle / CHECKSUMS).read_text())
    assert recorded["algorithm"] == "sha256"
    files = sorted(
        p.relative_to(bundle).as_posix()
        for p in bundle.rglob("*")
        if p.is_file() and p.name != CHECKSUMS
    )
    assert sorted(recorded["files"]) == files
    assert "analysis.json" in files and "published.json" in files and "page.md" in files
    for name, digest in recorded["files"].items():
        assert hashlib.sha256((bundle / name).read_bytes()).hexdigest() == digest


def test_an_untouched_archive_verifies(archive):
    v = verify_archive(archive)
    assert v.ok and v.findings == []
    assert v.bundles == [f"{MODEL}/2026.1", f"{MODEL}/2026.2"]
    assert v.report().endswith("no file changed, went missing or was added\n")


def test_verify_reports_changed_missing_and_added_files(archive):
    rel = archive / MODEL / "2026.2"
    page = rel / "page.md"
    page.write_text(page.read_text() + "\nA sentence nobody reviewed.\n")
    chart = next((rel / "charts").glob("*.svg"))
    chart.unlink()
    (rel / "notes.txt").write_text("added by hand")
    v = verify_archive(archive)
    assert not v.ok
    assert _kinds(v) == sorted(
        [
            ("changed", f"{MODEL}/2026.2/page.md"),
            ("missing", f"{MODEL}/2026.2/charts/{chart.name}"),
            ("added", f"{MODEL}/2026.2/notes.txt"),
        ]
    )


def test_verify_reports_a_whole_bundle_removed_by_its_publication_number(archive):
    shutil.rmtree(archive / MODEL / "2026.1")
    v = verify_archive(archive)
    assert [(f.kind, f.path) for f in v.problems] == [("sequence", MODEL)]
    assert "[1] missing" in v.problems[0].detail


def test_verify_reports_links_and_stray_files(archive, tmp_path):
    outside = tmp_path / "outside.txt"
    outside.write_text("not part of the archive")
    os.symlink(outside, archive / MODEL / "2026.1" / "charts" / "link.svg")
    (archive / "README.txt").write_text("stray")
    v = verify_archive(archive)
    assert ("link", f"{MODEL}/2026.1") in [(f.kind, f.path) for f in v.problems]
    assert ("added", "README.txt") in [(f.kind, f.path) for f in v.problems]


def test_replacing_keeps_the_old_bundle_and_its_checksums_in_history(archive, bundles):
    old_digests = json.loads((archive / MODEL / "2026.2" / CHECKSUMS).read_text())
    publish(bundles["2026.2"], archive, replace=True)
    kept = archive / MODEL / ".history" / "2026.2" / "1"
    assert json.loads((kept / CHECKSUMS).read_text()) == old_digests
    v = verify_archive(archive)
    assert v.ok, v.report()
    assert f"{MODEL}/.history/2026.2/1" in v.bundles
    seq = json.loads((archive / MODEL / "2026.2" / "published.json").read_text())["sequence"]
    assert seq == 3  # numbers are never reused: 1 and 2 are taken, one of them in history


def test_a_bundle_changed_after_it_was_written_is_not_published(archive, bundles, tmp_path):
    bundle = tmp_path / "bundle"
    shutil.copytree(bundles["2026.2"], bundle)
    (bundle / "analysis.json").write_text(
        (bundle / "analysis.json").read_text().replace('"weak_regions"', '"weak_regions" ', 1)
    )
    before = _listing(archive)
    with pytest.raises(ArchiveError, match=r"analysis.json.*changed after it was written"):
        publish(bundle, archive, replace=True)
    assert _listing(archive) == before


def test_a_bundle_holding_a_link_is_refused_and_nothing_is_copied(archive, bundles, tmp_path):
    secret = tmp_path / "secret.txt"
    secret.write_text("outside the bundle")
    bundle = tmp_path / "bundle"
    shutil.copytree(bundles["2026.2"], bundle)
    os.symlink(secret, bundle / "charts" / "extra.svg")
    before = _listing(archive)
    with pytest.raises(ArchiveError, match=r"extra.svg: is a symbolic link"):
        publish(bundle, archive, replace=True)
    assert _listing(archive) == before
    assert not any(
        "outside the bundle" in p.read_text(errors="ignore")
        for p in archive.rglob("*")
        if p.is_file()
    )


@pytest.mark.parametrize(
    "name",
    ["../escape", "/etc/cron.d/x", "a/b", "", ".hidden", "x" * 65, "..", "a..b", "a\\b", "é"],
)
def test_unsafe_model_and_release_names_are_refused(bundles, tmp_path, name):
    for key in ("model", "release"):
        bundle = tmp_path / f"bundle-{key}"
        shutil.copytree(bundles["2026.1"], bundle)
        (bundle / CHECKSUMS).unlink()
        doc = json.loads((bundle / "analysis.json").read_text())
        doc[key] = name
        (bundle / "analysis.json").write_text(json.dumps(doc))
        with pytest.raises(ArchiveError, match=r"names must match \^\[A-Za-z0-9\]"):
            publish(bundle, tmp_path / "arch" / "inner")
        shutil.rmtree(bundle)
    assert not (tmp_path / "arch").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == []


def test_a_linked_model_folder_in_the_archive_is_refused(archive, bundles, tmp_path):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    shutil.move(archive / MODEL, elsewhere / MODEL)
    os.symlink(elsewhere / MODEL, archive / MODEL)
    with pytest.raises(ArchiveError, match=r"is a symbolic link"):
        publish(bundles["2026.2"], archive, replace=True)
    with pytest.raises(ArchiveError, match=r"is a symbolic link"):
        build_site(archive, tmp_path / "site")
    assert not (tmp_path / "site").exists()
    assert sorted(p.name for p in (elsewhere / MODEL).iterdir()) == ["2026.1", "2026.2"]


def test_site_build_refuses_a_changed_bundle_and_keeps_the_old_site(archive, tmp_path):
    site = build_site(archive, tmp_path / "site")
    before = {p: p.read_bytes() for p in site.rglob("*") if p.is_file()}
    (archive / MODEL / "2026.1" / "page.md").write_text("<script>alert(1)</script>\n")
    with pytest.raises(ArchiveError, match=r"page.md.*changed after it was written"):
        build_site(archive, site)
    assert {p: p.read_bytes() for p in site.rglob("*") if p.is_file()} == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_site_build_never_replaces_a_folder_it_did_not_build(archive, tmp_path):
    docs = tmp_path / "documents"
    docs.mkdir()
    (docs / "thesis.txt").write_text("keep me")
    with pytest.raises(ArchiveError, match=rf"no {SITE_MARKER} file"):
        build_site(archive, docs)
    assert (docs / "thesis.txt").read_text() == "keep me"
    with pytest.raises(ArchiveError, match=r"may not be, hold or lie inside the archive"):
        build_site(archive, archive)
    with pytest.raises(ArchiveError, match=r"may not be, hold or lie inside the archive"):
        build_site(archive, archive / MODEL / "site")
    assert verify_archive(archive).ok
    link = tmp_path / "site-link"
    os.symlink(docs, link)
    with pytest.raises(ArchiveError, match=r"site folder is a symbolic link"):
        build_site(archive, link)


def test_cli_archive_verify_exit_status(archive, capsys):
    assert main(["archive", "verify", str(archive)]) == 0
    out = capsys.readouterr().out
    assert "2 bundles checked" in out and "no file changed" in out
    (archive / MODEL / "2026.1" / "analysis.json").write_text("{}")
    assert main(["archive", "verify", str(archive)]) == 1
    out = capsys.readouterr().out
    assert f"changed    {MODEL}/2026.1/analysis.json" in out and "1 problem found" in out
    assert main(["archive", "verify", str(archive / "nope")]) == 2
    assert "no such archive folder" in capsys.readouterr().err


def _without_renameat2(monkeypatch):
    class NoRenameat2:
        def __init__(self, *args, **kwargs):
            pass

    monkeypatch.setattr(archive_mod.ctypes, "CDLL", NoRenameat2)


def test_exchange_swaps_two_folders_with_or_without_renameat2(tmp_path, monkeypatch):
    a, b = tmp_path / "a", tmp_path / "b"
    for d, text in ((a, "A"), (b, "B")):
        d.mkdir()
        (d / "f").write_text(text)
    exchange_folders(a, b)
    assert (a / "f").read_text() == "B" and (b / "f").read_text() == "A"
    _without_renameat2(monkeypatch)
    exchange_folders(a, b)
    assert (a / "f").read_text() == "A" and (b / "f").read_text() == "B"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a", "b"]


def test_replace_without_renameat2_also_keeps_history(archive, bundles, monkeypatch):
    _without_renameat2(monkeypatch)
    publish(bundles["2026.1"], archive, replace=True)
    assert (archive / MODEL / ".history" / "2026.1" / "1" / CHECKSUMS).exists()
    assert verify_archive(archive).ok


def _interrupted_replace(archive, bundles, tmp_path, state):
    """Recreate on disk what a replace killed in the fallback exchange leaves behind."""
    model = archive / MODEL
    new = tmp_path / "new"
    shutil.copytree(bundles["2026.1"], new)
    (new / "published.json").write_text('{"published":"x","sequence":3}')
    archive_mod.write_checksums(new)
    tmp = model / ".incoming-2026.1-abc123"
    tmp.mkdir()
    intent = {"release": "2026.1", "new": archive_mod._checksums_digest(new)}
    (tmp / "intent.json").write_text(json.dumps(intent))
    os.rename(model / "2026.1", tmp / "bundle.swap")  # first rename done
    if state == "new in place":
        os.rename(new, model / "2026.1")  # second rename done, third not
    else:
        os.rename(new, tmp / "bundle")
    return tmp


@pytest.mark.parametrize("state", ["old parked", "new in place"])
def test_the_next_publish_repairs_an_interrupted_fallback_exchange(
    archive, bundles, tmp_path, state
):
    original = json.loads((archive / MODEL / "2026.1" / CHECKSUMS).read_text())
    tmp = _interrupted_replace(archive, bundles, tmp_path, state)
    v = verify_archive(archive)
    assert ("pending", f"{MODEL}/{tmp.name}") in [(f.kind, f.path) for f in v.findings]
    if state == "new in place":
        assert v.ok, v.report()
    publish(bundles["2026.2"], archive, replace=True)
    assert not tmp.exists()
    assert verify_archive(archive).ok
    kept = [json.loads(p.read_text()) for p in (archive / MODEL).rglob(CHECKSUMS)]
    assert original in kept  # the first 2026.1 bundle survived, in place or in history
