"""What changed between two bundles: headline metrics, weak regions gained and lost.

Both audits are read through their public view (:mod:`topoaudit.bundle`): a weak region
of fewer than ``MIN_CELL_ROWS`` rows keeps its size and loses its statistics.

Weak regions of the two audits are matched by the Jaccard index of their row ids (from
each bundle's ``members.parquet``): a pair with Jaccard at least 0.5 is the same weak
region seen again; a region of the later audit with no match was gained, one of the
earlier with no match was lost. :func:`topoaudit.report.diff.diff_markdown` renders the
result.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from topoaudit.audit.tasks import task_named
from topoaudit.bundle import public_view
from topoaudit.bundle.files import read_analysis, read_members
from topoaudit.bundle.records import (
    Analysis,
    MetricChange,
    RegionBrief,
    RegionMatch,
    ReleaseChanges,
    WeakRegion,
)

__all__ = ["release_changes"]


def _load(folder: Path) -> tuple[Analysis, pd.DataFrame]:
    return public_view(read_analysis(folder)), read_members(folder, ["id", "weak_regions"])


def _rows(members: pd.DataFrame) -> dict[str, set[str]]:
    out: dict[str, set[str]] = {}
    for rid, regions in zip(members["id"], members["weak_regions"], strict=True):
        for w in regions:
            out.setdefault(str(w), set()).add(str(rid))
    return out


def _brief(w: WeakRegion) -> RegionBrief:
    return RegionBrief(w.id, w.rows, w.kind, w.confirmation.ratio, w.p_adjusted)


def release_changes(before: str | Path, after: str | Path, *, match: float = 0.5) -> ReleaseChanges:
    """Compare two bundles (see module docstring)."""
    a, ma = _load(Path(before))
    b, mb = _load(Path(after))
    metrics = []
    for m, _label in task_named(b.task).page_metrics:
        va, vb = a.overall[m].value, b.overall[m].value
        change = vb - va if va is not None and vb is not None else None
        metrics.append(MetricChange(m, va, vb, change))
    ra, rb = _rows(ma), _rows(mb)
    pairs = []
    for wa, rows_a in sorted(ra.items()):
        for wb, rows_b in sorted(rb.items()):
            j = len(rows_a & rows_b) / len(rows_a | rows_b) if rows_a | rows_b else 0.0
            if j >= match:
                pairs.append(RegionMatch(wa, wb, j))
    kept_a, kept_b = {p.before for p in pairs}, {p.after for p in pairs}
    info_a = {w.id: w for w in a.weak_regions}
    info_b = {w.id: w for w in b.weak_regions}
    return ReleaseChanges(
        model=b.model,
        task=b.task,
        before=a.release,
        after=b.release,
        same_rows=a.provenance.fingerprint == b.provenance.fingerprint,
        metrics=tuple(metrics),
        kept=tuple(pairs),
        gained=tuple(_brief(info_b[w]) for w in sorted(info_b) if w not in kept_b),
        lost=tuple(_brief(info_a[w]) for w in sorted(info_a) if w not in kept_a),
    )
