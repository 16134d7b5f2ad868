"""The Markdown summary of what changed between two bundles (for a pull request).

Every name in it (model, releases, weak-region ids, metric names) goes through
:func:`~topoaudit.report.text.escape`; every number is a count or a rate over a whole
weak region or data set, never one row's value.
"""

from __future__ import annotations

from typing import Any

from topoaudit.bundle import MIN_CELL_ROWS, is_small
from topoaudit.report.text import count, escape, pvalue, rate, signed

__all__ = ["diff_markdown"]

NAMES = {
    "error_rate": "error rate",
    "false_positive_rate": "false positive rate",
    "false_negative_rate": "false negative rate",
    "roc_auc": "ROC AUC",
    "brier": "Brier score",
    "ece": "expected calibration error",
    "mae": "mean absolute error",
    "rmse": "RMSE",
    "bias": "mean residual",
    "r2": "R²",
}


def diff_markdown(d: dict[str, Any], *, heading: str = "##") -> str:
    """Deterministic Markdown for the output of
    :func:`topoaudit.audit.diff.bundle_diff`."""
    lines = [
        f"{heading} {escape(d['model'])}: release {escape(d['after'])} against "
        f"{escape(d['before'])}",
        "",
    ]
    if not d["same_rows"]:
        lines += [
            "The two audits ran on different rows (fingerprints differ): metric changes "
            "mix model changes with data changes.",
            "",
        ]
    lines += ["| metric | before | after | change |", "|---|---|---|---|"]
    for m in d["metrics"]:
        lines.append(
            f"| {escape(NAMES.get(m['metric'], m['metric']))} | {rate(m['before'])} | "
            f"{rate(m['after'])} | {signed(m['change'])} |"
        )
    lines.append("")

    def listing(title: str, items: list[dict[str, Any]]) -> list[str]:
        if not items:
            return [f"{title}: none.", ""]
        out = [f"{title}:", ""]
        for w in items:
            stats = (
                f"statistics not shown (fewer than {MIN_CELL_ROWS} rows)"
                if is_small(w["rows"])
                else f"observed / promised {rate(w['ratio'], 2)}, adjusted p-value "
                f"{pvalue(w['p_adjusted'])}"
            )
            out.append(
                f"- {escape(w['id'])}: {count(w['rows'])} rows, "
                f"{escape(w['kind'].replace('_', ' '))}s, {stats}"
            )
        return [*out, ""]

    lines += listing("Weak regions gained", d["gained"])
    lines += listing("Weak regions lost", d["lost"])
    if d["kept"]:
        lines.append(
            "Weak regions in both: "
            + ", ".join(
                f"{escape(p['before'])} → {escape(p['after'])} (Jaccard {rate(p['jaccard'], 2)})"
                for p in d["kept"]
            )
            + "."
        )
    else:
        lines.append("Weak regions in both: none.")
    return "\n".join(lines) + "\n"
