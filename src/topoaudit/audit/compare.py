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
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy import stats as _st

from topoaudit.audit.stats import benjamini_hochberg, mcnemar_exact
from topoaudit.bundle.records import RegionChange

__all__ = ["Comparison", "RegionChange", "compare_releases"]


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
) -> Comparison:
    """Compare per-row losses (0/1 errors when ``counts``) of two releases by region."""
    z = float(_st.norm.ppf(0.5 + confidence / 2))
    overall = _change(0, np.arange(row_region.size), loss_before, loss_after, counts, z)
    changes = [
        _change(int(r), np.flatnonzero(row_region == r), loss_before, loss_after, counts, z)
        for r in np.unique(row_region)
    ]
    adjusted = benjamini_hochberg([c.p_value for c in changes])
    out = []
    for c, adj in zip(changes, adjusted, strict=True):
        verdict = "no clear change"
        if adj <= fdr:
            verdict = "worse" if c.change > 0 else "better"
        out.append(replace(c, p_adjusted=float(adj), verdict=verdict))
    overall = replace(overall, p_adjusted=overall.p_value, verdict="overall")
    return Comparison(baseline, candidate, overall, tuple(out))
