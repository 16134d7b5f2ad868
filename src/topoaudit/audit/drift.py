"""Population shift between the rows an earlier release was audited on and new rows.

When a release is validated on a data file of its own, its rows are placed on the graph of
the earlier release (:mod:`topoaudit.mapper.place`). For each part of that graph (a node,
or a region of the partition) the share of the earlier rows there is set against the share
of the new rows placed there. Each part is tested with the chi-square test of the 2 x 2
table (rows in the part or not, earlier or new; Pearson's test without continuity
correction, which equals the two-sided two-proportion z test) and Benjamini–Hochberg (1995)
adjusts across the parts of one kind. A shift says where the population moved: it is
ongoing monitoring, not a finding about the model.
"""

from __future__ import annotations

import numpy as np

from topoaudit.audit.stats import benjamini_hochberg
from topoaudit.bundle.records import ShiftRecord

__all__ = ["shifts"]


def _chi_square(a_in: int, a_n: int, b_in: int, b_n: int) -> float:
    from scipy import stats as st

    table = np.array([[a_in, a_n - a_in], [b_in, b_n - b_in]], dtype=float)
    if (table.sum(axis=0) == 0).any():
        return 1.0
    return float(st.chi2_contingency(table, correction=False).pvalue)


def shifts(
    before: np.ndarray, after: np.ndarray, parts: np.ndarray | None = None
) -> list[ShiftRecord]:
    """The shift of each part between the earlier rows' labels ``before`` and the new
    rows' labels ``after`` (one label per row, for example each row's home region).
    ``parts``: the labels to report (default: every label seen)."""
    before, after = np.asarray(before), np.asarray(after)
    if parts is None:
        parts = np.union1d(before, after)
    n_a, n_b = before.size, after.size
    counts_a = {int(p): int(np.count_nonzero(before == p)) for p in parts}
    counts_b = {int(p): int(np.count_nonzero(after == p)) for p in parts}
    p_values = [_chi_square(counts_a[int(p)], n_a, counts_b[int(p)], n_b) for p in parts]
    adjusted = benjamini_hochberg(p_values) if p_values else []
    return [
        ShiftRecord(
            part=int(p),
            rows_before=counts_a[int(p)],
            rows_after=counts_b[int(p)],
            share_before=counts_a[int(p)] / n_a if n_a else 0.0,
            share_after=counts_b[int(p)] / n_b if n_b else 0.0,
            p_value=float(pv),
            p_adjusted=float(q),
        )
        for p, pv, q in zip(parts, p_values, adjusted, strict=True)
    ]
