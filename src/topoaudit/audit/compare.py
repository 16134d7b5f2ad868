"""One release against another on the same rows, region by region.

For classification, each row is right or wrong under each release (at its own
threshold). In a region with ``b`` rows where the first release is right and the second
wrong, and ``c`` the reverse, the change in error rate is ``(b - c) / n`` with the Wald
interval for a paired difference of proportions,
``(b - c) / n ± z sqrt(b + c - (b - c)² / n) / n`` (Agresti, 2002, section 10.1), and the
exact McNemar test (McNemar, 1947) asks whether the change is real. For regression the
change is in mean squared error, tested with the paired t-test. Benjamini–Hochberg at
``fdr`` runs across the regions; a region got worse (better) when its adjusted p-value is
at most ``fdr`` and its change is positive (negative).

For classification, when the outcomes and both releases' scores are given, each region
(and the whole) also gets two tests on the scores themselves: DeLong's paired test of the
difference in ROC AUC (DeLong, DeLong and Clarke-Pearson, 1988; computed as Sun and Xu,
2014) and a paired t-test of the difference in Brier score (the mean of the per-row
differences of squared errors). Each runs through Benjamini–Hochberg across the regions
on its own; a region's AUC got worse when its adjusted p-value is at most ``fdr`` and the
AUC fell, its Brier score when it rose. A region with fewer than ``min_class_rows`` rows
of either class has no AUC test (its numbers are ``None`` and its note says why).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy import stats as _st

from topoaudit.audit.stats import (
    PairedTest,
    benjamini_hochberg,
    benjamini_hochberg_present,
    delong_test,
    mcnemar_exact,
    paired_mean_test,
)
from topoaudit.bundle.records import RegionChange, ScoreChange
from topoaudit.wording import plural

__all__ = ["Comparison", "RegionChange", "ScoreChange", "compare_releases", "score_changes"]


@dataclass(frozen=True)
class Comparison:
    baseline: str
    candidate: str
    overall: RegionChange
    regions: tuple[RegionChange, ...]

    @property
    def worse(self) -> tuple[int, ...]:
        return tuple(r.region for r in self.regions if r.verdict == "worse")

    @property
    def better(self) -> tuple[int, ...]:
        return tuple(r.region for r in self.regions if r.verdict == "better")


def _change(
    region: int, rows: np.ndarray, loss_a: np.ndarray, loss_b: np.ndarray, counts: bool, z: float
) -> RegionChange:
    a, b_ = loss_a[rows], loss_b[rows]
    n = int(rows.size)
    if counts:
        only_b = int(np.sum((a == 0) & (b_ == 1)))
        only_a = int(np.sum((a == 1) & (b_ == 0)))
        diff = (only_b - only_a) / n
        half = z * np.sqrt(max(only_b + only_a - (only_b - only_a) ** 2 / n, 0.0)) / n
        p = mcnemar_exact(only_b, only_a)
    else:
        d = b_ - a
        diff = float(d.mean())
        sd = float(d.std(ddof=1)) if n > 1 else 0.0
        half = z * sd / np.sqrt(n) if n > 1 else float("nan")
        p = float(_st.ttest_rel(b_, a).pvalue) if n > 1 and sd > 0 else 1.0
        only_b = int(np.sum(d > 0))
        only_a = int(np.sum(d < 0))
    return RegionChange(
        region,
        n,
        float(a.mean()),
        float(b_.mean()),
        float(diff),
        float(diff - half),
        float(diff + half),
        only_b,
        only_a,
        float(p),
        float("nan"),
        "",
    )


def compare_releases(
    loss_before: np.ndarray,
    loss_after: np.ndarray,
    row_region: np.ndarray,
    *,
    baseline: str,
    candidate: str,
    counts: bool = True,
    fdr: float = 0.05,
    confidence: float = 0.95,
    y: np.ndarray | None = None,
    scores: tuple[np.ndarray, np.ndarray] | None = None,
    min_class_rows: int = 5,
) -> Comparison:
    """Compare per-row losses (0/1 errors when ``counts``) of two releases by region;
    with the outcomes ``y`` and the ``scores`` (before, after) of a classification, also
    their ROC AUC and Brier score (see the module docstring)."""
    z = float(_st.norm.ppf(0.5 + confidence / 2))
    overall = _change(0, np.arange(row_region.size), loss_before, loss_after, counts, z)
    labels = np.unique(row_region)
    changes = [
        _change(int(r), np.flatnonzero(row_region == r), loss_before, loss_after, counts, z)
        for r in labels
    ]
    adjusted = benjamini_hochberg([c.p_value for c in changes])
    out = []
    for c, adj in zip(changes, adjusted, strict=True):
        verdict = "no clear change"
        if adj <= fdr:
            verdict = "worse" if c.change > 0 else "better"
        out.append(replace(c, p_adjusted=float(adj), verdict=verdict))
    overall = replace(overall, p_adjusted=overall.p_value, verdict="overall")
    if y is not None and scores is not None:
        groups = [np.arange(row_region.size)] + [np.flatnonzero(row_region == r) for r in labels]
        tests = score_changes(
            y,
            scores[0],
            scores[1],
            groups,
            fdr=fdr,
            confidence=confidence,
            min_class_rows=min_class_rows,
        )
        overall = replace(overall, roc_auc=tests[0][0], brier=tests[0][1])
        out = [replace(c, roc_auc=a, brier=b) for c, (a, b) in zip(out, tests[1:], strict=True)]
    return Comparison(baseline, candidate, overall, tuple(out))


def score_changes(
    y: np.ndarray,
    before: np.ndarray,
    after: np.ndarray,
    groups: list[np.ndarray],
    *,
    fdr: float = 0.05,
    confidence: float = 0.95,
    min_class_rows: int = 5,
) -> list[tuple[ScoreChange, ScoreChange]]:
    """The (ROC AUC, Brier score) tests of each group of rows. The first group is the
    whole, whose adjusted p-value is its own; Benjamini–Hochberg runs over the others."""
    y = np.asarray(y, dtype=float)
    a, b = np.asarray(before, dtype=float), np.asarray(after, dtype=float)
    aucs = [_auc_test(y[g], a[g], b[g], confidence, min_class_rows) for g in groups]
    briers = [_brier_test(y[g], a[g], b[g], confidence) for g in groups]
    per_metric = []
    for metric, tests, sign in (("roc_auc", aucs, -1.0), ("brier", briers, 1.0)):
        per_metric.append(_adjusted(metric, tests, sign, fdr))
    return list(zip(*per_metric, strict=True))


def _auc_test(
    y: np.ndarray, a: np.ndarray, b: np.ndarray, confidence: float, min_class_rows: int
) -> PairedTest | str:
    """DeLong's test on these rows, or why there is none."""
    pos = int(y.sum())
    neg = int(y.size) - pos
    least = max(min_class_rows, 2)
    if pos == 0 or neg == 0:
        every = "without an event" if pos == 0 else "with an event"
        return f"one class only (every row {every}): ROC AUC is not defined"
    if min(pos, neg) < least:
        few = (
            f"{plural(pos, 'row')} with an event"
            if pos < neg
            else (f"{plural(neg, 'row')} without one")
        )
        return f"{few}, fewer than {least}: the ROC AUC change is not tested"
    return delong_test(y, a, b, confidence=confidence)


def _brier_test(y: np.ndarray, a: np.ndarray, b: np.ndarray, confidence: float) -> PairedTest | str:
    if y.size < 2:
        return f"{plural(int(y.size), 'row')}: the Brier score change is not tested"
    return paired_mean_test((a - y) ** 2, (b - y) ** 2, confidence=confidence)


def _adjusted(
    metric: str, tests: list[PairedTest | str], worse_sign: float, fdr: float
) -> list[ScoreChange]:
    """Records of ``tests`` (the first the whole), BH-adjusted across the others; a
    change of sign ``worse_sign`` is "worse"."""
    adjusted = benjamini_hochberg_present(
        [t.p_value if isinstance(t, PairedTest) and i > 0 else None for i, t in enumerate(tests)]
    )
    out = []
    for i, t in enumerate(tests):
        if isinstance(t, str):
            out.append(ScoreChange(metric, *([None] * 7), verdict="not tested", note=t))
            continue
        adj = t.p_value if i == 0 else adjusted[i]
        verdict = "no clear change"
        if adj <= fdr and t.change != 0:
            verdict = "worse" if t.change * worse_sign > 0 else "better"
        out.append(
            ScoreChange(
                metric, t.before, t.after, t.change, t.low, t.high, t.p_value, adj, verdict, ""
            )
        )
    return out
