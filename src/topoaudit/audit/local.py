"""Would a local model do better than the release in a weak region?

For a region's rows, k-fold cross-validation (stratified for classification) scores on
each held-out fold, with models fitted on the other folds' rows of the region only:

* the release's own scores, as they are;
* a constant: the training folds' rate of the outcome (classification) or mean
  (regression), the baseline that uses nothing about a row;
* the release recalibrated on the region: Platt scaling (Platt, 1999), a logistic
  regression of the outcome on the logit of the release's score, with Platt's targets
  ``(N+ + 1) / (N+ + 2)`` and ``1 / (N- + 2)`` (classification), or a least-squares line
  ``a + b f`` of the outcome on the prediction (regression), fitted on the training folds
  and applied to the held-out fold (cross-fitted);
* the local model, taking the features and the release's score (as its logit for
  probabilities) as inputs.

The loss is the log loss (classification) or the squared error (regression). A per-fold
difference of losses gives a mean and a Student t interval across folds (k - 1 degrees of
freedom). A local model is recommended ("local model better") only when the whole
interval of *local minus recalibrated release* is below zero: a local model that only
beats the release's raw scores may owe all of it to recalibration, which a constant rate
already shows where the release is off. Otherwise, when the whole interval of
*recalibrated minus raw release* is below zero, recalibrating the release there is
"recalibration enough"; else there is "no clear gain". A region with too few rows, or
too few of either class, for every fold is reported as too small to try.
"""

from __future__ import annotations

import numpy as np
from scipy import stats as _st
from scipy.special import expit
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.model_selection import KFold, StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from topoaudit.audit.metrics import log_loss
from topoaudit.bundle.records import FoldDifference, LocalModelTest
from topoaudit.errors import ParameterError

__all__ = [
    "LOCAL_MODELS",
    "LocalModelTest",
    "linear_recalibration",
    "local_model_test",
    "logit",
    "model_that_runs",
    "platt_fit",
    "platt_scaling",
]

LOCAL_MODELS = ("logistic", "ridge", "tree", "boosting")
RECALIBRATION = {"binary": "Platt scaling", "regression": "linear"}
#: scores are clipped to [EPS, 1 - EPS] before their logit is taken
EPS = 1e-6

_MODELS = {
    "binary": {
        "logistic": lambda seed: make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)),
        "tree": lambda seed: DecisionTreeClassifier(max_depth=3, random_state=seed),
        "boosting": lambda seed: HistGradientBoostingClassifier(random_state=seed),
    },
    "regression": {
        "ridge": lambda seed: make_pipeline(StandardScaler(), Ridge()),
        "tree": lambda seed: DecisionTreeRegressor(max_depth=3, random_state=seed),
        "boosting": lambda seed: HistGradientBoostingRegressor(random_state=seed),
    },
}


def model_that_runs(name: str, task: str) -> str:
    """The local model that runs for ``name``: "logistic" and "ridge" name the linear
    model of either task (a regression runs ridge for "logistic", a classification
    logistic for "ridge")."""
    models = _MODELS["binary" if task == "binary" else "regression"]
    alias = {"logistic": "ridge", "ridge": "logistic"}
    key = name if name in models else alias.get(name, name)
    if key not in models:
        msg = f"Unknown local model {name!r}; the known local models are {', '.join(LOCAL_MODELS)}."
        raise ParameterError(msg)
    return key


def _model(key: str, task: str, random_state: int):
    return _MODELS["binary" if task == "binary" else "regression"][key](random_state)


def logit(score: np.ndarray) -> np.ndarray:
    """``log(s / (1 - s))`` of the score clipped to ``[EPS, 1 - EPS]``."""
    s = np.clip(np.asarray(score, dtype=float), EPS, 1 - EPS)
    return np.log(s / (1 - s))


def platt_fit(f: np.ndarray, y: np.ndarray, *, max_iter: int = 100) -> tuple[float, float]:
    """Platt's sigmoid ``P(y = 1 | f) = 1 / (1 + exp(-(a f + b)))`` fitted to ``(f, y)``
    (Platt, 1999): the cross-entropy against the targets ``(N+ + 1) / (N+ + 2)`` for a
    positive and ``1 / (N- + 2)`` for a negative is minimised by Newton's method with a
    backtracking line search, from ``a = 0`` and ``b = log((N+ + 1) / (N- + 1))`` (the
    scheme of Lin, Lin and Weng, Machine Learning 2007). Returns ``(a, b)``."""
    f = np.asarray(f, dtype=float)
    y = np.asarray(y)
    n1 = float(np.sum(y == 1))
    n0 = float(y.size - n1)
    t = np.where(y == 1, (n1 + 1.0) / (n1 + 2.0), 1.0 / (n0 + 2.0))
    X = np.column_stack([f, np.ones_like(f)])

    def loss(w: np.ndarray) -> float:
        z = X @ w
        return float(np.sum(np.logaddexp(0.0, z) - t * z))

    w = np.array([0.0, np.log((n1 + 1.0) / (n0 + 1.0))])
    current = loss(w)
    for _ in range(max_iter):
        p = expit(X @ w)
        grad = X.T @ (p - t)
        if np.max(np.abs(grad)) <= 1e-10 * max(1.0, float(y.size)):
            break
        hess = (X * (p * (1.0 - p))[:, None]).T @ X
        step = np.linalg.lstsq(hess, grad, rcond=None)[0]
        size = 1.0
        while size >= 1e-10:
            trial = w - size * step
            value = loss(trial)
            if value <= current - 1e-4 * size * float(grad @ step):
                break
            size /= 2.0
        else:
            break  # no step lowers the loss: at the minimum to rounding
        w, current = trial, value
    return float(w[0]), float(w[1])


def platt_scaling(score_train: np.ndarray, y_train: np.ndarray, score_test: np.ndarray):
    """The held-out probabilities of Platt scaling: the sigmoid of :func:`platt_fit` on
    the logit of the training scores, applied to the logit of the test scores."""
    a, b = platt_fit(logit(score_train), y_train)
    return expit(a * logit(score_test) + b)


def linear_recalibration(f_train: np.ndarray, y_train: np.ndarray, f_test: np.ndarray):
    """The held-out predictions of the least-squares line ``a + b f`` of the outcome on
    the prediction (the minimum-norm solution when the prediction is constant)."""
    X = np.column_stack([np.ones(len(f_train)), f_train])
    coef = np.linalg.lstsq(X, np.asarray(y_train, dtype=float), rcond=None)[0]
    return coef[0] + coef[1] * np.asarray(f_test, dtype=float)


def _fold_difference(d: np.ndarray, confidence: float) -> FoldDifference:
    """Mean of the per-fold differences with its Student t interval."""
    k = d.size
    mean = float(d.mean())
    half = float(_st.t.ppf(0.5 + confidence / 2, k - 1) * d.std(ddof=1) / np.sqrt(k))
    return FoldDifference(mean, mean - half, mean + half)


def _fold_losses(Z, y, score, train, test, task, key, random_state) -> list[float]:
    """Held-out losses of one fold: release, constant, recalibrated release, local model."""
    yt = y[test]
    if task == "binary":
        rate = float(y[train].mean())
        recal = platt_scaling(score[train], y[train], score[test])
        local = _model(key, task, random_state).fit(Z[train], y[train]).predict_proba(Z[test])
        preds = [score[test], np.full(test.size, rate), recal, local[:, 1]]
        return [log_loss(yt, p) for p in preds]
    mean = float(y[train].mean())
    recal = linear_recalibration(score[train], y[train], score[test])
    local = _model(key, task, random_state).fit(Z[train], y[train]).predict(Z[test])
    preds = [score[test], np.full(test.size, mean), recal, local]
    return [float(np.mean((yt - p) ** 2)) for p in preds]


def local_model_test(
    X: np.ndarray,
    y: np.ndarray,
    score: np.ndarray,
    *,
    task: str = "binary",
    model: str = "logistic",
    folds: int = 5,
    confidence: float = 0.95,
    random_state: int = 0,
) -> LocalModelTest:
    """Cross-validated comparison of a local model with the release, with a constant and
    with the release recalibrated on these rows (see the module docstring)."""
    key = model_that_runs(model, task)
    n = int(y.size)
    too_small = n < 10 * folds
    if task == "binary":
        counts = np.bincount(y.astype(int), minlength=2)
        too_small = too_small or counts.min() < folds
    if too_small:
        return LocalModelTest(n, folds, key, *([float("nan")] * 5), verdict="too small to try")
    if task == "binary":
        Z = np.column_stack([X, logit(score)])
        splits = StratifiedKFold(n_splits=folds, shuffle=True, random_state=random_state).split(
            X, y
        )
    else:
        Z = np.column_stack([X, score])
        splits = KFold(n_splits=folds, shuffle=True, random_state=random_state).split(X)
    losses = np.array(
        [_fold_losses(Z, y, score, tr, te, task, key, random_state) for tr, te in splits]
    )
    release, constant, recal, local = losses.T
    vs_release = _fold_difference(local - release, confidence)
    vs_recal = _fold_difference(local - recal, confidence)
    recal_gain = _fold_difference(recal - release, confidence)
    if vs_recal.high < 0:
        verdict = "local model better"
    elif recal_gain.high < 0:
        verdict = "recalibration enough"
    else:
        verdict = "no clear gain"
    return LocalModelTest(
        n,
        folds,
        key,
        float(release.mean()),
        float(local.mean()),
        vs_release.difference,
        vs_release.low,
        vs_release.high,
        verdict,
        constant_loss=float(constant.mean()),
        recalibrated_loss=float(recal.mean()),
        recalibration=RECALIBRATION["binary" if task == "binary" else "regression"],
        local_vs_recalibrated=vs_recal,
        recalibrated_vs_release=recal_gain,
    )
