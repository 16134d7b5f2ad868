"""Reading and writing the files of a bundle.

A bundle is a folder holding::

    analysis.json     an Analysis record: config, provenance, metrics, graph summary,
                      regions, weak regions, local-model tests, stability, comparison
    graph.json        a GraphDocument record: nodes with their statistics, links
                      (no row-level data)
    members.parquet   row id -> nodes, home region, weak regions, half
    checksums.json    the SHA-256 of every other file

Writing is deterministic: floats are rounded to 6 significant digits, NaN becomes null,
keys are sorted, and the only date comes from ``SOURCE_DATE_EPOCH`` when it is set (the
reproducible-builds convention), else today. The same input gives byte-identical files.
A bundle is written into a staging folder and renamed into place whole, so a reader
never sees half of one.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
import os
import stat
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from topoaudit.bundle.records import SCHEMA, Analysis, GraphDocument, to_dict
from topoaudit.errors import ArchiveError, BundleError

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "ANALYSIS",
    "CHECKSUMS",
    "GRAPH",
    "MEMBERS",
    "build_date",
    "bundle_files",
    "canonical_json",
    "fsync_path",
    "read_analysis",
    "read_graph",
    "read_json",
    "read_members",
    "sha256",
    "write_bundle",
    "write_checksums",
    "write_file",
]

ANALYSIS = "analysis.json"
GRAPH = "graph.json"
MEMBERS = "members.parquet"
CHECKSUMS = "checksums.json"
DIGITS = 6


def build_date() -> str:
    """``YYYY-MM-DD`` from ``SOURCE_DATE_EPOCH`` when set, else today's date (UTC)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None and epoch.strip().isdigit():
        return _dt.datetime.fromtimestamp(int(epoch), tz=_dt.UTC).date().isoformat()
    return _dt.datetime.now(tz=_dt.UTC).date().isoformat()


def _plain(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        v = float(value)
        if not math.isfinite(v):
            return None
        return 0.0 if v == 0 else float(f"{v:.{DIGITS}g}")
    if isinstance(value, Path):
        return str(value)
    if hasattr(value, "__dataclass_fields__"):
        return _plain(to_dict(value))
    return value


def canonical_json(value: Any) -> str:
    """Sorted, rounded, indented JSON with a final newline (records converted)."""
    return json.dumps(_plain(value), sort_keys=True, indent=1, ensure_ascii=False) + "\n"


# -- plain files ----------------------------------------------------------------------------


def fsync_path(path: Path, *, directory: bool = False) -> None:
    """Flush ``path`` (a file, or a folder's entries) to disk; a no-op where impossible."""
    flags = os.O_RDONLY | (getattr(os, "O_DIRECTORY", 0) if directory else 0)
    try:
        fd = os.open(path, flags)
    except OSError:  # pragma: no cover - a platform that cannot open folders
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(fd)


def write_file(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file, flushed, then renamed."""
    tmp = path.with_name(f".{path.name}.tmp")
    with open(tmp, "w", encoding="utf-8") as f:
        f.write(text)
        f.flush()
        os.fsync(f.fileno())
    os.replace(tmp, path)


def sha256(path: Path) -> str:
    """The SHA-256 of a file, read in blocks of 1 MiB."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def bundle_files(folder: Path) -> dict[str, Path]:
    """Regular files under ``folder`` by POSIX relative path; refuses links and devices."""
    if folder.is_symlink():
        raise ArchiveError(
            f"{folder}: is a symbolic link; bundles and archives may not hold links."
        )
    out: dict[str, Path] = {}
    for root, dirs, names in os.walk(folder):
        base = Path(root)
        for name in sorted(dirs + names):
            path = base / name
            mode = path.lstat().st_mode
            if stat.S_ISLNK(mode):
                msg = (
                    f"{path}: is a symbolic link; bundles and archives may hold only plain "
                    "files and folders."
                )
                raise ArchiveError(msg)
            if stat.S_ISREG(mode):
                out[path.relative_to(folder).as_posix()] = path
            elif not stat.S_ISDIR(mode):
                raise ArchiveError(f"{path}: is not a plain file or folder.")
    return dict(sorted(out.items()))


def write_checksums(folder: str | Path) -> Path:
    """Record the SHA-256 of every file of the bundle ``folder`` in ``checksums.json``."""
    folder = Path(folder)
    files = {rel: sha256(p) for rel, p in bundle_files(folder).items() if rel != CHECKSUMS}
    path = folder / CHECKSUMS
    write_file(path, canonical_json({"algorithm": "sha256", "files": files}))
    return path


# -- records ---------------------------------------------------------------------------------


def read_json(path: Path) -> Any:
    """The parsed JSON of ``path`` (errors of the file system and of JSON as they come)."""
    return json.loads(path.read_text(encoding="utf-8"))


def _document(folder: Path, name: str) -> dict[str, Any]:
    path = folder / name
    try:
        doc = read_json(path)
    except FileNotFoundError:
        raise BundleError(f"{folder}: not a bundle (no {name}).") from None
    except (OSError, ValueError) as exc:
        raise BundleError(f"{path}: cannot be read ({exc}).") from exc
    if not isinstance(doc, dict):
        raise BundleError(f"{path}: holds no table; a bundle's {name} is one JSON object.")
    return doc


def read_analysis(folder: str | Path) -> Analysis:
    """The :class:`Analysis` of a bundle, checked against the schema this code reads."""
    folder = Path(folder)
    doc = _document(folder, ANALYSIS)
    schema = doc.get("schema")
    if schema != SCHEMA:
        msg = (
            f"{folder / ANALYSIS}: schema {schema!r}; this topoaudit reads schema {SCHEMA}. "
            "Audit the release again with this version, or read it with the version that "
            "wrote it (provenance.versions.topoaudit)."
        )
        raise BundleError(msg)
    return Analysis.from_dict(doc, f"{folder / ANALYSIS}:")


def read_graph(folder: str | Path) -> GraphDocument:
    """The :class:`GraphDocument` of a bundle."""
    folder = Path(folder)
    return GraphDocument.from_dict(_document(folder, GRAPH), f"{folder / GRAPH}:")


def read_members(folder: str | Path, columns: Sequence[str] | None = None) -> pd.DataFrame:
    """The row-level table of a bundle (the bundle only: no page or chart reads it)."""
    import pandas as pd

    path = Path(folder) / MEMBERS
    try:
        return pd.read_parquet(path, columns=list(columns) if columns is not None else None)
    except FileNotFoundError:
        raise BundleError(f"{folder}: not a bundle (no {MEMBERS}).") from None
    except (OSError, ValueError, KeyError) as exc:
        raise BundleError(f"{path}: cannot be read ({exc}).") from exc


def write_bundle(
    folder: str | Path, analysis: Analysis, graph: GraphDocument, members: pd.DataFrame
) -> Path:
    """Write ``analysis.json``, ``graph.json`` and ``members.parquet`` into ``folder``
    (created if needed). ``folder`` is a staging folder (:func:`topoaudit.report.archive.
    staging`), which flushes and renames the whole bundle at once."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / ANALYSIS).write_text(canonical_json(analysis), encoding="utf-8")
    (folder / GRAPH).write_text(canonical_json(graph), encoding="utf-8")
    members.to_parquet(folder / MEMBERS, index=False, compression="zstd")
    return folder
