"""What changed between two bundles: headline metrics, weak regions gained and lost.

Both audits are read through their public view (:mod:`topoaudit.bundle`): a weak region
of fewer than ``MIN_CELL_ROWS`` rows keeps its size and loses its statistics.

Weak regions of the two audits are matched by the Jaccard index of their row ids (from
each bundle's ``members.parquet``): a pair with Jaccard at least 0.5 is the same weak
region seen again; a region of the later audit with no match was gained, one of the
earlier with no match was lost.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pandas as pd

from topoaudit.bundle import public_view
from topoaudit.errors import DataError

__all__ = ["HEADLINES", "bundle_diff"]

HEADLINES = {
    "binary": [
        "error_rate",
        "false_positive_rate",
        "false_negative_rate",
        "roc_auc",
        "brier",
        "ece",
    ],
    "regression": ["mae", "rmse", "bias", "r2"],
}


def _load(folder: Path) -> tuple[dict[str, Any], pd.DataFrame]:
    try:
        analysis = public_view(json.loads((folder / "analysis.json").read_text(encoding="utf-8")))
        members = pd.read_parquet(folder / "members.parquet", columns=["id", "weak_regions"])
    except (OSError, ValueError) as exc:
        raise DataError(f"{folder}: not a readable bundle ({exc}).") from exc
    return analysis, members


def _rows(members: pd.DataFrame) -> dict[str, set[str]]:
    out: dict[str, set[str]] = {}
    for rid, regions in zip(members["id"], members["weak_regions"], strict=True):
        for w in regions:
            out.setdefault(str(w), set()).add(str(rid))
    return out


def bundle_diff(before: str | Path, after: str | Path, *, match: float = 0.5) -> dict[str, Any]:
    """Compare two bundles (see module docstring)."""
    a, ma = _load(Path(before))
    b, mb = _load(Path(after))
    task = b["task"]
    metrics = []
    for m in HEADLINES[task]:
        va, vb = a["overall"][m]["value"], b["overall"][m]["value"]
        change = vb - va if va is not None and vb is not None else None
        metrics.append({"metric": m, "before": va, "after": vb, "change": change})
    ra, rb = _rows(ma), _rows(mb)
    pairs = []
    for wa, rows_a in sorted(ra.items()):
        for wb, rows_b in sorted(rb.items()):
            j = len(rows_a & rows_b) / len(rows_a | rows_b) if rows_a | rows_b else 0.0
            if j >= match:
                pairs.append({"before": wa, "after": wb, "jaccard": j})
    kept_a = {p["before"] for p in pairs}
    kept_b = {p["after"] for p in pairs}
    info_a = {w["id"]: w for w in a["weak_regions"]}
    info_b = {w["id"]: w for w in b["weak_regions"]}

    def brief(w: dict[str, Any]) -> dict[str, Any]:
        return {
            "id": w["id"],
            "rows": w["rows"],
            "kind": w["kind"],
            "ratio": w["confirmation"]["ratio"],
            "p_adjusted": w["p_adjusted"],
        }

    return {
        "model": b["model"],
        "before": a["release"],
        "after": b["release"],
        "same_rows": a["provenance"]["fingerprint"] == b["provenance"]["fingerprint"],
        "metrics": metrics,
        "kept": pairs,
        "gained": [brief(info_b[w]) for w in sorted(info_b) if w not in kept_b],
        "lost": [brief(info_a[w]) for w in sorted(info_a) if w not in kept_a],
    }
