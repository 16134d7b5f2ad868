"""The outcome table of a classification audit and the error mix of a set of rows.

References: scikit-learn's ``confusion_matrix``, ``precision_score``, ``recall_score``,
``accuracy_score``, ``brier_score_loss`` and ``log_loss``; the same numbers recounted
with pandas from the rows.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import (
    accuracy_score,
    brier_score_loss,
    confusion_matrix,
    log_loss,
    precision_score,
    recall_score,
)

from topoaudit.audit.metrics import TABLE_THRESHOLDS, error_mix, outcome_table


def _rows(seed: int, n: int = 2000):
    rng = np.random.default_rng(seed)
    p = rng.beta(0.8, 4.0, n)
    y = (rng.uniform(size=n) < p).astype(int)
    return y, p


@pytest.mark.parametrize(("seed", "threshold"), [(0, 0.5), (1, 0.3), (2, 0.12)])
def test_the_outcome_table_matches_scikit_learn(seed, threshold):
    y, p = _rows(seed)
    t = outcome_table(y, p, threshold)
    pred = (p >= threshold).astype(int)
    tn, fp, fn, tp = confusion_matrix(y, pred, labels=[0, 1]).ravel()
    assert (t.true_negatives, t.false_positives, t.false_negatives, t.true_positives) == (
        tn,
        fp,
        fn,
        tp,
    )
    assert t.precision == pytest.approx(precision_score(y, pred))
    assert t.recall == pytest.approx(recall_score(y, pred))
    assert t.error_rate == pytest.approx(1 - accuracy_score(y, pred))
    assert t.brier == pytest.approx(brier_score_loss(y, p))
    assert t.log_loss == pytest.approx(log_loss(y, p))
    # recounted with pandas from the rows
    frame = pd.DataFrame({"y": y, "flagged": p >= threshold})
    assert t.base_rate == pytest.approx(frame.y.mean())
    assert t.flagged_share == pytest.approx(frame.flagged.mean())
    assert t.rows == len(frame)


def test_the_no_skill_rules_are_the_constant_decisions_and_the_constant_score():
    y, p = _rows(3)
    t = outcome_table(y, p, 0.5)
    rules = {r.name: r for r in t.no_skill}
    never, always, base = rules["never flag"], rules["always flag"], rules["base rate as the score"]
    zeros, ones = np.zeros_like(y), np.ones_like(y)
    # reference: scikit-learn on the constant decisions and the constant score
    assert never.error_rate == pytest.approx(1 - accuracy_score(y, zeros)) == t.base_rate
    assert never.recall == 0.0 and never.flagged_share == 0.0
    assert never.precision != never.precision  # no row flagged: undefined (NaN)
    assert always.error_rate == pytest.approx(1 - accuracy_score(y, ones))
    assert always.precision == pytest.approx(precision_score(y, ones))
    assert always.recall == 1.0 and always.brier is None
    rate = np.full(y.size, y.mean())
    assert base.brier == pytest.approx(brier_score_loss(y, rate))
    assert base.log_loss == pytest.approx(log_loss(y, rate))
    # the base rate (about 0.17) is below 0.5: as a score it flags no row
    assert base.flagged_share == 0.0 and base.error_rate == never.error_rate


@pytest.mark.parametrize("threshold", [0.5, 0.37])
def test_the_threshold_table_covers_the_grid_and_marks_the_releases_own(threshold):
    y, p = _rows(4)
    t = outcome_table(y, p, threshold)
    levels = [r.threshold for r in t.thresholds]
    assert levels == sorted({*TABLE_THRESHOLDS, threshold})
    assert TABLE_THRESHOLDS[0] == 0.05 and TABLE_THRESHOLDS[-1] == 0.95
    assert [r.threshold for r in t.thresholds if r.release] == [threshold]
    frame = pd.DataFrame({"y": y, "p": p})
    for row in t.thresholds:
        pred = (frame.p >= row.threshold).astype(int)
        assert row.flagged == pred.sum()
        assert row.flagged_share == pytest.approx(pred.mean())
        assert row.error_rate == pytest.approx(1 - accuracy_score(y, pred))
        assert row.recall == pytest.approx(recall_score(y, pred))
        if pred.sum():
            assert row.precision == pytest.approx(precision_score(y, pred))
        else:
            assert row.precision != row.precision  # undefined, stored as null
    own = next(r for r in t.thresholds if r.release)
    assert (own.precision, own.recall, own.error_rate) == (t.precision, t.recall, t.error_rate)


def test_the_error_mix_splits_the_errors_as_the_confusion_matrix_does():
    y, p = _rows(5, 500)
    m = error_mix(y, p, 0.3)
    _, fp, fn, _ = confusion_matrix(y, (p >= 0.3).astype(int), labels=[0, 1]).ravel()
    assert (m.errors, m.false_positives, m.false_negatives) == (fp + fn, fp, fn)
    assert m.false_positive_share == pytest.approx(fp / (fp + fn))
    assert m.false_positive_share + m.false_negative_share == pytest.approx(1.0)
    none = error_mix(np.array([0, 1]), np.array([0.1, 0.9]), 0.5)
    assert none.errors == 0 and none.false_positive_share != none.false_positive_share
