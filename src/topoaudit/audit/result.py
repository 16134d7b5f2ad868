"""AnalysisResult: the one record everything downstream reads, and the bundle it writes.

A bundle is a folder holding::

    analysis.json     aggregates: config, provenance, metrics, graph summary, regions,
                      weak regions, local-model tests, stability, comparison
    graph.json        node-link graph with per-node statistics (no row-level data)
    members.parquet   row id -> nodes, home region, weak regions, half

Writing is deterministic: floats are rounded to 6 significant digits, NaN becomes null,
keys are sorted, and the only date comes from ``SOURCE_DATE_EPOCH`` when it is set (the
reproducible-builds convention), else today. The same input gives byte-identical files.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["AnalysisResult", "build_date", "canonical_json", "read_result"]

SCHEMA = 1
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
        return _plain(asdict(value))
    return value


def canonical_json(value: Any) -> str:
    """Sorted, rounded, indented JSON with a final newline."""
    return json.dumps(_plain(value), sort_keys=True, indent=1, ensure_ascii=False) + "\n"


@dataclass(frozen=True)
class AnalysisResult:
    """Everything one audit of one release found. Each field is JSON-ready data."""

    model: str
    release: str
    task: str
    created: str
    config: dict[str, Any]
    provenance: dict[str, Any]
    overall: dict[str, Any]
    graph: dict[str, Any]
    search: list[dict[str, Any]]
    regions: list[dict[str, Any]]
    weak_regions: list[dict[str, Any]]
    candidates: list[dict[str, Any]]
    stability: dict[str, Any]
    comparison: dict[str, Any] | None = None
    summary: dict[str, Any] = field(default_factory=dict)
    schema: int = SCHEMA
    extra: dict[str, Any] = field(default_factory=dict)

    def as_dict(self) -> dict[str, Any]:
        return _plain(asdict(self))

    def to_json(self) -> str:
        return canonical_json(self.as_dict())

    def write(self, folder: str | Path, *, graph: dict[str, Any], members: pd.DataFrame) -> Path:
        """Write the bundle files into ``folder`` (created if needed)."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        (folder / "analysis.json").write_text(self.to_json(), encoding="utf-8")
        (folder / "graph.json").write_text(canonical_json(graph), encoding="utf-8")
        members.to_parquet(folder / "members.parquet", index=False, compression="zstd")
        return folder


def read_result(folder: str | Path) -> dict[str, Any]:
    """The parsed ``analysis.json`` of a bundle."""
    return json.loads((Path(folder) / "analysis.json").read_text(encoding="utf-8"))
