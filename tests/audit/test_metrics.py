"""The metrics of topoaudit.audit.metrics against scikit-learn and hand-written loops."""

from __future__ import annotations

import math

import numpy as np
import pytest
from sklearn.metrics import (
    accuracy_score,
    brier_score_loss,
    confusion_matrix,
    mean_absolute_error,
    precision_score,
    r2_score,
    recall_score,
    roc_auc_score,
    root_mean_squared_error,
)
from sklearn.metrics import log_loss as sk_log_loss

from topoaudit.audit.metrics import (
    Estimate,
    binary_metrics,
    expected_calibration_error,
    log_loss,
    regression_metrics,
)
from topoaudit.audit.stats import wilson_interval

TOL = 1e-9


def scored_rows(seed: int, n: int = 400) -> tuple[np.ndarray, np.ndarray]:
    """Outcomes and somewhat informative, somewhat miscalibrated scores."""
    rng = np.random.default_rng(seed)
    y = (rng.random(n) < 0.35).astype(int)
    p = np.clip(0.25 + 0.35 * y + rng.normal(0, 0.2, n), 0.0, 1.0)
    return y, p


def ece_by_loop(y: np.ndarray, p: np.ndarray, n_bins: int = 10) -> float:
    """Expected calibration error over equal-width bins [k/B, (k+1)/B), the last one
    closed, written out bin by bin."""
    total = 0.0
    for k in range(n_bins):
        lo, hi = k / n_bins, (k + 1) / n_bins
        inside = (p >= lo) & ((p < hi) if k < n_bins - 1 else (p <= hi))
        if inside.any():
            total += inside.sum() / y.size * abs(y[inside].mean() - p[inside].mean())
    return float(total)


# ---------------------------------------------------------------- binary_metrics


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("threshold", [0.3, 0.5, 0.7])
def test_binary_metrics_match_scikit_learn(seed: int, threshold: float) -> None:
    y, p = scored_rows(seed)
    m = binary_metrics(y, p, threshold)
    pred = (p >= threshold).astype(int)
    # Reference: sklearn.metrics.accuracy_score.
    assert 1 - m["error_rate"].value == pytest.approx(accuracy_score(y, pred), abs=TOL)
    # Reference: sklearn.metrics.precision_score.
    assert m["precision"].value == pytest.approx(precision_score(y, pred), abs=TOL)
    # Reference: sklearn.metrics.recall_score.
    assert m["recall"].value == pytest.approx(recall_score(y, pred), abs=TOL)
    # Reference: sklearn.metrics.brier_score_loss.
    assert m["brier"].value == pytest.approx(brier_score_loss(y, p), abs=TOL)
    # Reference: sklearn.metrics.log_loss.
    assert m["log_loss"].value == pytest.approx(sk_log_loss(y, p), abs=TOL)
    # Reference: sklearn.metrics.roc_auc_score.
    assert m["roc_auc"].value == pytest.approx(roc_auc_score(y, p), abs=TOL)
    # Reference: sklearn.metrics.confusion_matrix.
    tn, fp, fn, tp = confusion_matrix(y, pred, labels=[0, 1]).ravel()
    assert m["false_positive_rate"].value == pytest.approx(fp / (fp + tn), abs=TOL)
    assert m["false_negative_rate"].value == pytest.approx(fn / (fn + tp), abs=TOL)
    # Computed directly.
    assert m["rows"].value == y.size
    assert m["positive_rate"].value == pytest.approx(y.mean(), abs=TOL)
    assert m["mean_score"].value == pytest.approx(p.mean(), abs=TOL)
    # Reference: the hand-written loop over 10 equal-width bins above.
    assert m["ece"].value == pytest.approx(ece_by_loop(y, p), abs=TOL)


def test_log_loss_clips_scores_of_zero_and_one_as_scikit_learn_does() -> None:
    y = np.array([0, 1, 1, 0, 1, 0])
    p = np.array([0.0, 1.0, 0.0, 1.0, 0.7, 0.2])
    # Reference: sklearn.metrics.log_loss (clips to the float64 machine epsilon).
    assert log_loss(y, p) == pytest.approx(sk_log_loss(y, p), abs=TOL)
    assert binary_metrics(y, p)["log_loss"].value == pytest.approx(sk_log_loss(y, p), abs=TOL)


def test_a_score_equal_to_the_threshold_is_predicted_positive() -> None:
    y = np.array([0, 1, 0, 1])
    p = np.array([0.5, 0.5, 0.2, 0.9])
    m = binary_metrics(y, p, 0.5)
    pred = (p >= 0.5).astype(int)
    # Reference: sklearn.metrics.precision_score and accuracy_score on p >= threshold.
    assert m["precision"].value == pytest.approx(precision_score(y, pred), abs=TOL)
    assert 1 - m["error_rate"].value == pytest.approx(accuracy_score(y, pred), abs=TOL)


@pytest.mark.parametrize("confidence", [0.9, 0.95])
def test_proportions_carry_wilson_intervals(confidence: float) -> None:
    y, p = scored_rows(4, n=250)
    m = binary_metrics(y, p, 0.5, confidence=confidence)
    pred = p >= 0.5
    pos = y == 1
    tp, fp = int(np.sum(pred & pos)), int(np.sum(pred & ~pos))
    fn = int(np.sum(~pred & pos))
    counts = {
        "positive_rate": (int(pos.sum()), y.size),
        "error_rate": (fp + fn, y.size),
        "false_positive_rate": (fp, int((~pos).sum())),
        "false_negative_rate": (fn, int(pos.sum())),
        "precision": (tp, tp + fp),
        "recall": (tp, int(pos.sum())),
    }
    for name, (k, n) in counts.items():
        # Reference: topoaudit.audit.stats.wilson_interval (itself checked against
        # statsmodels in test_stats.py).
        lo, hi = wilson_interval(k, n, confidence)
        assert m[name].value == pytest.approx(k / n, abs=TOL), name
        assert m[name].low == pytest.approx(lo, abs=TOL), name
        assert m[name].high == pytest.approx(hi, abs=TOL), name


@pytest.mark.parametrize("seed", [5, 6])
def test_expected_calibration_error_matches_the_loop(seed: int) -> None:
    rng = np.random.default_rng(seed)
    y = rng.integers(0, 2, 300).astype(float)
    # Include the exactly representable edges 0, 0.5 and 1 (1 falls in the last bin).
    p = np.concatenate([rng.random(297), [0.0, 0.5, 1.0]])
    # Reference: the hand-written loop over 10 equal-width bins.
    assert expected_calibration_error(y, p) == pytest.approx(ece_by_loop(y, p), abs=TOL)
    assert expected_calibration_error(y, p, n_bins=4) == pytest.approx(
        ece_by_loop(y, p, n_bins=4), abs=TOL
    )


def test_expected_calibration_error_is_zero_for_calibrated_bins() -> None:
    # Each bin's mean score equals its outcome rate.
    y = np.array([0, 1, 0, 1, 1, 1, 1, 0], dtype=float)
    p = np.array([0.5, 0.5, 0.5, 0.5, 0.75, 0.75, 0.75, 0.75])
    assert expected_calibration_error(y, p) == pytest.approx(0.0, abs=TOL)


def test_roc_auc_is_nan_when_a_class_has_too_few_rows() -> None:
    y, p = scored_rows(7, n=60)
    y = np.zeros_like(y)
    y[:4] = 1
    assert math.isnan(binary_metrics(y, p, min_class_rows=5)["roc_auc"].value)
    # Reference: sklearn.metrics.roc_auc_score once the class is large enough.
    auc = binary_metrics(y, p, min_class_rows=4)["roc_auc"].value
    assert auc == pytest.approx(roc_auc_score(y, p), abs=TOL)
    # The negative class counts too.
    assert math.isnan(binary_metrics(1 - y, p, min_class_rows=57)["roc_auc"].value)


def test_undefined_ratios_are_nan() -> None:
    y = np.array([0, 0, 1, 1])
    p = np.array([0.1, 0.2, 0.3, 0.4])
    m = binary_metrics(y, p, 0.9)  # nothing predicted positive
    assert math.isnan(m["precision"].value)
    assert m["precision"].low is None  # no interval of an undefined ratio
    assert m["recall"].value == 0.0
    only_negatives = binary_metrics(np.zeros(4), p, 0.25)
    assert math.isnan(only_negatives["false_negative_rate"].value)
    assert math.isnan(only_negatives["recall"].value)
    assert only_negatives["false_positive_rate"].value == 0.5


def test_binary_metrics_of_no_rows_are_nan() -> None:
    m = binary_metrics(np.array([]), np.array([]))
    assert m["rows"].value == 0.0
    for name, est in m.items():
        if name != "rows":
            assert math.isnan(est.value), name


def test_without_bootstrap_non_proportion_metrics_have_no_interval() -> None:
    y, p = scored_rows(8, n=100)
    m = binary_metrics(y, p)
    for name in ("rows", "mean_score", "brier", "log_loss", "roc_auc", "ece"):
        assert m[name].low is None and m[name].high is None, name
    assert set(m) == {
        "rows",
        "positive_rate",
        "error_rate",
        "false_positive_rate",
        "false_negative_rate",
        "precision",
        "recall",
        "mean_score",
        "brier",
        "log_loss",
        "roc_auc",
        "ece",
    }


def test_bootstrap_intervals_are_seeded_and_bracket_the_value() -> None:
    y, p = scored_rows(9, n=300)
    first = binary_metrics(y, p, bootstrap=200, random_state=3)
    again = binary_metrics(y, p, bootstrap=200, random_state=3)
    other = binary_metrics(y, p, bootstrap=200, random_state=4)
    for name in ("mean_score", "brier", "log_loss", "roc_auc", "ece"):
        est = first[name]
        assert est == again[name], name
        assert est.low < est.high, name
        assert est.low <= est.value <= est.high, name
    assert first["brier"] != other["brier"]
    # Proportions keep their Wilson intervals when a bootstrap is asked for.
    assert first["error_rate"] == binary_metrics(y, p)["error_rate"]


def test_metrics_are_estimate_records_with_plain_forms() -> None:
    m = binary_metrics(np.array([0, 1, 1, 0, 1]), np.array([0.2, 0.8, 0.4, 0.1, 0.9]))
    out = {k: v.to_dict() for k, v in m.items()}
    assert out["rows"] == {"value": 5.0, "low": None, "high": None}  # no interval computed
    assert set(out["error_rate"]) == {"value", "low", "high"}
    assert Estimate(0.5, 0.1, 0.9).to_dict() == {"value": 0.5, "low": 0.1, "high": 0.9}


# ---------------------------------------------------------------- regression_metrics


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_regression_metrics_match_scikit_learn(seed: int) -> None:
    rng = np.random.default_rng(seed)
    y = rng.normal(10, 3, 250)
    f = y + rng.normal(0.4, 1.5, y.size)
    m = regression_metrics(y, f)
    # Reference: sklearn.metrics.mean_absolute_error.
    assert m["mae"].value == pytest.approx(mean_absolute_error(y, f), abs=TOL)
    # Reference: sklearn.metrics.root_mean_squared_error.
    assert m["rmse"].value == pytest.approx(root_mean_squared_error(y, f), abs=TOL)
    # Reference: sklearn.metrics.r2_score.
    assert m["r2"].value == pytest.approx(r2_score(y, f), abs=TOL)
    # Computed directly: the mean residual y - prediction.
    assert m["bias"].value == pytest.approx(float(np.mean(y - f)), abs=TOL)
    assert m["rows"].value == y.size


def test_r2_is_nan_for_a_constant_target_and_for_one_row() -> None:
    # Documented in regression_metrics: nan when y is constant (scikit-learn instead
    # substitutes 0 or 1 by default).
    assert math.isnan(regression_metrics(np.full(5, 2.0), np.arange(5.0))["r2"].value)
    one = regression_metrics(np.array([1.0]), np.array([3.0]))
    assert math.isnan(one["r2"].value)
    assert one["mae"].value == 2.0
    assert one["bias"].value == -2.0


def test_regression_metrics_of_no_rows_are_nan() -> None:
    m = regression_metrics(np.array([]), np.array([]))
    assert m["rows"].value == 0.0
    for name in ("mae", "rmse", "bias", "r2"):
        assert math.isnan(m[name].value), name


def test_regression_bootstrap_intervals_are_seeded_and_bracket_the_value() -> None:
    rng = np.random.default_rng(3)
    y = rng.normal(size=200)
    f = y + rng.normal(0.2, 0.5, y.size)
    first = regression_metrics(y, f, bootstrap=150, random_state=1)
    assert first == regression_metrics(y, f, bootstrap=150, random_state=1)
    for name in ("mae", "rmse", "bias", "r2"):
        est = first[name]
        assert est.low <= est.value <= est.high, name
    assert first["rows"].low is None


def test_calibration_bins_match_sklearn_calibration_curve():
    from sklearn.calibration import calibration_curve

    from topoaudit.audit.metrics import calibration_bins

    rng = np.random.default_rng(8)
    p = rng.uniform(size=3000)
    y = (rng.uniform(size=3000) < p**1.3).astype(int)
    bins = calibration_bins(y, p)
    # reference: sklearn.calibration.calibration_curve, 10 uniform bins, empty bins dropped
    prob_true, prob_pred = calibration_curve(y, p, n_bins=10, strategy="uniform")
    assert [b["observed_rate"] for b in bins] == pytest.approx(prob_true.tolist(), abs=1e-12)
    assert [b["mean_score"] for b in bins] == pytest.approx(prob_pred.tolist(), abs=1e-12)
    assert sum(b["rows"] for b in bins) == 3000
