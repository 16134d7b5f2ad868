"""A model's history page: its releases, their trends and the weak regions followed.

The page lists every published release (newest first) with its headline numbers and
sign-off, then charts across releases (oldest first): the headline metric and, for a
classification, the expected calibration error, each with its 95% interval; the weak
regions of each release by status (:mod:`topoaudit.audit.lineage`); the population shift
of releases validated on new rows. Last comes the lineage table: each weak region followed
by its tracked id, the release that found it and what became of it release by release.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from topoaudit.audit.lineage import Lineage
from topoaudit.audit.tasks import task_named
from topoaudit.report import views
from topoaudit.report.cautions import caution_lines
from topoaudit.report.figures import chart_block
from topoaudit.report.text import escape
from topoaudit.wording import join_words

__all__ = ["history_charts", "history_page"]

ORIGIN_STATUS = {
    "found again": "found again",
    "introduced": "introduced",
    "returned": "returned",
    "missed before": "weak before, missed then",
}


def _trend_frames(analyses: list[Any]) -> dict[str, tuple[str, pd.DataFrame]]:
    """name -> (metric words, frame of release, value, low, high), oldest release first."""
    task = task_named(analyses[-1].task)
    wanted = [task.headline]
    if task.has_threshold:
        wanted.append(("ece", "expected calibration error"))
    out = {}
    for key, words in wanted:
        rows = []
        for a in analyses:
            est = a.overall.get(key)
            if est is not None and est.value is not None:
                low = est.low if est.low is not None else est.value
                high = est.high if est.high is not None else est.value
                rows.append({"release": a.release, "value": est.value, "low": low, "high": high})
        if rows:
            out[f"trend_{key}"] = (words, pd.DataFrame(rows))
    return out


def _status_counts(lineage: Lineage) -> pd.DataFrame:
    rows: list[dict[str, Any]] = []
    order = {s: k for k, s in enumerate(views.STATUSES)}

    def add(release: str, status: str, n: int) -> None:
        if n:
            rows.append(
                {"release": release, "status": status, "regions": n, "order": order[status]}
            )

    first = lineage.releases[0]
    found_first = sum(1 for t in lineage.tracked.values() if t.found_in == first)
    add(first, "in the first audit", found_first)
    words = {v: k for k, v in ORIGIN_STATUS.items()}
    for step in lineage.steps:
        for status in views.STATUSES[1:5]:
            add(step.after, status, sum(1 for o in step.origins if o.origin == words[status]))
        add(step.after, views.STATUSES[5], sum(1 for f in step.fates if f.fate == "fixed"))
        gone = sum(1 for f in step.fates if f.fate != "fixed" and f.after_id is None)
        add(step.after, views.STATUSES[6], gone)
    return pd.DataFrame(rows, columns=["release", "status", "regions", "order"])


def _drift_frame(analyses: list[Any]) -> pd.DataFrame:
    rows = []
    for a in analyses:
        d = getattr(a, "drift", None)
        if d is None:
            continue
        for s in d.regions:
            rows.append(
                {
                    "release": f"{a.release} on {d.previous}'s graph",
                    "region": f"region {s.part}",
                    "change": 100 * (s.share_after - s.share_before),
                    "shifted": "yes" if s.p_adjusted is not None and s.p_adjusted <= 0.05 else "no",
                }
            )
    return pd.DataFrame(rows)


def _lineage_table(lineage: Lineage) -> list[str]:
    if not lineage.tracked:
        return ["No release of this model has had a weak region.", ""]
    lines = [
        "| tracked region | first found in | weak in | what became of it |",
        "|---|---|---|---|",
    ]
    for tid in sorted(lineage.tracked, key=lambda t: int(t[1:])):
        t = lineage.tracked[tid]
        events = []
        for step in lineage.steps:
            fate = next((f for f in step.fates if f.tracked == tid), None)
            origin = next((o for o in step.origins if o.tracked == tid), None)
            if origin is not None and origin.origin == "returned":
                events.append(f"{escape(step.after)}: returned")
            elif fate is not None and (fate.after_id is None or fate.fate == "worse"):
                events.append(f"{escape(step.after)}: {fate.fate}")
        weak_in = join_words([escape(r) for r in t.weak_in])
        lines.append(
            f"| {tid} | {escape(t.found_in)} | {weak_in} | "
            f"{'; '.join(events) or 'still weak in the latest release'} |"
        )
    return [*lines, ""]


def history_charts(lineage: Lineage | None, analyses: list[Any]) -> dict[str, tuple[str, dict]]:
    """name -> (alt text, Vega-Lite spec) of the history page's charts."""
    charts: dict[str, tuple[str, dict]] = {}
    for name, (words, frame) in _trend_frames(analyses).items():
        spec = views.release_trend_view(frame, metric_title=words).to_dict()
        charts[name] = (f"{words} of each release with its 95% interval", spec)
    if lineage is not None and lineage.tracked:
        spec = views.region_status_view(_status_counts(lineage)).to_dict()
        charts["region_status"] = ("weak regions of each release by status", spec)
    drift = _drift_frame(analyses)
    if not drift.empty:
        charts["drift"] = (
            "share of rows per region, now less then",
            views.drift_view(drift).to_dict(),
        )
    return charts


def history_page(model: str, table: list[str], lineage: Lineage | None, charts: dict) -> str:
    """The page: the release table (``table``, newest first), the charts and the lineage
    table."""
    lines = [f"# {escape(model)}: release history", "", *table, ""]
    if charts:
        lines += ["## Across releases", ""]
        for name, (alt_text, _spec) in charts.items():
            lines += [chart_block(name, alt_text), ""]
    lines += [
        "## Weak regions followed across releases",
        "",
        "Each weak region keeps its tracked id while a later release finds it again on "
        "the same rows (or on new rows placed on them); a new one gets the next number, "
        "never reused. The comparison pages give each step's numbers and tests.",
        "",
    ]
    lines += (
        _lineage_table(lineage)
        if lineage is not None
        else [
            "The releases could not be followed (see the comparison pages).",
            "",
        ]
    )
    return "\n".join(lines + caution_lines("##", review=True))
