"""The Markdown summary of what changed between two bundles (for a pull request).

Every name in it (model, releases, weak-region ids, metric names) goes through
:func:`~topoaudit.report.text.escape`; every number is a count or a rate over a whole
weak region or data set, never one row's value.
"""

from __future__ import annotations

from typing import Any

from topoaudit.audit.tasks import TASKS
from topoaudit.bundle import MIN_CELL_ROWS, is_small
from topoaudit.bundle.records import RegionBrief, ReleaseChanges
from topoaudit.report.text import change, escape, plural, pvalue, rate

__all__ = ["diff_markdown"]

#: metric key -> the words a page uses for it, for every task
NAMES = {key: label for task in TASKS.values() for key, label in task.page_metrics}


def diff_markdown(
    changes: ReleaseChanges | dict[str, Any],
    *,
    heading: str = "##",
    regions: list[str] | None = None,
) -> str:
    """Deterministic Markdown for the output of
    :func:`topoaudit.audit.changes.release_changes` (a record or its plain form).
    ``regions``: the weak regions followed across the two releases
    (:func:`topoaudit.report.gate.review_sections`), shown instead of the plain lists of
    regions gained and lost by their own ids."""
    d = changes if isinstance(changes, ReleaseChanges) else ReleaseChanges.from_dict(changes)
    lines = [
        f"{heading} {escape(d.model)}: release {escape(d.after)} against {escape(d.before)}",
        "",
    ]
    if not d.same_rows:
        lines += [
            "The two audits ran on different rows (fingerprints differ): metric changes "
            "mix model changes with data changes.",
            "",
        ]
    lines += ["| metric | before | after | change |", "|---|---|---|---|"]
    for m in d.metrics:
        lines.append(
            f"| {escape(NAMES.get(m.metric, m.metric))} | {rate(m.before)} | "
            f"{rate(m.after)} | {change(m.before, m.after)} |"
        )
    lines.append("")
    if regions is not None:
        return "\n".join([*lines, *regions]).rstrip("\n") + "\n"

    def listing(title: str, items: tuple[RegionBrief, ...]) -> list[str]:
        if not items:
            return [f"{title}: none.", ""]
        out = [f"{title}:", ""]
        for w in items:
            stats = (
                f"statistics not shown (fewer than {MIN_CELL_ROWS} rows)"
                if is_small(w.rows)
                else f"observed / promised {rate(w.ratio, 2)}, adjusted p-value "
                f"{pvalue(w.p_adjusted)}"
            )
            out.append(
                f"- {escape(w.id)}: {plural(w.rows, 'row')}, "
                f"{escape(w.kind.replace('_', ' '))}s, {stats}"
            )
        return [*out, ""]

    lines += listing("Weak regions gained", d.gained)
    lines += listing("Weak regions lost", d.lost)
    if d.kept:
        lines.append(
            "Weak regions in both: "
            + ", ".join(
                f"{escape(p.before)} → {escape(p.after)} (Jaccard {rate(p.jaccard, 2)})"
                for p in d.kept
            )
            + "."
        )
    else:
        lines.append("Weak regions in both: none.")
    return "\n".join(lines) + "\n"
