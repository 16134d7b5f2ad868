"""The archive of published bundles: atomic publishing, checksums and verification.

Layout::

    <archive>/.lock                                   held while a publish runs
    <archive>/<model>/<release>/                      one published bundle, never changed in place
    <archive>/<model>/<release>/signoffs/             its sign-offs (not bundle files, see below)
    <archive>/<model>/.history/<release>/<n>/         bundles replaced with ``replace=True``
    <archive>/<model>/.incoming-<release>-<random>/   a publish in progress (or interrupted)

Every bundle carries ``checksums.json``: the SHA-256 of each of its files. A publish
copies the bundle into an ``.incoming-*`` folder of the archive (each file written and
flushed to disk), verifies the copy, adds ``published.json`` and the checksums, and then
commits with one rename: a plain ``rename`` for a new release, an atomic exchange of the
two folders (Linux ``renameat2(RENAME_EXCHANGE)``) for a replaced one, after which the
old bundle is filed in the history. Killed at any moment, the archive shows either the
old or the new release, never a mixture; an old bundle caught between the exchange and
its filing stays complete in its ``.incoming-*`` folder, is reported by
:func:`verify_archive` as pending, and is filed by the next publish.

Every folder the tool writes (a bundle, a release, a site) is made the same way, by
:func:`staging`: written in a hidden work folder beside its target, with the work folder's
``.lock`` held, flushed, and committed with one rename or exchange; leftovers of runs
that died are swept by the next run.

A reviewer's decision on a published release is a sign-off (:func:`sign_off`): one new
record ``signoffs/<n>.json`` (a :class:`~topoaudit.bundle.records.SignOff`, numbered
from 1) in the release's folder, beside the bundle's files and not among them, so the
bundle and its ``checksums.json`` stay byte for byte as published. Each record holds
the SHA-256 of the bundle's ``checksums.json`` (the bundle it signs), the digest of the
record before it and its own digest; ``signoffs/chain.json`` counts the records and
names the newest one's digest, so an edited, removed, renumbered or reordered record
breaks the chain and :func:`verify_archive` reports it. A sign-off replaces the whole
``signoffs`` folder with one that holds the old records, byte for byte, and the new one,
through :func:`staging` and under the archive lock: killed at any moment, the release
has the old sign-offs or the new ones. Sign-offs belong to the bundle they sign: a
release published again with ``replace=True`` starts with none, and the old ones move
with the old bundle into the history, where they are still checked against it.

Nothing here follows a symbolic link: a bundle or an archive that contains one is
refused, so no input can make the tool read or write outside the folders it was given.
"""

from __future__ import annotations

import contextlib
import ctypes
import dataclasses
import datetime as _dt
import errno
import functools
import hashlib
import os
import re
import shutil
import sys
import tempfile
import unicodedata
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

from topoaudit.bundle import public_view
from topoaudit.bundle.files import (
    CHECKSUMS,
    build_date,
    bundle_files,
    canonical_json,
    fsync_path,
    read_analysis,
    read_json,
    sha256,
    write_checksums,
    write_file,
)
from topoaudit.bundle.records import DECISIONS, Analysis, SignOff
from topoaudit.config import NAME_PATTERN
from topoaudit.errors import ArchiveError, BundleError, ParameterError, unknown_name
from topoaudit.wording import plural

try:  # pragma: no cover - every supported platform has fcntl
    import fcntl
except ImportError:  # pragma: no cover
    fcntl = None  # type: ignore[assignment]

__all__ = [
    "CHECKSUMS",
    "LOCK",
    "ArchiveError",
    "Finding",
    "PublishedRelease",
    "SignOff",
    "Stage",
    "Verification",
    "bundle_findings",
    "check_name",
    "list_releases",
    "publish",
    "sign_off",
    "signoff_findings",
    "signoffs",
    "staging",
    "sweep",
    "verify_archive",
    "write_checksums",
]

PUBLISHED = "published.json"
HISTORY = ".history"
INCOMING = ".incoming-"
LOCK = ".lock"  # the flock(2) file of the archive and of every work folder
_INTENT = "intent.json"
SIGNOFFS = "signoffs"  # a release's sign-off records: beside the bundle's files, not of them
CHAIN = "chain.json"  # in SIGNOFFS: how many records there are, and the newest one's digest
_SIGNOFF_WORK = f".{SIGNOFFS}.partial-"  # a sign-off in progress (or interrupted)
_RECORD_NAME = re.compile(r"([0-9]{4,})\.json")


def _bundle_own(rel: str) -> bool:
    """True for a file of the bundle itself; False for the sign-offs that lie beside them."""
    top = rel.split("/", 1)[0]
    return top != SIGNOFFS and not top.startswith(_SIGNOFF_WORK)


def check_name(kind: str, name: object) -> str:
    """Return ``name`` if it is a safe model or release name, else raise ArchiveError."""
    if not isinstance(name, str) or not re.fullmatch(NAME_PATTERN, name) or ".." in name:
        msg = (
            f"The {kind} name {name!r} is not allowed; names must match {NAME_PATTERN} "
            "(letters, digits, '.', '-', '_', at most 64 characters, no '..')."
        )
        raise ArchiveError(msg)
    return name


# -- files -------------------------------------------------------------------------------


def _flush_tree(folder: Path) -> None:
    """Flush every file and folder under ``folder`` to disk (fsync(2))."""
    for root, _dirs, names in os.walk(folder):
        for name in names:
            fsync_path(Path(root) / name)
        fsync_path(Path(root), directory=True)


def _copy_tree(src: Path, dst: Path) -> None:
    """Copy a bundle's plain files (links refused); :meth:`Stage.commit` flushes them."""
    bundle_files(src)  # refuses links and special files before anything is copied

    def not_the_bundles(folder: str, names: list[str]) -> list[str]:
        # the sign-offs of a release copied out of an archive signed that publication only
        return [n for n in names if Path(folder) == src and not _bundle_own(n)]

    shutil.copytree(src, dst, copy_function=shutil.copyfile, ignore=not_the_bundles)


def _parked(a: Path) -> Path:
    """Where the fallback of :func:`exchange_folders` parks ``b`` while it swaps."""
    return a.with_name(a.name + ".swap")


def exchange_folders(a: Path, b: Path) -> None:
    """Swap two folders atomically (``renameat2`` with RENAME_EXCHANGE where available).

    Elsewhere it falls back to three renames through ``<a>.swap``; the ``recover`` step of
    :func:`sweep` puts back whatever an interruption of those leaves.
    """
    sys.audit("topoaudit.exchange", str(a), str(b))
    func = getattr(ctypes.CDLL(None, use_errno=True), "renameat2", None)
    if func is not None:
        at_fdcwd, rename_exchange = -100, 2
        if func(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
            return
        code = ctypes.get_errno()
        if code not in (errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP):
            raise OSError(code, os.strerror(code), str(a), None, str(b))
    swap = _parked(a)
    os.rename(b, swap)
    try:
        os.rename(a, b)
    except BaseException:
        os.rename(swap, b)  # put ``b`` back before reporting the failure
        raise
    os.rename(swap, a)


@contextlib.contextmanager
def locked(path: Path) -> Iterator[None]:
    """Hold an exclusive lock on ``path`` (released by the kernel if the process dies)."""
    if fcntl is None:  # pragma: no cover
        yield
        return
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)


def unlocked(path: Path) -> bool:
    """True if nobody holds the lock file ``path`` (its owner finished or died)."""
    if fcntl is None or not path.exists():  # pragma: no cover
        return True
    fd = os.open(path, os.O_RDWR)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        return False
    finally:
        os.close(fd)
    return True


# -- staging -----------------------------------------------------------------------------


def sweep(parent: Path, prefix: str, recover: Callable[[Path], None]) -> None:
    """Remove the work folders ``<parent>/<prefix>*`` whose lock is free, each after ``recover``.

    A free lock means the run that made the folder finished or died (the kernel releases a
    flock(2) with its holder); ``recover(work)`` first moves out whatever of value an
    interrupted commit left there. A folder whose lock is held belongs to a live run and is
    left alone.
    """
    for work in sorted(parent.glob(prefix + "*")):
        if work.is_dir() and not work.is_symlink() and unlocked(work / LOCK):
            recover(work)
            shutil.rmtree(work, ignore_errors=True)


def _put_back(target: Path, name: str, work: Path) -> None:
    """Put back a ``target`` that an interrupted fallback exchange parked in ``work``."""
    parked = _parked(work / name)
    if parked.is_dir() and not target.exists():
        os.rename(parked, target)


class Stage:
    """The work folder of one :func:`staging` run, beside ``target`` and locked.

    The run writes the new folder into :attr:`path` (``work/<name>``); :attr:`work` may
    hold its scratch files besides.
    """

    def __init__(self, target: Path, work: Path, name: str) -> None:
        self.target = target
        self.work = work
        self.path = work / name
        self.committed = False

    def commit(self) -> Path | None:
        """Flush :attr:`path` to disk and put it in place of the target in one step.

        A new target is made by ``os.rename``; an existing one is swapped with
        :func:`exchange_folders`, after which the old target lies at :attr:`path`.

        Returns
        -------
        Path or None
            Where the replaced target now lies, or None if there was none.
        """
        if self.committed:
            raise ArchiveError(f"{self.target}: this staged folder is already committed.")
        _flush_tree(self.path)
        replaced = self.target.exists()
        if replaced:
            exchange_folders(self.path, self.target)
        else:
            os.rename(self.path, self.target)
        self.committed = True
        fsync_path(self.target.parent, directory=True)
        return self.path if replaced else None


@contextlib.contextmanager
def staging(
    target: str | Path,
    *,
    prefix: str | None = None,
    name: str = "staged",
    recover: Callable[[Path], None] | None = None,
) -> Iterator[Stage]:
    """Build the folder ``target`` beside it and put it in place whole, or not at all.

    Sweeps the leftovers ``<prefix>*`` beside ``target`` whose lock is free (see
    :func:`sweep`; by default ``recover`` puts back a target that an interrupted fallback
    exchange parked), makes a new work folder ``<prefix><random>`` there and holds its
    ``.lock``, and yields its :class:`Stage`, whose ``path`` the block writes. When the
    block ends, the stage is committed (unless the block did so itself, to act on the
    replaced target while the lock is held) and the work folder removed.

    If the block raises before the commit, the work folder is removed and the target is
    untouched. If it raises after, the work folder, which then holds the old target, is
    left to the next run's ``recover``.

    Parameters
    ----------
    target : str or Path
        The folder to make or replace; its parent is created if missing.
    prefix : str, default=None
        Name prefix of the work folders; None means ``.<target name>.partial-``.
    name : str, default="staged"
        Name of the staged folder inside the work folder.
    recover : callable, default=None
        Called with each free leftover work folder before it is removed.
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    prefix = prefix or f".{target.name}.partial-"
    sweep(target.parent, prefix, recover or functools.partial(_put_back, target, name))
    stage = Stage(target, Path(tempfile.mkdtemp(prefix=prefix, dir=target.parent)), name)
    try:
        with locked(stage.work / LOCK):
            yield stage
            if not stage.committed:
                stage.commit()
    except BaseException:
        if not stage.committed and not _parked(stage.path).exists():
            shutil.rmtree(stage.work, ignore_errors=True)
        raise
    shutil.rmtree(stage.work, ignore_errors=True)


# -- checksums ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Finding:
    """One thing :func:`verify_archive` found: ``kind`` is one of changed, missing, added,
    unreadable, link, sequence, sign-off (a problem) or pending, leftover (an interrupted
    run)."""

    kind: str
    path: str
    detail: str = ""

    PROBLEMS = ("changed", "missing", "added", "unreadable", "link", "sequence", "sign-off")

    @property
    def problem(self) -> bool:
        return self.kind in self.PROBLEMS

    def __str__(self) -> str:
        return f"{self.kind:<10} {self.path}" + (f"  ({self.detail})" if self.detail else "")


def bundle_findings(folder: str | Path, *, relative_to: Path | None = None) -> list[Finding]:
    """Compare the files of a bundle with its ``checksums.json``."""
    folder = Path(folder)
    base = relative_to or folder

    def rel(p: Path) -> str:
        return p.relative_to(base).as_posix() if p != base else "."

    try:
        files = {k: p for k, p in bundle_files(folder).items() if _bundle_own(k)}
    except ArchiveError as exc:
        return [Finding("link", rel(folder), str(exc))]
    try:
        recorded = read_json(folder / CHECKSUMS)["files"]
        if not isinstance(recorded, dict):
            raise TypeError("files is not a table")
    except FileNotFoundError:
        return [Finding("missing", rel(folder / CHECKSUMS), "the bundle records no checksums")]
    except (OSError, ValueError, TypeError, KeyError) as exc:
        return [Finding("unreadable", rel(folder / CHECKSUMS), str(exc))]
    found = []
    for name, digest in sorted(recorded.items()):
        path = folder / name
        if name not in files:
            found.append(Finding("missing", rel(path)))
        elif sha256(path) != digest:
            found.append(Finding("changed", rel(path), "its SHA-256 differs from checksums.json"))
    for name in files:
        if name != CHECKSUMS and name not in recorded:
            found.append(Finding("added", rel(folder / name), "not in checksums.json"))
    return found


def _listed(problems: list[Finding]) -> str:
    """``page.md changed; notes.txt added and 2 more``: the first problems, for a message."""
    listed = "; ".join(f"{p.path} {p.kind}" for p in problems[:5])
    return listed + (f" and {len(problems) - 5} more" if len(problems) > 5 else "")


def refuse_changed(folder: Path) -> None:
    problems = bundle_findings(folder)
    if problems:
        msg = (
            f"{folder}: the bundle does not match its checksums.json ({_listed(problems)}); it "
            "changed after it was written. Audit again, or restore the original files "
            "(topoaudit archive verify lists every difference)."
        )
        raise ArchiveError(msg)


# -- publishing ---------------------------------------------------------------------------


def _read_analysis(folder: Path) -> Analysis:
    """The Analysis of a bundle; a folder that holds none is refused as an archive error."""
    try:
        return read_analysis(folder)
    except BundleError as exc:
        raise ArchiveError(str(exc)) from exc


def _sequence(bundle: Path) -> list[int]:
    """The publication number of a bundle, as a list of none or one."""
    try:
        return [int(read_json(bundle / PUBLISHED)["sequence"])]
    except (OSError, ValueError, KeyError, TypeError):
        return []


def _sequences(model_dir: Path) -> list[int]:
    return [s for bundle in _bundles(model_dir) for s in _sequence(bundle)]


def _bundles(model_dir: Path) -> list[Path]:
    """Current and historical bundles of a model folder."""
    if not model_dir.is_dir():
        return []
    out = [p for p in sorted(model_dir.iterdir()) if not p.name.startswith(".") and p.is_dir()]
    history = model_dir / HISTORY
    if history.is_dir() and not history.is_symlink():
        for rel in sorted(history.iterdir()):
            if rel.is_dir() and not rel.is_symlink():
                out += [n for n in sorted(rel.iterdir()) if n.is_dir() and n.name.isdigit()]
    return out


def _file_in_history(old: Path, model_dir: Path, release: str) -> Path:
    history = model_dir / HISTORY / release
    history.mkdir(parents=True, exist_ok=True)
    n = 1 + max((int(p.name) for p in history.iterdir() if p.name.isdigit()), default=0)
    target = history / str(n)
    os.rename(old, target)
    fsync_path(history, directory=True)
    return target


def _replaced_bundle(tmp: Path) -> Path | None:
    """The old bundle an interrupted replace left in ``tmp``, if it holds one.

    A replace writes ``intent.json`` (the digest of the new bundle's checksums) before the
    exchange; afterwards ``tmp/bundle`` is the old bundle, whose digest differs (the
    fallback exchange parks it in ``tmp/bundle.swap`` instead).
    """
    try:
        intent = read_json(tmp / _INTENT)
    except (OSError, ValueError):
        return None
    if not isinstance(intent, dict):
        return None
    swap, staged = tmp / "bundle.swap", tmp / "bundle"
    if swap.is_dir():
        return swap
    if staged.is_dir() and _checksums_digest(staged) != intent.get("new"):
        return staged
    return None


def _finish_replace(model_dir: Path, tmp: Path) -> None:
    """File the old bundle an interrupted replace left in ``tmp``, or put it back."""
    old = _replaced_bundle(tmp)
    if old is not None:
        release = check_name("release", read_json(tmp / _INTENT).get("release"))
        if not (model_dir / release).exists():
            os.rename(old, model_dir / release)  # the fallback exchange stopped half-way
        else:
            _file_in_history(old, model_dir, release)


def _checksums_digest(folder: Path) -> str | None:
    try:
        return sha256(folder / CHECKSUMS)
    except OSError:
        return None


def _same_bundle(bundle: Path, published: Path) -> bool:
    """True if ``published`` holds exactly the files of ``bundle`` (plus its own records)."""
    try:
        recorded = dict(read_json(published / CHECKSUMS)["files"])
    except (OSError, ValueError, KeyError, TypeError):
        return False
    recorded.pop(PUBLISHED, None)
    mine = {
        rel: sha256(p)
        for rel, p in bundle_files(bundle).items()
        if rel != CHECKSUMS and _bundle_own(rel)
    }
    return mine == recorded and not bundle_findings(published)


def publish(bundle: str | Path, archive: str | Path, *, replace: bool = False) -> Path:
    """Add ``bundle`` to ``archive`` as ``<model>/<release>/``.

    A published release is never overwritten: without ``replace`` an existing release is
    refused and nothing changes (unless it holds exactly this bundle already, so that a
    publish run again after an interruption succeeds); with it, the old bundle moves to
    the model's history (with its checksums). A bundle whose files no longer match its
    ``checksums.json``, or that holds a symbolic link, is refused.
    """
    bundle, archive = Path(bundle), Path(archive)
    if not bundle.is_dir():
        raise ArchiveError(f"{bundle}: no such bundle folder.")
    a = _read_analysis(bundle)
    model = check_name("model", a.model)
    release = check_name("release", a.release)
    bundle_files(bundle)
    if (bundle / CHECKSUMS).exists():
        refuse_changed(bundle)
    if archive.is_symlink():
        raise ArchiveError(f"{archive}: the archive folder is a symbolic link; give the real one.")
    archive.mkdir(parents=True, exist_ok=True)
    model_dir = archive / model
    with locked(archive / LOCK):
        if model_dir.is_symlink():
            raise ArchiveError(f"{model_dir}: is a symbolic link; archives may not hold links.")
        model_dir.mkdir(exist_ok=True)
        finish = functools.partial(_finish_replace, model_dir)
        sweep(model_dir, INCOMING, finish)  # the leftovers of every release, not only this one
        dest = model_dir / release
        if dest.is_symlink():
            raise ArchiveError(f"{dest}: is a symbolic link; archives may not hold links.")
        if dest.exists() and not replace:
            if _same_bundle(bundle, dest):
                return dest  # published before, file for file: running again changes nothing
            msg = (
                f"{dest}: release {release!r} of model {model!r} is already published; pass "
                "--replace to replace it (the old bundle is kept in the archive's history)."
            )
            raise ArchiveError(msg)
        with staging(dest, prefix=f"{INCOMING}{release}-", name="bundle", recover=finish) as stage:
            staged = stage.path
            _copy_tree(bundle, staged)
            if (staged / CHECKSUMS).exists():
                refuse_changed(staged)
            if not (staged / "page.md").exists():
                from topoaudit.report.page import render_bundle  # only then: it loads the charts

                render_bundle(staged)
            sequence = 1 + max(_sequences(model_dir), default=0)
            write_file(
                staged / PUBLISHED,
                canonical_json({"sequence": sequence, "published": build_date()}),
            )
            write_checksums(staged)
            if dest.exists():
                intent = {"release": release, "new": _checksums_digest(staged)}
                write_file(stage.work / _INTENT, canonical_json(intent))
            old = stage.commit()
            if old is not None:  # a failure from here on leaves it for the next publish
                _file_in_history(old, model_dir, release)
    return dest


@dataclass(frozen=True)
class PublishedRelease:
    """A release as the archive holds it: its folder, publication and public view."""

    release: str
    folder: Path
    sequence: int
    published: str
    analysis: Analysis


def list_releases(archive: str | Path, model: str) -> list[PublishedRelease]:
    """Published releases of ``model``, newest first, each with the public view of its
    analysis (:func:`topoaudit.bundle.public_view`)."""
    folder = Path(archive) / model
    out: list[PublishedRelease] = []
    if not folder.is_dir():
        return out
    for child in sorted(folder.iterdir()):
        if child.name.startswith(".") or not (child / PUBLISHED).exists():
            continue
        check_name("release", child.name)
        try:
            meta = read_json(child / PUBLISHED)
            sequence, published = int(meta["sequence"]), str(meta["published"])
        except (OSError, ValueError, KeyError, TypeError) as exc:
            msg = (
                f"{child / PUBLISHED}: cannot be read ({exc!r}); run topoaudit archive "
                "verify to see what changed."
            )
            raise ArchiveError(msg) from exc
        analysis = public_view(_read_analysis(child))
        out.append(PublishedRelease(child.name, child, sequence, published, analysis))
    out.sort(key=lambda r: -r.sequence)
    return out


# -- sign-offs ---------------------------------------------------------------------------

#: bounds on the text of a sign-off, in characters (common practice, no source)
REVIEWER_LIMIT = 100
NOTE_LIMIT = 2000
# characters that reorder how the text around them shows (Unicode bidirectional embeddings,
# overrides and isolates): a name holding one can read as another name
_BIDI = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")


def _signoff_time() -> str:
    """Now, UTC, as an RFC 3339 timestamp (``SOURCE_DATE_EPOCH`` when set, as for
    :func:`~topoaudit.bundle.files.build_date`)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None and epoch.strip().isdigit():
        now = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.UTC)
    else:
        now = _dt.datetime.now(tz=_dt.UTC)
    return now.strftime("%Y-%m-%dT%H:%M:%SZ")


def _signoff_text(key: str, value: object, limit: int) -> str:
    """``value`` without surrounding spaces, if it is one line of 1 to ``limit`` characters."""
    if not isinstance(value, str) or not value.strip():
        raise ParameterError(f"The sign-off's {key} is empty; give 1 to {limit:,} characters.")
    text = value.strip()
    if len(text) > limit:
        msg = f"The sign-off's {key} has {len(text):,} characters; at most {limit:,} are allowed."
        raise ParameterError(msg)
    for i, c in enumerate(text, start=1):
        if unicodedata.category(c) in ("Cc", "Zl", "Zp") or c in _BIDI:
            msg = (
                f"The sign-off's {key} holds the control character U+{ord(c):04X} at "
                f"character {i}; give one line of plain text (no line breaks, tabs or "
                "direction controls)."
            )
            raise ParameterError(msg)
    return text


def _check_decision(decision: object) -> str:
    if not isinstance(decision, str):
        raise ParameterError(f"The decision {decision!r} is not one of {', '.join(DECISIONS)}.")
    if decision not in DECISIONS:
        raise unknown_name("decision", decision, DECISIONS)
    return decision


def _published_release(folder: Path) -> tuple[Path, Path]:
    """(release folder, archive) of a current published release; anything else refused."""
    folder = Path(os.path.abspath(folder))
    model_dir, archive = folder.parent, folder.parent.parent
    for path in (archive, model_dir, folder):
        if path.is_symlink():
            raise ArchiveError(f"{path}: is a symbolic link; archives may not hold links.")
    if HISTORY in (model_dir.name, archive.name):
        msg = (
            f"{folder}: is a replaced bundle in the archive's history; only the release as "
            "published now can be signed (ARCHIVE/MODEL/RELEASE)."
        )
        raise ArchiveError(msg)
    if not (folder / PUBLISHED).is_file():
        msg = (
            f"{folder}: is not a published release (no {PUBLISHED}); give the release's "
            "folder in the archive, ARCHIVE/MODEL/RELEASE, as topoaudit publish prints it."
        )
        raise ArchiveError(msg)
    check_name("model", model_dir.name)
    check_name("release", folder.name)
    return folder, archive


def _signoff_digest(s: SignOff) -> str:
    """The SHA-256 of the record's canonical JSON without its ``digest``."""
    body = {k: v for k, v in s.to_dict().items() if k != "digest"}
    return hashlib.sha256(canonical_json(body).encode("utf-8")).hexdigest()


def sign_off(release: str | Path, *, reviewer: str, decision: str, note: str) -> SignOff:
    """Record a reviewer's decision on the published release folder ``release``.

    ``decision`` is one of :data:`~topoaudit.bundle.records.DECISIONS`; ``reviewer`` and
    ``note`` are one line each of at most :data:`REVIEWER_LIMIT` and :data:`NOTE_LIMIT`
    characters. Refused: a folder that is not a current published release, a bundle
    that no longer matches its checksums, and a release whose earlier sign-offs are
    broken. The same reviewer, decision and note signed again for the same bundle (a
    re-run after an interruption) returns the record already there and writes nothing.
    The bundle's own files are never written.
    """
    reviewer = _signoff_text("reviewer", reviewer, REVIEWER_LIMIT)
    note = _signoff_text("note", note, NOTE_LIMIT)
    decision = _check_decision(decision)
    folder, archive = _published_release(Path(release))
    with locked(archive / LOCK):
        folder, archive = _published_release(folder)  # again: a replace may have run
        target = folder / SIGNOFFS  # put right what an interrupted sign-off left
        sweep(folder, _SIGNOFF_WORK, functools.partial(_put_back, target, SIGNOFFS))
        changed = bundle_findings(folder)
        if changed:
            msg = (
                f"{folder}: will not sign this release: its bundle does not match its "
                f"checksums.json ({_listed(changed)}), so it is not the bundle that was "
                "published. Restore the published files (topoaudit archive verify lists "
                "every difference), then sign."
            )
            raise ArchiveError(msg)
        earlier = signoffs(folder)
        bundle = _checksums_digest(folder) or ""
        last = earlier[-1] if earlier else None
        if last and (last.reviewer, last.decision, last.note, last.bundle) == (
            reviewer,
            decision,
            note,
            bundle,
        ):
            return last
        record = SignOff(
            number=len(earlier) + 1,
            model=folder.parent.name,
            release=folder.name,
            reviewer=reviewer,
            decision=decision,
            note=note,
            time=_signoff_time(),
            bundle=bundle,
            previous=last.digest if last else None,
            digest="",
        )
        record = dataclasses.replace(record, digest=_signoff_digest(record))
        _commit_signoff(folder, record)
    return record


def _record_name(number: int) -> str:
    return f"{number:04d}.json"


def _commit_signoff(folder: Path, record: SignOff) -> None:
    """Put a ``signoffs`` folder of the old records (copied byte for byte), the new one
    and a new ``chain.json`` in place of the old folder, in one rename or exchange."""
    target = folder / SIGNOFFS
    with staging(target, prefix=_SIGNOFF_WORK, name=SIGNOFFS) as stage:
        stage.path.mkdir()
        if target.is_dir():
            for old in sorted(target.iterdir()):
                if _RECORD_NAME.fullmatch(old.name):
                    shutil.copyfile(old, stage.path / old.name)
        write_file(stage.path / _record_name(record.number), canonical_json(record))
        chain = {"records": record.number, "newest": record.digest}
        write_file(stage.path / CHAIN, canonical_json(chain))


def _read_signoff(path: Path) -> SignOff:
    try:
        return SignOff.from_dict(read_json(path), f"{path.name}:")
    except (OSError, ValueError) as exc:  # BundleError is a ValueError
        raise ArchiveError(f"{path.name}: cannot be read as a sign-off ({exc}).") from exc


def _record_problems(s: SignOff, n: int, previous: str | None, bundle: str | None) -> list[str]:
    """What is wrong with the record stored as number ``n`` (``previous``: the digest of
    record ``n - 1``, ``"?"`` when that one is missing or unreadable)."""
    out = []
    if s.number != n:
        out.append(f"it says it is sign-off {s.number}: the records were renamed or reordered")
    if s.digest != _signoff_digest(s):
        out.append("its digest does not match its content: it was edited after it was written")
    if previous != "?" and s.previous != previous:
        out.append(
            f"it does not name the digest of sign-off {n - 1} before it: an earlier record "
            "was edited, removed or put in another order"
            if n > 1
            else "the first sign-off names a record before it: records before it were removed"
        )
    if s.bundle != bundle:
        out.append(
            "it names another bundle than the one beside it (the SHA-256 of checksums.json "
            "differs): it was signed for another bundle, or the bundle changed"
        )
    if s.decision not in DECISIONS:
        out.append(f"its decision {s.decision!r} is none of {', '.join(DECISIONS)}")
    return out


def _chain_problems(where: Path, records: dict[int, SignOff | None]) -> list[str]:
    """What is wrong with ``chain.json`` for the records found (by number)."""
    n = max(records, default=0)
    try:
        chain = read_json(where / CHAIN)
        count, newest = int(chain["records"]), chain["newest"]
    except FileNotFoundError:
        return [f"{CHAIN} is missing: it counts the sign-offs and names the newest"] if n else []
    except (OSError, ValueError, KeyError, TypeError) as exc:
        return [f"{CHAIN} cannot be read ({exc!r})"]
    if count != n:
        why = "the newest was removed" if count > n else "a record was added by hand"
        return [f"{CHAIN} counts {plural(count, 'sign-off')}, the folder holds {n}: {why}"]
    last = records.get(n)
    if last is not None and newest != last.digest:
        return [f"{CHAIN} names another newest sign-off: the newest record was replaced"]
    return []


def _signoff_check(folder: Path) -> tuple[list[SignOff], list[tuple[str, str]]]:
    """The readable sign-offs of ``folder``, oldest first, and its problems as
    (path under ``folder``, detail)."""
    where = folder / SIGNOFFS
    if not where.exists() and not where.is_symlink():
        return [], []
    if where.is_symlink() or not where.is_dir():
        return [], [(SIGNOFFS, "not a folder of sign-off records")]
    problems: list[tuple[str, str]] = []
    found: dict[int, Path] = {}
    for path in sorted(where.iterdir()):
        match = _RECORD_NAME.fullmatch(path.name)
        if match and path.is_file() and not path.is_symlink():
            found[int(match.group(1))] = path
        elif path.name != CHAIN or not path.is_file() or path.is_symlink():
            problems.append((f"{SIGNOFFS}/{path.name}", "not a sign-off record"))
    bundle = _checksums_digest(folder)
    records: dict[int, SignOff | None] = {}
    previous: str | None = None
    for n in range(1, max(found, default=0) + 1):
        rel = f"{SIGNOFFS}/{_record_name(n)}"
        try:
            s = _read_signoff(found[n]) if n in found else None
        except ArchiveError as exc:
            s = None
            problems.append((rel, str(exc)))
        if n not in found:
            problems.append((rel, f"sign-off {n} is missing: a record was removed"))
        records[n] = s
        if s is not None:
            problems += [(rel, d) for d in _record_problems(s, n, previous, bundle)]
        previous = s.digest if s is not None else "?"
    problems += [(f"{SIGNOFFS}/{CHAIN}", d) for d in _chain_problems(where, records)]
    return [s for s in records.values() if s is not None], problems


def signoffs(release_folder: str | Path) -> list[SignOff]:
    """The sign-offs of a published release (or of a bundle in the history), newest last.

    Each record is checked (its digest, the chain, the bundle it names); a broken one is
    refused with an :class:`ArchiveError` that names it, so that no page shows a decision
    that was not made on this bundle. A release never signed gives an empty list.
    """
    folder = Path(release_folder)
    records, problems = _signoff_check(folder)
    if problems:
        rel, detail = problems[0]
        more = f" ({plural(len(problems) - 1, 'more problem')})" if len(problems) > 1 else ""
        msg = (
            f"{folder / rel}: {detail}{more}; the sign-offs of this release cannot be trusted. "
            "Run topoaudit archive verify on the archive to see every problem."
        )
        raise ArchiveError(msg)
    return records


def signoff_findings(folder: str | Path, *, relative_to: Path | None = None) -> list[Finding]:
    """The problems of a bundle's sign-offs, and its interrupted sign-offs as leftovers."""
    folder = Path(folder)
    base = relative_to or folder
    out = []
    for work in sorted(folder.glob(_SIGNOFF_WORK + "*")):
        detail = "an interrupted sign-off that changed nothing; the next sign-off removes it"
        out.append(Finding("leftover", (work.relative_to(base)).as_posix(), detail))
    _records, problems = _signoff_check(folder)
    out += [Finding("sign-off", (folder / r).relative_to(base).as_posix(), d) for r, d in problems]
    return out


# -- verification ------------------------------------------------------------------------


@dataclass
class Verification:
    """What :func:`verify_archive` found, bundle by bundle."""

    archive: Path
    bundles: list[str] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    signoffs: int = 0  # sign-off records checked

    @property
    def problems(self) -> list[Finding]:
        return [f for f in self.findings if f.problem]

    @property
    def ok(self) -> bool:
        return not self.problems

    def report(self) -> str:
        signed = f", {plural(self.signoffs, 'sign-off')}" if self.signoffs else ""
        lines = [f"archive {self.archive}: {plural(len(self.bundles), 'bundle')}{signed} checked"]
        lines += [f"  {f}" for f in self.findings]
        n = len(self.problems)
        lines.append(
            "no file changed, went missing or was added"
            if n == 0
            else f"{n} problem{'s' if n != 1 else ''} found"
        )
        return "\n".join(lines) + "\n"


def verify_archive(archive: str | Path) -> Verification:
    """Check every bundle of ``archive``, current and in history, against its checksums.

    Reports files that changed, went missing or were added, symbolic links, anything that
    is not part of the layout, gaps in each model's publication sequence (a whole bundle
    that went missing), and each bundle's sign-offs: every record's digest, the chain from
    each record to the one before it and to ``chain.json``, and that each names the digest
    of the bundle it lies beside. Reads only; changes nothing.
    """
    archive = Path(archive)
    if archive.is_symlink() or not archive.is_dir():
        raise ArchiveError(f"{archive}: no such archive folder (or it is a symbolic link).")
    v = Verification(archive)

    def note(kind: str, path: Path, detail: str = "") -> None:
        v.findings.append(Finding(kind, path.relative_to(archive).as_posix(), detail))

    def check(bundle: Path) -> None:
        v.bundles.append(bundle.relative_to(archive).as_posix())
        v.findings.extend(bundle_findings(bundle, relative_to=archive))
        v.findings.extend(signoff_findings(bundle, relative_to=archive))
        v.signoffs += len(_signoff_check(bundle)[0])

    for model_dir in sorted(archive.iterdir()):
        if model_dir.is_symlink():
            note("link", model_dir, "archives may not hold symbolic links")
            continue
        if model_dir.name == LOCK and model_dir.is_file():
            continue
        if not model_dir.is_dir() or not re.fullmatch(NAME_PATTERN, model_dir.name):
            note("added", model_dir, "not a model folder")
            continue
        for child in sorted(model_dir.iterdir()):
            if child.is_symlink():
                note("link", child, "archives may not hold symbolic links")
            elif child.name == HISTORY and child.is_dir():
                _verify_history(child, check, note)
            elif child.name.startswith(INCOMING) and child.is_dir():
                _verify_incoming(child, check, note)
            elif child.is_dir() and re.fullmatch(NAME_PATTERN, child.name):
                check(child)
            else:
                note("added", child, "not a release folder")
        pending = [p for p in map(_replaced_bundle, model_dir.glob(INCOMING + "*")) if p]
        seqs = sorted(_sequences(model_dir) + [s for p in pending for s in _sequence(p)])
        expected = list(range(1, len(seqs) + 1))
        if seqs != expected:
            gaps = sorted(set(range(1, (max(seqs) if seqs else 0) + 1)) - set(seqs))
            dups = sorted({s for s in seqs if seqs.count(s) > 1})
            detail = ", ".join(
                ([f"publication number(s) {gaps} missing"] if gaps else [])
                + ([f"publication number(s) {dups} repeated"] if dups else [])
            )
            note("sequence", model_dir, detail + "; a whole bundle was removed or copied in")
    return v


def _verify_history(history: Path, check, note) -> None:
    for rel in sorted(history.iterdir()):
        if rel.is_symlink():
            note("link", rel, "archives may not hold symbolic links")
            continue
        if not rel.is_dir():
            note("added", rel, "not a release folder of the history")
            continue
        for n in sorted(rel.iterdir()):
            if n.is_symlink():
                note("link", n, "archives may not hold symbolic links")
            elif n.is_dir() and n.name.isdigit():
                check(n)
            else:
                note("added", n, "not a numbered bundle of the history")


def _verify_incoming(tmp: Path, check, note) -> None:
    old = _replaced_bundle(tmp)
    if old is None:
        note(
            "leftover",
            tmp,
            "an interrupted publish that changed nothing; the next publish removes it",
        )
    else:
        note("pending", tmp, "a replaced bundle, complete; the next publish files it in history")
        check(old)
