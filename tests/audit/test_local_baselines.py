"""The local-model test against two baselines: a constant rate and the release
recalibrated on the region, on the same cross-validation folds.

References: the recalibration of a classification is checked against scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` fitted on each training fold, through a
``FrozenEstimator`` whose decision function is the logit of the release's score (so the
sigmoid is fitted on the same logit, with Platt's targets, on all the fold's rows); that
of a regression against scikit-learn's ``LinearRegression``; the constant baselines
against ``DummyClassifier(strategy="prior")`` and ``DummyRegressor(strategy="mean")``;
the losses against scikit-learn's ``log_loss`` and ``mean_squared_error``.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.calibration import CalibratedClassifierCV
from sklearn.dummy import DummyClassifier, DummyRegressor
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LinearRegression
from sklearn.metrics import log_loss, mean_squared_error
from sklearn.model_selection import KFold, StratifiedKFold

from topoaudit.audit.local import linear_recalibration, local_model_test, platt_scaling


class LogitOfScore(ClassifierMixin, BaseEstimator):
    """A fitted classifier whose decision function is the logit of column 0 (the release's
    score clipped to [1e-6, 1 - 1e-6], as the audit clips it)."""

    def fit(self, X, y):
        self.classes_ = np.array([0, 1])
        return self

    def decision_function(self, X):
        s = np.clip(np.asarray(X, dtype=float)[:, 0], 1e-6, 1 - 1e-6)
        return np.log(s / (1 - s))

    def predict(self, X):
        return (self.decision_function(X) > 0).astype(int)


def _sklearn_platt(s_train, y_train, s_test):
    frozen = FrozenEstimator(LogitOfScore().fit(None, None))
    cal = CalibratedClassifierCV(frozen, method="sigmoid").fit(s_train[:, None], y_train)
    return cal.predict_proba(s_test[:, None])[:, 1]


def _binary_region(seed: int, n: int = 1000, shift: float = 1.5, feature: float = 0.0):
    """A region where the release's logit is off by ``shift`` and misses ``feature``
    times the first feature."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    true_logit = rng.normal(-1.0, 1.2, n)
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(true_logit + feature * X[:, 0])))).astype(int)
    score = 1 / (1 + np.exp(-(true_logit + shift)))
    return X, y, score


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_platt_scaling_matches_scikit_learn_sigmoid_calibration(seed):
    rng = np.random.default_rng(seed)
    s = rng.beta(0.7, 2.0, 500)
    s[:3] = [0.0, 1.0, 1e-9]  # scores at and beyond the clipping
    y = (rng.uniform(size=500) < np.clip(0.05 + 0.6 * s, 0, 1)).astype(int)
    ours = platt_scaling(s[:350], y[:350], s[350:])
    np.testing.assert_allclose(ours, _sklearn_platt(s[:350], y[:350], s[350:]), atol=1e-7)


def test_the_recalibrated_and_constant_losses_are_cross_fitted_on_the_same_folds():
    X, y, score = _binary_region(3)
    res = local_model_test(X, y, score, folds=5, random_state=4)
    folds = StratifiedKFold(n_splits=5, shuffle=True, random_state=4).split(X, y)
    release, constant, recal = [], [], []
    for train, test in folds:
        release.append(log_loss(y[test], score[test], labels=[0, 1]))
        prior = DummyClassifier(strategy="prior").fit(X[train], y[train])
        constant.append(log_loss(y[test], prior.predict_proba(X[test])[:, 1], labels=[0, 1]))
        p = _sklearn_platt(score[train], y[train], score[test])
        recal.append(log_loss(y[test], p, labels=[0, 1]))
    assert res.release_loss == pytest.approx(np.mean(release), rel=1e-12)
    assert res.constant_loss == pytest.approx(np.mean(constant), rel=1e-12)
    assert res.recalibrated_loss == pytest.approx(np.mean(recal), rel=1e-7)
    assert res.recalibration == "Platt scaling" and res.model == "logistic"


def test_a_release_that_is_only_off_in_level_needs_recalibration_not_a_local_model():
    # The release ranks the rows right but promises too much: Platt scaling repairs it,
    # and a local model adds nothing beyond (common practice, no source).
    X, y, score = _binary_region(5, n=1500, shift=1.5)
    res = local_model_test(X, y, score, folds=5)
    assert res.verdict == "recalibration enough"
    assert res.recalibrated_vs_release.high < 0  # the verdict's own interval
    assert res.local_vs_recalibrated.high >= 0
    # the local model beats the raw release, which alone would have read as a gain
    assert res.high < 0 and res.local_loss < res.release_loss
    # the recalibrated release also beats the constant rate, which ignores the score
    assert res.recalibrated_loss < res.constant_loss


def test_a_release_that_misses_a_feature_loses_to_a_local_model_even_recalibrated():
    X, y, score = _binary_region(6, n=1500, shift=0.0, feature=2.0)
    res = local_model_test(X, y, score, folds=5)
    assert res.verdict == "local model better"
    d = res.local_vs_recalibrated
    assert d.high < 0 and d.low <= d.difference <= d.high


def test_a_calibrated_release_shows_no_clear_gain():
    X, y, score = _binary_region(7, n=1500, shift=0.0)
    res = local_model_test(X, y, score, folds=5)
    assert res.verdict == "no clear gain"


def test_a_regression_recalibrates_by_a_line_and_records_the_model_that_ran():
    rng = np.random.default_rng(8)
    n = 600
    X = rng.normal(size=(n, 2))
    truth = 3.0 + 2.0 * X[:, 0]
    y = truth + rng.normal(size=n)
    prediction = 0.5 * truth - 1.0  # a release off in scale and level
    res = local_model_test(X, y, prediction, task="regression", model="logistic", folds=5)
    assert res.model == "ridge"  # the linear model a regression runs for "logistic"
    assert res.recalibration == "linear" and res.verdict == "recalibration enough"
    folds = KFold(n_splits=5, shuffle=True, random_state=0).split(X)
    constant, recal = [], []
    for train, test in folds:
        mean = DummyRegressor(strategy="mean").fit(X[train], y[train]).predict(X[test])
        constant.append(mean_squared_error(y[test], mean))
        line = LinearRegression().fit(prediction[train, None], y[train])
        recal.append(mean_squared_error(y[test], line.predict(prediction[test, None])))
        ours = linear_recalibration(prediction[train], y[train], prediction[test])
        np.testing.assert_allclose(ours, line.predict(prediction[test, None]), rtol=1e-10)
    assert res.constant_loss == pytest.approx(np.mean(constant), rel=1e-12)
    assert res.recalibrated_loss == pytest.approx(np.mean(recal), rel=1e-10)


def test_too_small_a_region_records_the_model_and_no_baselines():
    res = local_model_test(
        np.zeros((20, 2)),
        np.r_[np.zeros(18), np.ones(2)].astype(int),
        np.full(20, 0.3),
        model="ridge",
    )
    assert res.verdict == "too small to try" and res.model == "logistic"
    assert res.recalibrated_loss is None and res.local_vs_recalibrated is None
