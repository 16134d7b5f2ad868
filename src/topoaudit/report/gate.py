"""The release review across releases in Markdown, and the gate a CI job runs on it.

:func:`review_sections` renders what :mod:`topoaudit.audit.lineage` found between two
releases: the fate of every weak region of the earlier release and the origin of every
weak region of the new one, each with its tracked id, where it is (the approximate rule of
the release that found it), its size and its numbers. The comparison page and
``topoaudit diff`` print it; ``topoaudit gate`` prints it after a verdict.

The gate reads the ``[gate]`` policy (:class:`topoaudit.config.GatePolicy`): the outcomes
that fail a release (``fail_on``) and, for the ``"metric"`` rule, how far the main metric
(error rate, or mean squared error for a regression) may rise before a significant rise
fails it. The metric's test is one-sided at ``alpha``: on the same rows, the exact
McNemar test of the discordant rows (McNemar, 1947) for errors and the paired t test for
squared errors; on other rows, Fisher's exact test for errors and Welch's t test for
squared errors.

Exit codes of ``topoaudit gate``: 0 the release passes, 1 it fails a rule, 2 the gate
could not decide (a bundle missing or unreadable, bundles of two models, a policy key or
value that does not exist, regions that cannot be followed onto the new rows).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from topoaudit.audit.lineage import Excess, Fate, Origin, ReleaseRows, Step
from topoaudit.audit.stats import binomial_upper_test
from topoaudit.bundle import MIN_CELL_ROWS, is_small
from topoaudit.config import GatePolicy
from topoaudit.errors import BundleError
from topoaudit.report.cautions import caution_lines
from topoaudit.report.text import escape, pvalue, rate
from topoaudit.wording import count, plural

__all__ = [
    "MetricCheck",
    "Verdict",
    "decide",
    "gate_markdown",
    "metric_check",
    "releases_to",
    "review_sections",
    "run_gate",
]

PASS, FAIL, UNDECIDED = 0, 1, 2

FATE_WORDS = {
    "fixed": "fixed",
    "still weak": "still weak",
    "worse": "worse",
    "unclear": "not shown fixed nor still weak",
}
ORIGIN_WORDS = {
    "introduced": "introduced by this release",
    "missed before": "weak before too, not found then",
    "returned": "returned (not weak in the release before)",
    "found again": "found again",
}
RULE_WORDS = {
    "introduced": "a weak region is introduced by this release",
    "returned": "a weak region that had gone returns",
    "worse": "a weak region of the release before gets worse",
    "still weak": "a weak region of the release before is still weak",
    "missed before": "a new weak region was weak before too",
    "metric": "the main metric rises beyond the tolerance, with a significant test",
}


@dataclass(frozen=True)
class MetricCheck:
    """The main metric before and after, and the one-sided test of a rise."""

    name: str
    before: float
    after: float
    test: str
    p_value: float

    @property
    def change(self) -> float:
        return self.after - self.before


def metric_check(before: ReleaseRows, after: ReleaseRows) -> MetricCheck | None:
    """The rise of the main metric from ``before`` to ``after`` (see module doc)."""
    if before.loss is None or after.loss is None:
        return None
    from scipy import stats as st

    a, b = before.loss, after.loss
    name = "error rate" if after.counts else "mean squared error"
    if before.fingerprint == after.fingerprint and set(before.ids) == set(after.ids):
        b = b[np.argsort(after.ids)][np.argsort(np.argsort(before.ids))]
        if after.counts:
            worse, better = int(((a == 0) & (b == 1)).sum()), int(((a == 1) & (b == 0)).sum())
            p = binomial_upper_test(worse, worse + better, 0.5) if worse + better else 1.0
            test = f"exact McNemar, one-sided ({worse} rows newly wrong, {better} newly right)"
        else:
            p = float(st.ttest_rel(b, a, alternative="greater").pvalue)
            test = "paired t test, one-sided"
    elif after.counts:
        table = [[int(b.sum()), int(b.size - b.sum())], [int(a.sum()), int(a.size - a.sum())]]
        p = float(st.fisher_exact(table, alternative="greater").pvalue)
        test = "Fisher's exact test, one-sided (other rows)"
    else:
        p = float(st.ttest_ind(b, a, equal_var=False, alternative="greater").pvalue)
        test = "Welch's t test, one-sided (other rows)"
    return MetricCheck(
        name, float(a.mean()), float(b.mean()), test, float(np.nan_to_num(p, nan=1.0))
    )


@dataclass(frozen=True)
class Verdict:
    """The gate's decision: exit code, and the rules that failed with what failed them."""

    code: int
    failed: tuple[tuple[str, str], ...]
    reason: str = ""

    @property
    def word(self) -> str:
        return {PASS: "passes", FAIL: "fails", UNDECIDED: "cannot decide"}[self.code]


def decide(step: Step, metric: MetricCheck | None, policy: GatePolicy) -> Verdict:
    """Apply ``policy`` to one release step (see module doc)."""
    if step.note and any(f.after is None for f in step.fates):
        return Verdict(UNDECIDED, (), step.note)
    failed: list[tuple[str, str]] = []
    for rule in policy.fail_on:
        hits: list[str] = []
        if rule in ("worse", "still weak"):
            hits = [_fate_name(f) for f in step.fates if f.fate == rule]
        elif rule in ("introduced", "returned", "missed before"):
            hits = [_origin_name(o) for o in step.origins if o.origin == rule]
        elif rule == "metric" and _metric_fails(metric, policy):
            hits = [
                f"{metric.name} {rate(metric.before)} → {rate(metric.after)} "
                f"(p-value {pvalue(metric.p_value)})"
            ]
        failed += [(rule, h) for h in hits]
    return Verdict(FAIL if failed else PASS, tuple(failed))


def _metric_fails(metric: MetricCheck | None, policy: GatePolicy) -> bool:
    return (
        metric is not None
        and metric.change > policy.metric_tolerance
        and metric.p_value <= policy.alpha
    )


def _fate_name(f: Fate) -> str:
    return f"{f.tracked} (its {f.before_id} of the release before)"


def _origin_name(o: Origin) -> str:
    return f"{o.tracked} ({o.after_id} of this release)"


def _ratio(e: Excess | None) -> str:
    if e is None:
        return "not placed"
    if is_small(e.rows):
        return f"not shown (fewer than {MIN_CELL_ROWS} rows)"
    return f"{e.observed:.0f} / {e.expected:.1f} ({rate(e.ratio, 2)}x)"


def _where(rel: ReleaseRows, local: str | None) -> str:
    if rel.analysis is None or local is None:
        return ""
    w = next((w for w in rel.analysis.weak_regions if w.id == local), None)
    if w is None or w.description is None:
        return "not described (a small region)"
    return escape(w.description.rule.text)


def review_sections(
    step: Step, before: ReleaseRows, after: ReleaseRows, heading: str = "##"
) -> list[str]:
    """Markdown lines: the earlier regions' fates, then the new regions' origins."""
    lines = [
        f"{heading} Weak regions of release {escape(step.before)} under {escape(step.after)}",
        "",
    ]
    if step.note:
        lines += [escape(step.note), ""]
    if not step.fates:
        lines += [f"Release {escape(step.before)} had no weak region.", ""]
    else:
        lines += [
            "Observed / promised: the errors seen against those the release's own scores "
            "promise there, rescaled so the totals agree (1.00x: as promised).",
            "",
            f"| tracked region | where (rule of {escape(step.before)}) | rows then / now | "
            "observed / promised then | observed / promised now | adjusted p-values: still "
            "weak; better than then; worse than then | fate |",
            "|---|---|---|---|---|---|---|",
        ]
        for f in step.fates:
            rows_now = count(f.after.rows) if f.after is not None else "not placed"
            lines.append(
                f"| {f.tracked} ({escape(f.before_id)}) | {_where(before, f.before_id)} | "
                f"{count(f.before.rows if f.before else 0)} / {rows_now} | "
                f"{_ratio(f.before)} | {_ratio(f.after)} | {pvalue(f.q_still)}; "
                f"{pvalue(f.q_better)}; {pvalue(f.q_worse)} | "
                f"**{FATE_WORDS[f.fate]}** |"
            )
        lines.append("")
    return lines + _origin_lines(step, before, after, heading) + caution_lines(heading, review=True)


def _origin_lines(step: Step, before: ReleaseRows, after: ReleaseRows, heading: str) -> list[str]:
    lines = [f"{heading} Weak regions of release {escape(step.after)}", ""]
    if not step.origins:
        return [*lines, f"Release {escape(step.after)} has no weak region.", ""]
    lines += [
        f"| tracked region | where (rule of {escape(step.after)}) | rows | release "
        f"{escape(step.before)} on these rows: observed / promised | adjusted p-value | "
        "origin |",
        "|---|---|---|---|---|---|",
    ]
    sizes = {}
    if after.analysis is not None:
        sizes = {w.id: w.rows for w in after.analysis.weak_regions}
    for o in step.origins:
        earlier = _ratio(o.before) if o.before is not None else "the same region, followed"
        if o.jaccard is not None:
            earlier += f" (Jaccard {rate(o.jaccard, 2)} with it)"
        lines.append(
            f"| {o.tracked} ({escape(o.after_id)}) | {_where(after, o.after_id)} | "
            f"{count(sizes.get(o.after_id, int(after.weak[o.after_id].sum())))} | {earlier} | "
            f"{pvalue(o.q_before)} | **{ORIGIN_WORDS[o.origin]}** |"
        )
    return [*lines, ""]


def gate_markdown(
    verdict: Verdict,
    policy: GatePolicy,
    step: Step,
    rows: tuple[ReleaseRows, ReleaseRows],
    metric: MetricCheck | None,
    pages: str | None = None,
) -> str:
    """The pull-request comment: the verdict first, then the rules, regions and links."""
    before, after = rows
    model = escape(after.model)
    lines = [
        f"## Release gate: {model} {escape(step.after)} against {escape(step.before)}: "
        f"**{verdict.word}**",
        "",
    ]
    if verdict.code == UNDECIDED:
        lines += [escape(verdict.reason), ""]
    elif verdict.failed:
        lines += [f"Failed {plural(len(verdict.failed), 'check')}:", ""]
        lines += [f"- {RULE_WORDS[r]}: {escape(h)}" for r, h in verdict.failed] + [""]
    rules = "; ".join(RULE_WORDS[r] for r in policy.fail_on) or "none"
    lines += [f"The policy fails a release when: {rules}.", ""]
    if metric is not None:
        lines += [
            f"Overall {metric.name}: {rate(metric.before)} before, {rate(metric.after)} now "
            f"(tolerance {rate(policy.metric_tolerance)}; {metric.test}: p-value "
            f"{pvalue(metric.p_value)}).",
            "",
        ]
    lines += review_sections(step, before, after, heading="###")
    if pages:
        base = pages.rstrip("/")
        lines += [
            "### Pages",
            "",
            f"- [release {escape(step.after)}]({base}/{after.model}/{step.after}/)",
            f"- [{escape(step.after)} against {escape(step.before)}]"
            f"({base}/{after.model}/compare/{step.before}-to-{step.after}/)",
            "",
        ]
    return "\n".join(lines)


def releases_to(after: str | Path, *, before: str | Path | None, archive: str | Path | None):
    """The releases to follow, oldest first, ending with the bundle ``after``: the earlier
    bundle ``before``, or every release of the model published in ``archive`` before it (a
    published release of the same name is replaced by ``after``)."""
    from topoaudit.audit.lineage import load_release
    from topoaudit.report.archive import list_releases

    new = load_release(after)
    if before is not None:
        return [load_release(before), new]
    if archive is None:
        raise BundleError("Name the earlier bundle (--before) or the archive (--archive).")
    published = list(reversed(list_releases(archive, new.model)))
    names = [r.release for r in published]
    if new.release in names:
        published = published[: names.index(new.release)]
    if not published:
        msg = (
            f"{archive}: no release of model {new.model!r} was published before "
            f"{new.release!r}; there is nothing to compare it with."
        )
        raise BundleError(msg)
    return [*(load_release(r.folder) for r in published), new]


def run_gate(
    after: str | Path,
    *,
    before: str | Path | None = None,
    archive: str | Path | None = None,
    config: str | Path | None = None,
    pages: str | None = None,
) -> tuple[int, str]:
    """The gate's exit code and its Markdown (see module doc)."""
    from topoaudit.audit.lineage import follow
    from topoaudit.config import gate_policy, load_config

    chain = releases_to(after, before=before, archive=archive)
    prev, new = chain[-2], chain[-1]
    if config is not None:
        policy = load_config(config).gate
    else:
        table = (new.analysis.config if new.analysis else {}).get("gate", {})
        policy = gate_policy(table, f"{Path(after) / 'analysis.json'} (its config's [gate])")
    lineage = follow(chain)
    step = lineage.step_to(new.release)
    metric = metric_check(prev, new)
    verdict = decide(step, metric, policy)
    text = gate_markdown(verdict, policy, step, (prev, new), metric, pages)
    return verdict.code, text
