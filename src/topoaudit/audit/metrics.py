"""Metrics of a release on a set of rows, with intervals.

Classification (a probability score and a decision threshold ``t``; a row is predicted
positive when its score is at least ``t``): rows, positive rate, mean score, error rate,
false positive rate, false negative rate, precision, recall, Brier score, log loss, ROC
AUC (when each class has at least ``min_class_rows`` rows) and expected calibration
error. Regression: MAE, RMSE, mean residual (bias) and R².

Proportions carry Wilson score intervals (:func:`~topoaudit.audit.stats.wilson_interval`);
the other metrics carry seeded percentile-bootstrap intervals when asked for.

For a classification audit, :func:`error_mix` splits a set of rows' errors into false
positives and false negatives, and :func:`outcome_table` lays out the release's decisions
on every row beside the rules that use no information about a row.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.metrics import roc_auc_score

from topoaudit.audit.stats import bootstrap_interval, wilson_interval
from topoaudit.bundle.records import ErrorMix, Estimate, NoSkill, Outcomes, ThresholdRow

__all__ = [
    "Estimate",
    "binary_metrics",
    "calibration_bins",
    "error_mix",
    "expected_calibration_error",
    "log_loss",
    "outcome_table",
    "regression_metrics",
]

#: the thresholds of the outcome table: 0.05 to 0.95 by 0.05 (and the release's own)
TABLE_THRESHOLDS = tuple(round(0.05 * k, 2) for k in range(1, 20))

NAN = float("nan")


def _safe_ratio(a: float, b: float) -> float:
    return a / b if b else NAN


def log_loss(y: np.ndarray, p: np.ndarray) -> float:
    """Mean negative log-likelihood, scores clipped to ``[eps, 1 - eps]`` with ``eps`` the
    float64 machine epsilon (as scikit-learn's ``log_loss`` does)."""
    eps = np.finfo(np.float64).eps
    q = np.clip(p, eps, 1 - eps)
    return float(-np.mean(y * np.log(q) + (1 - y) * np.log(1 - q)))


def expected_calibration_error(y: np.ndarray, p: np.ndarray, n_bins: int = 10) -> float:
    """``sum_b (n_b / n) |mean(y in b) - mean(p in b)|`` over ``n_bins`` equal-width bins
    of the score (Naeini, Cooper and Hauskrecht, 2015; Guo et al., 2017). A score of
    exactly 1 falls in the last bin."""
    if y.size == 0:
        return NAN
    bins = np.minimum((p * n_bins).astype(np.int64), n_bins - 1)
    count = np.bincount(bins, minlength=n_bins)
    sum_y = np.bincount(bins, weights=y, minlength=n_bins)
    sum_p = np.bincount(bins, weights=p, minlength=n_bins)
    used = count > 0
    gap = np.abs(sum_y[used] - sum_p[used])
    return float(gap.sum() / y.size)


def calibration_bins(y: np.ndarray, p: np.ndarray, n_bins: int = 10) -> list[dict[str, float]]:
    """Reliability-diagram bins (the bins of :func:`expected_calibration_error`): for each
    non-empty equal-width score bin, its bounds, rows, mean score and observed rate.

    Examples
    --------
    >>> [b["rows"] for b in calibration_bins(np.array([0, 1, 1]), np.array([0.05, 0.5, 0.95]))]
    [1, 1, 1]
    """
    y = np.asarray(y, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    bins = np.minimum((p * n_bins).astype(np.int64), n_bins - 1)
    out = []
    for b in range(n_bins):
        in_bin = bins == b
        if in_bin.any():
            out.append(
                {
                    "low": b / n_bins,
                    "high": (b + 1) / n_bins,
                    "rows": int(in_bin.sum()),
                    "mean_score": float(p[in_bin].mean()),
                    "observed_rate": float(y[in_bin].mean()),
                }
            )
    return out


def _auc(y: np.ndarray, p: np.ndarray, min_class_rows: int) -> float:
    pos = int(y.sum())
    if pos < min_class_rows or y.size - pos < min_class_rows:
        return NAN
    return float(roc_auc_score(y, p))


def _estimates(
    point: dict[str, Any], n: int, confidence: float, bootstrap: int, random_state: int
) -> dict[str, Estimate]:
    """Evaluate each ``point[name](row_positions)`` on all rows, with a bootstrap interval
    when ``bootstrap`` resamples are asked for and the value is defined."""
    out = {}
    every = np.arange(n)
    for name, fn_ in point.items():
        value = fn_(every)
        if bootstrap and n and np.isfinite(value):
            lo, hi = bootstrap_interval(
                fn_, n, confidence=confidence, n_resamples=bootstrap, random_state=random_state
            )
            out[name] = Estimate(value, lo, hi)
        else:
            out[name] = Estimate(value)
    return out


def binary_metrics(
    y: np.ndarray,
    p: np.ndarray,
    threshold: float = 0.5,
    *,
    confidence: float = 0.95,
    bootstrap: int = 0,
    min_class_rows: int = 5,
    random_state: int = 0,
) -> dict[str, Estimate]:
    """The classification metrics of scores ``p`` against outcomes ``y`` (0/1).

    Parameters
    ----------
    bootstrap : int, default=0
        Resamples for the intervals of the non-proportion metrics; 0 computes none.

    Examples
    --------
    >>> m = binary_metrics(np.array([0, 0, 1, 1]), np.array([0.1, 0.6, 0.4, 0.9]))
    >>> m["error_rate"].value, m["precision"].value, m["rows"].value
    (0.5, 0.5, 4.0)
    """
    y = np.asarray(y, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    n = y.size
    pred = p >= threshold
    pos = y == 1
    tp = int(np.sum(pred & pos))
    fp = int(np.sum(pred & ~pos))
    fn = int(np.sum(~pred & pos))
    n_pos = int(pos.sum())
    n_neg = n - n_pos
    errors = fp + fn

    def prop(k: int, m: int) -> Estimate:
        if m == 0:
            return Estimate(NAN)
        lo, hi = wilson_interval(k, m, confidence)
        return Estimate(k / m, lo, hi)

    out = {
        "rows": Estimate(float(n)),
        "positive_rate": prop(n_pos, n),
        "error_rate": prop(errors, n),
        "false_positive_rate": prop(fp, n_neg),
        "false_negative_rate": prop(fn, n_pos),
        "precision": prop(tp, tp + fp),
        "recall": prop(tp, n_pos),
    }
    point = {
        "mean_score": lambda i: float(np.mean(p[i])) if i.size else NAN,
        "brier": lambda i: float(np.mean((p[i] - y[i]) ** 2)) if i.size else NAN,
        "log_loss": lambda i: log_loss(y[i], p[i]) if i.size else NAN,
        "roc_auc": lambda i: _auc(y[i], p[i], min_class_rows),
        "ece": lambda i: expected_calibration_error(y[i], p[i]),
    }
    out.update(_estimates(point, n, confidence, bootstrap, random_state))
    return out


def regression_metrics(
    y: np.ndarray,
    prediction: np.ndarray,
    *,
    confidence: float = 0.95,
    bootstrap: int = 0,
    random_state: int = 0,
) -> dict[str, Estimate]:
    """MAE, RMSE, mean residual ``mean(y - prediction)`` and R² (``1 - SS_res / SS_tot``;
    nan when ``y`` is constant).

    Examples
    --------
    >>> m = regression_metrics(np.array([1.0, 2.0, 3.0]), np.array([1.0, 2.0, 4.0]))
    >>> round(m["mae"].value, 4), round(m["bias"].value, 4), m["r2"].value
    (0.3333, -0.3333, 0.5)
    """
    y = np.asarray(y, dtype=np.float64)
    f = np.asarray(prediction, dtype=np.float64)

    def r2(i: np.ndarray) -> float:
        if i.size < 2:
            return NAN
        ss_tot = float(np.sum((y[i] - y[i].mean()) ** 2))
        return 1.0 - float(np.sum((y[i] - f[i]) ** 2)) / ss_tot if ss_tot > 0 else NAN

    point = {
        "mae": lambda i: float(np.mean(np.abs(y[i] - f[i]))) if i.size else NAN,
        "rmse": lambda i: float(np.sqrt(np.mean((y[i] - f[i]) ** 2))) if i.size else NAN,
        "bias": lambda i: float(np.mean(y[i] - f[i])) if i.size else NAN,
        "r2": r2,
    }
    n = y.size
    out: dict[str, Estimate] = {"rows": Estimate(float(n))}
    out.update(_estimates(point, n, confidence, bootstrap, random_state))
    return out


def error_mix(y: np.ndarray, p: np.ndarray, threshold: float) -> ErrorMix:
    """The errors of the decisions ``p >= threshold`` against ``y`` (0/1): false positives
    and false negatives, as counts and as shares of the errors.

    Examples
    --------
    >>> m = error_mix(np.array([0, 0, 1, 1]), np.array([0.9, 0.8, 0.1, 0.7]), 0.5)
    >>> m.errors, m.false_positives, m.false_positive_share
    (3, 2, 0.6666666666666666)
    """
    y = np.asarray(y)
    pred = np.asarray(p, dtype=float) >= threshold
    fp = int(np.sum(pred & (y == 0)))
    fn = int(np.sum(~pred & (y == 1)))
    errors = fp + fn
    return ErrorMix(errors, fp, fn, _safe_ratio(fp, errors), _safe_ratio(fn, errors))


def _decisions(y: np.ndarray, pred: np.ndarray) -> dict[str, Any]:
    """Share flagged, precision, recall and error rate of the decisions ``pred``."""
    n, pos = y.size, y == 1
    tp = int(np.sum(pred & pos))
    flagged = int(pred.sum())
    return {
        "flagged_share": _safe_ratio(flagged, n),
        "precision": _safe_ratio(tp, flagged),
        "recall": _safe_ratio(tp, int(pos.sum())),
        "error_rate": _safe_ratio(int(np.sum(pred != pos)), n),
    }


def _no_skill(y: np.ndarray, threshold: float) -> tuple[NoSkill, ...]:
    """Never flag, always flag, and the base rate as every row's score (whose decisions
    at ``threshold`` are one of the other two)."""
    n = y.size
    rate = float(y.mean()) if n else NAN
    never = NoSkill(
        "never flag", **_decisions(y, np.zeros(n, dtype=bool)), brier=None, log_loss=None
    )
    always = NoSkill(
        "always flag", **_decisions(y, np.ones(n, dtype=bool)), brier=None, log_loss=None
    )
    constant = np.full(n, rate)
    base = NoSkill(
        "base rate as the score",
        **_decisions(y, constant >= threshold),
        brier=float(np.mean((constant - y) ** 2)) if n else NAN,
        log_loss=log_loss(y, constant) if n else NAN,
    )
    return never, always, base


def outcome_table(
    y: np.ndarray, p: np.ndarray, threshold: float, thresholds: tuple[float, ...] = TABLE_THRESHOLDS
) -> Outcomes:
    """The outcome table of scores ``p`` against outcomes ``y`` (0/1) at the release's
    ``threshold`` (a row is flagged when its score is at least the threshold): base rate,
    share flagged, confusion counts, precision, recall, error rate, Brier score and log
    loss; the no-skill rules (never flag: error rate = base rate; always flag: error rate =
    1 - base rate; the base rate as a constant score: Brier score ``r(1 - r)`` and log loss
    ``-r log r - (1 - r) log(1 - r)``); and the decisions at each of ``thresholds`` and at
    the release's own (marked ``release``)."""
    y = np.asarray(y, dtype=float)
    p = np.asarray(p, dtype=float)
    n = y.size
    pred, pos = p >= threshold, y == 1
    own = _decisions(y, pred)
    rows = []
    for t in sorted({*thresholds, float(threshold)}):
        flagged = p >= t
        rows.append(ThresholdRow(t, t == threshold, int(flagged.sum()), **_decisions(y, flagged)))
    return Outcomes(
        rows=n,
        threshold=float(threshold),
        base_rate=float(y.mean()) if n else NAN,
        true_positives=int(np.sum(pred & pos)),
        false_positives=int(np.sum(pred & ~pos)),
        false_negatives=int(np.sum(~pred & pos)),
        true_negatives=int(np.sum(~pred & ~pos)),
        brier=float(np.mean((p - y) ** 2)) if n else NAN,
        log_loss=log_loss(y, p) if n else NAN,
        no_skill=_no_skill(y, threshold),
        thresholds=tuple(rows),
        **own,
    )
