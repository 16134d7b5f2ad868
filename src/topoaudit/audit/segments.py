"""The declared segments of an audit: the groups of rows a reviewer names in advance.

``audit.segments`` names columns of the data file; every value of each column is a
*level*, a group of rows. For each level this module records its rows, the release's
metrics there (the metrics of every other group of rows, with the same intervals) and a
two-sided test of its rows' losses against the other rows':

* a count task (each row's loss is 1 for a wrong decision, else 0): Fisher's exact test
  of the 2 x 2 table of level or not against error or not (Fisher, 1922; as
  :func:`scipy.stats.fisher_exact` computes it, two-sided);
* a regression: Welch's t test of the squared errors of the level against those of the
  other rows (Welch, 1947; :func:`scipy.stats.ttest_ind` with ``equal_var=False``).

The p-values of every tested level of every declared column are adjusted together by
Benjamini–Hochberg (:func:`~topoaudit.audit.stats.benjamini_hochberg`); a level whose
adjusted p-value is at most the audit's ``fdr`` is ``"worse"`` or ``"better"`` than the
other rows by the sign of the difference of mean losses, any other tested level shows
``"no clear difference"``. A level without other rows, or (regression) with fewer than
two rows on either side or no spread on both, is ``"not tested"``, with a note saying why.

Levels are declared, not searched for, so there is no discovery half: every row counts.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from topoaudit.audit.stats import benjamini_hochberg_present
from topoaudit.bundle.records import Metrics, Segment, SegmentLevel

__all__ = ["TESTS", "declared_segments", "level_p_value"]

#: the name stored for the test of each kind of loss (``counts``: 0/1 losses)
TESTS = {True: "fisher_exact", False: "welch_t"}


def level_p_value(inside: np.ndarray, outside: np.ndarray, *, counts: bool) -> float | str:
    """The two-sided p-value of the losses ``inside`` a level against those ``outside``
    it, or the reason there is none.

    Examples
    --------
    >>> round(level_p_value(np.array([1, 1, 1, 0]), np.array([0, 0, 0, 1]), counts=True), 4)
    0.4857
    >>> level_p_value(np.array([1.0]), np.array([0.5, 2.0]), counts=False)
    'fewer than 2 rows in the level'
    """
    from scipy import stats

    if outside.size == 0:
        return "no other rows"
    if counts:
        k_in, k_out = int(inside.sum()), int(outside.sum())
        table = [[k_in, inside.size - k_in], [k_out, outside.size - k_out]]
        return float(stats.fisher_exact(table, alternative="two-sided").pvalue)
    if inside.size < 2 or outside.size < 2:
        side = "the level" if inside.size < 2 else "the other rows"
        return f"fewer than 2 rows in {side}"
    if np.ptp(inside) == 0 and np.ptp(outside) == 0:
        return "every squared error is the same on each side"
    return float(stats.ttest_ind(inside, outside, equal_var=False).pvalue)


def _levels(
    codes: np.ndarray,
    names: list[str],
    loss: np.ndarray,
    metrics: Callable[[np.ndarray], Metrics],
    counts: bool,
) -> list[SegmentLevel]:
    """Each level of one column, tested but not yet adjusted."""
    out = []
    for k, name in enumerate(names):
        inside = codes == k
        rows = np.flatnonzero(inside)
        if rows.size == 0:  # a value seen only on rows dropped for missing values
            continue
        p = level_p_value(loss[inside], loss[~inside], counts=counts)
        tested = not isinstance(p, str)
        out.append(
            SegmentLevel(
                level=name,
                rows=int(rows.size),
                metrics=metrics(rows),
                loss=float(loss[inside].mean()),
                rest_rows=int(loss.size - rows.size),
                rest_loss=float(loss[~inside].mean()) if rows.size < loss.size else float("nan"),
                p_value=p if tested else None,
                p_adjusted=None,
                verdict="" if tested else "not tested",
                note="" if tested else p,
            )
        )
    return out


def _judged(level: SegmentLevel, adjusted: float, fdr: float) -> SegmentLevel:
    if adjusted > fdr:
        verdict = "no clear difference"
    else:
        verdict = "worse" if level.loss > level.rest_loss else "better"
    return SegmentLevel(**{**vars(level), "p_adjusted": float(adjusted), "verdict": verdict})


def declared_segments(
    segments: pd.DataFrame,
    loss: np.ndarray,
    metrics: Callable[[np.ndarray], Metrics],
    *,
    counts: bool,
    fdr: float,
) -> tuple[Segment, ...]:
    """The records of the declared segment columns.

    Parameters
    ----------
    segments : DataFrame
        One categorical column per declared column (:attr:`topoaudit.data.Dataset.segments`),
        one row per row of the audit; a level is a category, in the categories' order.
    loss : ndarray of shape (n_rows,)
        Each row's loss: 0 or 1 (``counts``), or its squared error.
    metrics : callable
        The release's metrics on an array of row positions.
    counts : bool
        Whether the losses are counts (Fisher's exact test) or not (Welch's t test).
    fdr : float
        The false discovery rate at which a level is called worse or better.
    """
    loss = np.asarray(loss, dtype=float)
    columns = []
    for col in segments.columns:
        values = segments[col].cat
        levels = _levels(values.codes.to_numpy(), list(values.categories), loss, metrics, counts)
        columns.append(levels)
    cells = [(i, j) for i, ls in enumerate(columns) for j in range(len(ls))]
    adjusted = benjamini_hochberg_present(
        [None if columns[i][j].note else columns[i][j].p_value for i, j in cells]
    )
    for (i, j), adj in zip(cells, adjusted, strict=True):
        if adj is not None:
            columns[i][j] = _judged(columns[i][j], adj, fdr)
    return tuple(
        Segment(column=str(col), test=TESTS[counts], levels=tuple(ls))
        for col, ls in zip(segments.columns, columns, strict=True)
    )
