"""An interrupted ``signoff``: killed with SIGKILL (see ``killer.py``) just before the
rename or exchange that commits the new ``signoffs`` folder, just after it, and before
the write that comes before it, the release keeps its old sign-offs or gains the new one
whole, the archive verifies, the bundle's files are untouched, and the same command run
again records the sign-off once. Three points, not every write: each run starts a Python
that imports the library (seconds), and the writes before the commit all go to the
hidden work folder, which the tests of :func:`staging` cover. That SIGKILL runs no
clean-up of the process is POSIX (signal(7): SIGKILL cannot be caught or ignored)."""

from __future__ import annotations

import hashlib
import shutil
from pathlib import Path

import pytest

from tests.faults.test_interrupted import _assert_killed, _run
from topoaudit.report.archive import sign_off, signoffs, verify_archive

MODEL = "meter-failure"
ARGS = ["--reviewer", "C. Reviewer", "--decision", "rejected", "--note", "Not this one."]


def _bundle_digests(folder: Path) -> dict[str, str]:
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and not p.relative_to(folder).as_posix().startswith(("signoffs", "."))
    }


def _commit_points(root: Path, folder: Path) -> list[int]:
    """The write before the commit, the commit, the write after it (1-based write counts)."""
    log = root / "writes.log"
    done = _run(0, root, "signoff", str(folder), *ARGS, log=log)
    assert done.returncode == 0, done.stderr
    events = [line.split("\t") for line in log.read_text().splitlines()]
    log.unlink()
    commit = [
        int(i)
        for i, event, path in events
        if event in ("os.rename", "topoaudit.exchange") and path.endswith("/signoffs")
    ]
    assert len(commit) == 1, events
    assert int(events[-1][0]) > commit[0], "no write after the commit: nothing to clean up?"
    return [commit[0] - 1, commit[0], commit[0] + 1]


def _archive(fixture_archive, root: Path, signed_before: bool) -> Path:
    archive = root / "archive"
    shutil.copytree(fixture_archive[2], archive)
    if signed_before:  # the commit is then an exchange of two folders, not a rename
        sign_off(archive / MODEL / "2026.2", reviewer="A", decision="approved", note="First.")
    return archive


@pytest.mark.parametrize("signed_before", [False, True], ids=["first sign-off", "second"])
def test_signoff_killed_anywhere_keeps_the_old_records_or_adds_the_new_one_whole(
    fixture_archive, tmp_path, monkeypatch, signed_before
):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")  # as killer runs get it
    probe = tmp_path / "probe"
    probe.mkdir()
    folder = _archive(fixture_archive, probe, signed_before) / MODEL / "2026.2"
    points = _commit_points(probe, folder)
    whole = signoffs(folder)
    for k in points:
        root = tmp_path / f"kill-{k}"
        root.mkdir()
        folder = _archive(fixture_archive, root, signed_before) / MODEL / "2026.2"
        before, files = signoffs(folder), _bundle_digests(folder)
        _assert_killed(_run(k, root, "signoff", str(folder), *ARGS))
        v = verify_archive(root / "archive")
        assert v.ok, (k, v.report())
        assert signoffs(folder) in (before, whole), f"kill at write {k} left a part"
        again = _run(-1, root, "signoff", str(folder), *ARGS)
        assert again.returncode == 0, (k, again.stderr)
        assert signoffs(folder) == whole
        assert verify_archive(root / "archive").findings == []
        assert not list(folder.glob(".signoffs.partial-*")), k
        assert _bundle_digests(folder) == files
