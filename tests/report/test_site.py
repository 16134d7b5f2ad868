"""The archive and the site: immutable releases, reproducible builds, offline pages."""

from __future__ import annotations

import hashlib
import re
import shutil
import subprocess
import sys

import pytest

from topoaudit.cli import main
from topoaudit.report.archive import write_checksums
from topoaudit.report.site import ArchiveError, build_site, list_releases, publish


def _tree_digest(folder):
    h = hashlib.sha256()
    for path in sorted(p for p in folder.rglob("*") if p.is_file()):
        if path.name in ("sitemap.xml.gz",):  # gzip stores a timestamp of its own
            continue
        h.update(str(path.relative_to(folder)).encode() + b"\0" + path.read_bytes())
    return h.hexdigest()


def _changed_copy(bundle, folder):
    """A bundle of the same release whose page differs (checksums renewed)."""
    copy = folder / "changed"
    shutil.copytree(bundle, copy)
    (copy / "page.md").write_text((copy / "page.md").read_text() + "\nA later note.\n")
    write_checksums(copy)
    return copy


def test_publishing_over_a_release_is_refused_and_changes_nothing(fixture_archive, tmp_path):
    _, bundles, archive = fixture_archive
    before = _tree_digest(archive)
    with pytest.raises(ArchiveError, match=r"already published; pass --replace"):
        publish(_changed_copy(bundles["2026.2"], tmp_path), archive)
    assert _tree_digest(archive) == before


def test_publishing_the_same_bundle_again_changes_nothing(fixture_archive):
    _, bundles, archive = fixture_archive
    before = _tree_digest(archive)
    assert publish(bundles["2026.2"], archive) == archive / "meter-failure" / "2026.2"
    assert _tree_digest(archive) == before


def test_replacing_a_release_keeps_the_old_bundle_in_history(fixture_archive, tmp_path):
    _, bundles, _ = fixture_archive
    archive = tmp_path / "archive"
    publish(bundles["2026.1"], archive)
    publish(bundles["2026.1"], archive, replace=True)
    history = archive / "meter-failure" / ".history" / "2026.1" / "1"
    assert (history / "analysis.json").exists()
    assert [r.release for r in list_releases(archive, "meter-failure")] == ["2026.1"]


def test_releases_are_listed_newest_first(fixture_archive):
    _, _, archive = fixture_archive
    assert [r.release for r in list_releases(archive, "meter-failure")] == ["2026.2", "2026.1"]


def test_rebuilding_the_same_archive_gives_byte_identical_pages(
    fixture_archive, tmp_path, monkeypatch
):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    _, _, archive = fixture_archive
    a = build_site(archive, tmp_path / "a")
    b = build_site(archive, tmp_path / "b")
    assert _tree_digest(a) == _tree_digest(b)


def test_site_has_home_history_release_and_comparison_pages(fixture_archive, tmp_path):
    _, _, archive = fixture_archive
    site = build_site(archive, tmp_path / "site")
    for page in [
        "index.html",
        "meter-failure/index.html",
        "meter-failure/2026.1/index.html",
        "meter-failure/2026.2/index.html",
        "meter-failure/compare/2026.1-to-2026.2/index.html",
    ]:
        assert (site / page).exists(), page
    history = (site / "meter-failure/index.html").read_text()
    assert history.index("2026.2") < history.index("2026.1")


def test_built_pages_load_nothing_from_the_network(fixture_archive, tmp_path):
    _, _, archive = fixture_archive
    site = build_site(archive, tmp_path / "site")
    for page in site.rglob("*.html"):
        html = page.read_text()
        assert not re.search(r'<script[^>]+src="https?://', html), page
        assert not re.search(r'<link[^>]+href="https?://[^"]+\.css', html), page
        assert not re.search(r'<img[^>]+src="https?://', html), page
    assert (site / "assets" / "vega-bundle.js").stat().st_size > 100_000


def test_diff_prints_deterministic_markdown(fixture_archive, capsys):
    _, bundles, _ = fixture_archive
    args = ["diff", str(bundles["2026.1"]), str(bundles["2026.2"])]
    assert main(args) == 0
    first = capsys.readouterr().out
    assert main(args) == 0
    assert capsys.readouterr().out == first
    assert first.startswith("## meter\\-failure: release 2026.2 against 2026.1")
    # the regions followed by tracked id, each with what became of it
    assert "## Weak regions of release 2026.1 under 2026.2" in first
    assert "## Weak regions of release 2026.2" in first and "| T1 (W1) |" in first
    assert "| error rate |" in first and "## Cautions" in first


def test_cli_site_build_and_publish_refusal(fixture_archive, tmp_path, capsys):
    _, bundles, archive = fixture_archive
    changed = _changed_copy(bundles["2026.2"], tmp_path)
    assert main(["publish", str(changed), "--archive", str(archive)]) == 2
    assert "already published" in capsys.readouterr().err
    out = tmp_path / "site"
    assert main(["site", "build", "--archive", str(archive), "--out", str(out)]) == 0
    assert f"site built: {out / 'index.html'}" in capsys.readouterr().out


def test_module_runs_as_a_command():
    done = subprocess.run(
        [sys.executable, "-m", "topoaudit.cli", "--help"],
        capture_output=True,
        text=True,
        check=True,
    )
    assert "publish" in done.stdout and "diff" in done.stdout


def test_the_vega_scripts_are_bundled_once_per_vl_convert_version(tmp_path, monkeypatch):
    import vl_convert as vlc

    from topoaudit.report.site import vega_bundle

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    fresh = vlc.javascript_bundle()  # the reference: vl-convert's own bundle
    assert vega_bundle() == fresh
    cached = tmp_path / "cache" / "topoaudit" / f"vega-bundle-{vlc.__version__}.js"
    assert cached.read_text(encoding="utf-8") == fresh
    assert [p.name for p in cached.parent.iterdir()] == [cached.name]  # no partial file left

    def no_bundling():
        raise AssertionError("bundled again although the cache holds this version")

    monkeypatch.setattr(vlc, "javascript_bundle", no_bundling)
    assert vega_bundle() == fresh


def test_a_cache_folder_that_cannot_be_written_only_costs_the_bundling(tmp_path, monkeypatch):
    import vl_convert as vlc

    from topoaudit.report.site import vega_bundle

    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the cache folder would go", encoding="utf-8")
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocker))
    assert vega_bundle() == vlc.javascript_bundle()
    assert blocker.read_text(encoding="utf-8") == "a file where the cache folder would go"
