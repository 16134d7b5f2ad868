"""Sign-offs: a reviewer's decision recorded beside a published bundle, chained and checked.

Digests are SHA-256 (FIPS 180-4), recomputed here with ``hashlib``; times are UTC
timestamps in the RFC 3339 form ``YYYY-MM-DDTHH:MM:SSZ`` (RFC 3339, section 5.6), read
back with ``datetime.fromisoformat``. Which characters are control characters is the
Unicode Standard's general category Cc (section 4.5), plus the line and paragraph
separators and the bidirectional controls (Unicode Standard Annex 9).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import shutil
from pathlib import Path

import pytest

from topoaudit.cli import main
from topoaudit.errors import ParameterError
from topoaudit.report.archive import (
    CHECKSUMS,
    ArchiveError,
    bundle_findings,
    list_releases,
    publish,
    sign_off,
    signoffs,
    verify_archive,
)
from topoaudit.report.site import _release_table, build_site

MODEL = "meter-failure"
EPOCH = "1767225600"  # 2026-01-01T00:00:00Z


@pytest.fixture
def archive(fixture_archive, tmp_path, monkeypatch):
    """A private copy of the two-release fixture archive, and a fixed clock."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    copy = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], copy, symlinks=True)
    return copy


def _sign(folder: Path, reviewer="A. Reviewer", decision="approved", note="Fine for use."):
    return sign_off(folder, reviewer=reviewer, decision=decision, note=note)


def _digests(folder: Path) -> dict[str, str]:
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def _signed_twice(archive: Path) -> Path:
    folder = archive / MODEL / "2026.2"
    _sign(folder, "A. Reviewer", "rejected", "Large-bore meters are under-scored.")
    _sign(folder, "B. Reviewer", "approved-with-conditions", "Monitor large-bore meters.")
    return folder


def _sign_off_problems(v) -> list[tuple[str, str]]:
    return [(f.path, f.detail) for f in v.findings if f.kind == "sign-off"]


# -- recording ---------------------------------------------------------------------------


def test_two_sign_offs_are_chained_to_each_other_and_to_the_bundle(archive):
    folder = _signed_twice(archive)
    first, second = signoffs(folder)  # newest last
    assert (first.number, first.reviewer, first.decision) == (1, "A. Reviewer", "rejected")
    assert (second.number, second.reviewer) == (2, "B. Reviewer")
    assert second.decision_words == "approved with conditions"
    assert (first.model, first.release) == (MODEL, "2026.2")
    bundle = hashlib.sha256((folder / CHECKSUMS).read_bytes()).hexdigest()
    assert first.bundle == second.bundle == bundle
    assert first.previous is None and second.previous == first.digest
    for n, s in ((1, first), (2, second)):
        stored = json.loads((folder / "signoffs" / f"{n:04d}.json").read_text())
        body = {k: v for k, v in stored.items() if k != "digest"}
        text = json.dumps(body, sort_keys=True, indent=1, ensure_ascii=False) + "\n"
        assert stored["digest"] == s.digest == hashlib.sha256(text.encode()).hexdigest()
    chain = json.loads((folder / "signoffs" / "chain.json").read_text())
    assert chain == {"records": 2, "newest": second.digest}
    v = verify_archive(archive)
    assert v.ok, v.report()
    assert v.report().startswith(f"archive {archive}: 2 bundles, 2 sign-offs checked")


def test_the_time_is_utc_in_rfc_3339_from_source_date_epoch(archive, monkeypatch):
    s = _sign(archive / MODEL / "2026.2")
    assert s.time == "2026-01-01T00:00:00Z" and s.date == "2026-01-01"
    monkeypatch.delenv("SOURCE_DATE_EPOCH")
    later = _sign(archive / MODEL / "2026.2", note="Checked again.")
    when = dt.datetime.fromisoformat(later.time)
    assert later.time.endswith("Z") and when.utcoffset() == dt.timedelta(0)
    assert abs(dt.datetime.now(dt.UTC) - when) < dt.timedelta(minutes=5)


def test_a_sign_off_leaves_every_file_of_the_bundle_byte_identical(archive):
    folder = archive / MODEL / "2026.2"
    before = _digests(folder)
    _signed_twice(archive)
    after = _digests(folder)
    assert {k: v for k, v in after.items() if not k.startswith("signoffs/")} == before
    assert sorted(k for k in after if k not in before) == [
        "signoffs/0001.json",
        "signoffs/0002.json",
        "signoffs/chain.json",
    ]
    assert bundle_findings(folder) == []


def test_the_same_sign_off_again_is_recorded_once(archive):
    folder = archive / MODEL / "2026.2"
    first = _sign(folder)
    assert _sign(folder) == first
    assert [s.number for s in signoffs(folder)] == [1]
    _sign(folder, note="A second look.")
    assert [s.number for s in signoffs(folder)] == [1, 2]


def test_an_interrupted_sign_off_is_a_leftover_that_the_next_one_removes(archive):
    folder = archive / MODEL / "2026.2"
    first = _sign(folder)
    work = folder / ".signoffs.partial-abc123"
    (work / "signoffs").mkdir(parents=True)
    (work / "signoffs" / "0001.json").write_text("{}")
    v = verify_archive(archive)
    assert v.ok, v.report()
    assert [(f.kind, f.path) for f in v.findings] == [
        ("leftover", f"{MODEL}/2026.2/.signoffs.partial-abc123")
    ]
    assert bundle_findings(folder) == []
    assert _sign(folder) == first  # run again after it was killed: recorded once, swept
    assert not work.exists()
    assert verify_archive(archive).findings == []


def test_a_release_never_signed_has_no_sign_offs(archive):
    assert signoffs(archive / MODEL / "2026.1") == []


def test_publishing_the_same_bundle_again_keeps_the_sign_offs(archive, fixture_archive):
    folder = _signed_twice(archive)
    before = _digests(folder)
    assert publish(fixture_archive[1]["2026.2"], archive) == folder
    assert _digests(folder) == before
    assert verify_archive(archive).ok


def test_a_release_copied_out_of_the_archive_is_published_without_its_sign_offs(archive, tmp_path):
    _signed_twice(archive)
    other = tmp_path / "other-archive"
    dest = publish(archive / MODEL / "2026.2", other)
    assert not (dest / "signoffs").exists()
    assert signoffs(dest) == []
    assert verify_archive(other).ok


# -- replacing a release ------------------------------------------------------------------


def test_replace_moves_the_sign_offs_with_the_old_bundle_into_history(archive, fixture_archive):
    folder = archive / MODEL / "2026.1"
    signed = _sign(folder, decision="rejected", note="Battery pocket not fixed.")
    old_records = _digests(folder / "signoffs")
    publish(fixture_archive[1]["2026.1"], archive, replace=True)
    old = archive / MODEL / ".history" / "2026.1" / "1"
    assert _digests(old / "signoffs") == old_records
    assert signoffs(old) == [signed]
    assert signed.bundle == hashlib.sha256((old / CHECKSUMS).read_bytes()).hexdigest()
    assert not (folder / "signoffs").exists() and signoffs(folder) == []
    v = verify_archive(archive)
    assert v.ok and v.signoffs == 1, v.report()
    page = _history_table(archive)
    assert "rejected" not in page and page.count("not signed off") == 2


def test_the_new_bundle_of_a_replaced_release_is_signed_on_its_own(archive, fixture_archive):
    folder = archive / MODEL / "2026.1"
    _sign(folder, decision="rejected", note="Battery pocket not fixed.")
    publish(fixture_archive[1]["2026.1"], archive, replace=True)
    s = _sign(folder, note="The new bundle reads well.")
    assert (s.number, s.previous) == (1, None)
    assert verify_archive(archive).ok


def test_old_sign_offs_moved_onto_the_new_bundle_are_reported(archive, fixture_archive):
    folder = archive / MODEL / "2026.1"
    _sign(folder, note="Signed for the first bundle.")
    publish(fixture_archive[1]["2026.1"], archive, replace=True)
    old = archive / MODEL / ".history" / "2026.1" / "1" / "signoffs"
    shutil.copytree(old, folder / "signoffs")
    found = _sign_off_problems(verify_archive(archive))
    assert any(
        p == f"{MODEL}/2026.1/signoffs/0001.json" and "another bundle" in d for p, d in found
    ), found
    with pytest.raises(ArchiveError, match=r"0001\.json: it names another bundle"):
        signoffs(folder)


# -- damage that verify reports ------------------------------------------------------------


def _edit_note(folder: Path) -> None:
    path = folder / "signoffs" / "0001.json"
    doc = json.loads(path.read_text())
    doc["decision"] = "approved"  # was rejected; the digest is left as it was
    path.write_text(json.dumps(doc, sort_keys=True, indent=1) + "\n")


def _edit_and_redigest(folder: Path) -> None:
    path = folder / "signoffs" / "0001.json"
    doc = json.loads(path.read_text())
    doc["note"] = "Nothing to see."
    body = {k: v for k, v in doc.items() if k != "digest"}
    text = json.dumps(body, sort_keys=True, indent=1, ensure_ascii=False) + "\n"
    doc["digest"] = hashlib.sha256(text.encode()).hexdigest()
    path.write_text(json.dumps(doc, sort_keys=True, indent=1) + "\n")


def _swap(folder: Path) -> None:
    a, b = folder / "signoffs" / "0001.json", folder / "signoffs" / "0002.json"
    text = a.read_text()
    a.write_text(b.read_text())
    b.write_text(text)


def _swap_back_numbers(folder: Path) -> None:
    """Reorder and renumber both records, each digest recomputed to match."""
    for name, number in (("0001.json", 2), ("0002.json", 1)):
        path = folder / "signoffs" / name
        doc = json.loads(path.read_text())
        doc["number"] = number
        body = {k: v for k, v in doc.items() if k != "digest"}
        text = json.dumps(body, sort_keys=True, indent=1, ensure_ascii=False) + "\n"
        doc["digest"] = hashlib.sha256(text.encode()).hexdigest()
        path.write_text(json.dumps(doc, sort_keys=True, indent=1) + "\n")
    _swap(folder)


DAMAGE = {
    "edited": (_edit_note, "0001.json", "was edited after it was written"),
    "edited, digest renewed": (_edit_and_redigest, "0002.json", "does not name the digest"),
    "first removed": (lambda f: (f / "signoffs/0001.json").unlink(), "0001.json", "removed"),
    "newest removed": (
        lambda f: (f / "signoffs/0002.json").unlink(),
        "chain.json",
        "the newest was removed",
    ),
    "reordered": (_swap, "0001.json", "renamed or reordered"),
    "reordered, renumbered": (_swap_back_numbers, "0001.json", "the first sign-off names"),
    "chain removed": (lambda f: (f / "signoffs/chain.json").unlink(), "chain.json", "missing"),
    "file added": (
        lambda f: (f / "signoffs/notes.txt").write_text("x"),
        "notes.txt",
        "not a sign-off record",
    ),
    "unreadable": (
        lambda f: (f / "signoffs/0002.json").write_text("{"),
        "0002.json",
        "cannot be read",
    ),
}


@pytest.mark.parametrize("damage", list(DAMAGE))
def test_verify_reports_a_damaged_sign_off_record(archive, damage):
    folder = _signed_twice(archive)
    change, where, words = DAMAGE[damage]
    change(folder)
    v = verify_archive(archive)
    assert not v.ok
    found = _sign_off_problems(v)
    assert any(p == f"{MODEL}/2026.2/signoffs/{where}" and words in d for p, d in found), found
    assert "sign-off " + f"{MODEL}/2026.2/signoffs/{where}" in " ".join(v.report().split())
    with pytest.raises(ArchiveError, match=r"cannot be trusted\. Run topoaudit archive verify"):
        signoffs(folder)
    with pytest.raises(ArchiveError, match="cannot be trusted"):
        _sign(folder, note="One more.")


def test_the_control_an_undamaged_pair_of_sign_offs_is_not_reported(archive):
    _signed_twice(archive)
    assert _sign_off_problems(verify_archive(archive)) == []


def test_a_sign_off_of_another_release_copied_in_is_reported(archive):
    _signed_twice(archive)
    other = archive / MODEL / "2026.1"
    shutil.copytree(archive / MODEL / "2026.2" / "signoffs", other / "signoffs")
    found = _sign_off_problems(verify_archive(archive))
    assert [p for p, d in found if "another bundle" in d] == [
        f"{MODEL}/2026.1/signoffs/0001.json",
        f"{MODEL}/2026.1/signoffs/0002.json",
    ]


def test_a_bundle_changed_after_its_sign_off_is_reported_by_its_files_not_its_sign_offs(archive):
    folder = _signed_twice(archive)
    page = folder / "page.md"
    page.write_text(page.read_text() + "\nA sentence nobody reviewed.\n")
    kinds = {(f.kind, f.path) for f in verify_archive(archive).problems}
    assert ("changed", f"{MODEL}/2026.2/page.md") in kinds
    assert not any(k == "sign-off" for k, _ in kinds)  # checksums.json itself is unchanged


# -- refused input ------------------------------------------------------------------------


REFUSED = {
    "unknown decision": (
        {"decision": "aproved"},
        ParameterError,
        r"Unknown decision 'aproved'; the known decisions are 'approved', "
        r"'approved-with-conditions', 'rejected'\. Did you mean 'approved'",
    ),
    "empty reviewer": ({"reviewer": ""}, ParameterError, r"reviewer is empty; give 1 to 100"),
    "blank reviewer": ({"reviewer": "  \t "}, ParameterError, r"reviewer is empty"),
    "long reviewer": ({"reviewer": "R" * 101}, ParameterError, r"101 characters; at most 100"),
    "empty note": ({"note": ""}, ParameterError, r"note is empty; give 1 to 2,000"),
    "long note": ({"note": "n" * 2001}, ParameterError, r"2,001 characters; at most 2,000"),
    "line break": (
        {"note": "fine\nreally"},
        ParameterError,
        r"note holds the control character U\+000A at character 5",
    ),
    "escape": ({"reviewer": "A\x1b[31m"}, ParameterError, r"U\+001B at character 2"),
    "direction override": ({"reviewer": "A\u202eB"}, ParameterError, r"U\+202E"),
}


@pytest.mark.parametrize("case", list(REFUSED))
def test_bad_sign_off_text_is_refused_by_name(archive, case):
    changes, error, message = REFUSED[case]
    folder = archive / MODEL / "2026.2"
    kwargs = {"reviewer": "A. Reviewer", "decision": "approved", "note": "Fine."} | changes
    with pytest.raises(error, match=message):
        sign_off(folder, **kwargs)
    assert not (folder / "signoffs").exists()


def test_the_control_plain_text_with_accents_and_spaces_is_accepted(archive):
    s = _sign(archive / MODEL / "2026.2", reviewer="  Zoë O'Brien-Núñez ", note="Ça va: 3 < 4.")
    assert (s.reviewer, s.note) == ("Zoë O'Brien-Núñez", "Ça va: 3 < 4.")


def test_an_unpublished_bundle_is_refused(archive, fixture_archive, tmp_path):
    with pytest.raises(ArchiveError, match=r"is not a published release \(no published\.json\)"):
        _sign(fixture_archive[1]["2026.2"])
    with pytest.raises(ArchiveError, match=r"2026\.9: is not a published release"):
        _sign(archive / MODEL / "2026.9")
    assert not (archive / MODEL / "2026.9").exists()


def test_a_bundle_in_the_history_is_refused(archive, fixture_archive):
    publish(fixture_archive[1]["2026.1"], archive, replace=True)
    old = archive / MODEL / ".history" / "2026.1" / "1"
    with pytest.raises(ArchiveError, match=r"is a replaced bundle in the archive's history"):
        _sign(old)
    assert not (old / "signoffs").exists()


def test_a_changed_bundle_is_refused_saying_what_changed(archive):
    folder = archive / MODEL / "2026.2"
    page = folder / "page.md"
    page.write_text(page.read_text() + "\nA sentence nobody reviewed.\n")
    (folder / "notes.txt").write_text("added by hand")
    with pytest.raises(ArchiveError, match=r"will not sign .*page\.md changed; notes\.txt added"):
        _sign(folder)
    assert not (folder / "signoffs").exists()


def test_a_linked_release_folder_is_refused(archive, tmp_path):
    link = archive / MODEL / "linked"
    link.symlink_to(archive / MODEL / "2026.2")
    with pytest.raises(ArchiveError, match=r"linked: is a symbolic link"):
        _sign(link)
    assert not (archive / MODEL / "2026.2" / "signoffs").exists()


# -- pages ----------------------------------------------------------------------------------


def _history_table(archive) -> str:
    """The release table of the model's history page."""
    return "\n".join(_release_table(list_releases(archive, MODEL)))


def test_the_history_page_shows_each_release_s_latest_decision(archive):
    _signed_twice(archive)
    page = _history_table(archive)
    assert "| sign-off |" in page
    row_2, row_1 = (line for line in page.splitlines() if line.startswith("| [2026"))
    assert "| approved with conditions by B. Reviewer, 2026\\-01\\-01 |" in row_2
    assert "| not signed off |" in row_1
    assert "rejected" not in page  # an earlier decision, not the latest


def test_the_history_page_escapes_the_reviewer(archive):
    _sign(archive / MODEL / "2026.2", reviewer="<img src=x>|[a](b)")
    page = _history_table(archive)
    assert "<img" not in page and "[a](b)" not in page
    assert "&lt;img src=x&gt;\\|\\[a\\]\\(b\\)" in page


def test_the_built_history_page_shows_the_decision(archive, tmp_path):
    _sign(archive / MODEL / "2026.1", decision="rejected", note="Battery pocket not fixed.")
    site = build_site(archive, tmp_path / "site")
    html = (site / MODEL / "index.html").read_text()
    assert "rejected by A. Reviewer, 2026-01-01" in html
    assert "not signed off" in html


def test_a_site_of_an_archive_with_a_broken_sign_off_is_refused(archive, tmp_path):
    folder = _signed_twice(archive)
    _edit_note(folder)
    with pytest.raises(ArchiveError, match=r"0001\.json: its digest does not match"):
        build_site(archive, tmp_path / "site")


# -- the command ----------------------------------------------------------------------------


def test_cli_signoff_records_and_exits_0(archive, capsys):
    folder = archive / MODEL / "2026.2"
    args = ["--reviewer", "A. Reviewer", "--decision", "approved", "--note", "Fine."]
    assert main(["signoff", str(folder), *args]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"sign-off 1 of {MODEL} 2026.2: approved by A. Reviewer, ")
    assert main(["signoff", f"{MODEL}/2026.2", "--archive", str(archive), *args[:-1], "Ok."]) == 0
    assert [s.note for s in signoffs(folder)] == ["Fine.", "Ok."]
    assert main(["archive", "verify", str(archive)]) == 0


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--decision", "maybe"], "Unknown decision 'maybe'"),
        (["--reviewer", ""], "reviewer is empty"),
        (["--note", "a\tb"], "U+0009"),
        (["--release", "meter-failure/2026.9"], "is not a published release"),
        (["--release", "2026.2"], "is not MODEL/RELEASE"),
        (["--release", "meter-failure/.."], "release name '..' is not allowed"),
    ],
    ids=["decision", "reviewer", "control", "unpublished", "one name", "bad name"],
)
def test_cli_signoff_refuses_with_exit_2_and_one_line(archive, capsys, args, words):
    given = dict(zip(args[::2], args[1::2], strict=True))
    release = given.pop("--release", f"{MODEL}/2026.2")
    options = {"--reviewer": "A. Reviewer", "--decision": "approved", "--note": "Fine."}
    options |= given
    argv = ["signoff", release, "--archive", str(archive)]
    argv += [x for kv in options.items() for x in kv]
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.startswith("topoaudit: error: ") and words in captured.err
    assert captured.err.count("\n") == 1
    assert not (archive / MODEL / "2026.2" / "signoffs").exists()


def test_cli_verify_exits_1_on_a_broken_sign_off(archive, capsys):
    folder = _signed_twice(archive)
    (folder / "signoffs" / "0001.json").unlink()
    assert main(["archive", "verify", str(archive)]) == 1
    out = capsys.readouterr().out
    assert f"sign-off   {MODEL}/2026.2/signoffs/0001.json  (sign-off 1 is missing" in out
