"""Would a local model do better than the release in a weak region?

For a region's rows, k-fold cross-validation (stratified for classification) compares on
each held-out fold the release's own scores with a local model trained on the other
folds' rows of the region, taking the features and the release's score (as its logit for
probabilities) as inputs. The loss is the log loss (classification) or the squared
error (regression). The difference ``local - release`` per fold gives a mean and a
Student t interval across folds (k - 1 degrees of freedom). A local model is recommended
only when the whole interval is below zero; a region with too few rows, or too few of
either class, for every fold is reported as too small to try.
"""

from __future__ import annotations

import numpy as np
from scipy import stats as _st
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.model_selection import KFold, StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from topoaudit.audit.metrics import log_loss
from topoaudit.bundle.records import LocalModelTest
from topoaudit.errors import ParameterError

__all__ = ["LOCAL_MODELS", "LocalModelTest", "local_model_test"]

LOCAL_MODELS = ("logistic", "ridge", "tree", "boosting")


def _model(name: str, task: str, random_state: int):
    if task == "binary":
        models = {
            "logistic": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)),
            "tree": lambda: DecisionTreeClassifier(max_depth=3, random_state=random_state),
            "boosting": lambda: HistGradientBoostingClassifier(random_state=random_state),
        }
    else:
        models = {
            "ridge": lambda: make_pipeline(StandardScaler(), Ridge()),
            "tree": lambda: DecisionTreeRegressor(max_depth=3, random_state=random_state),
            "boosting": lambda: HistGradientBoostingRegressor(random_state=random_state),
        }
    alias = {"logistic": "ridge", "ridge": "logistic"}
    key = name if name in models else alias.get(name, name)
    if key not in models:
        msg = f"Unknown local model {name!r}; the known local models are {', '.join(LOCAL_MODELS)}."
        raise ParameterError(msg)
    return models[key]()


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
    """Cross-validated comparison of a local model with the release on these rows."""
    n = int(y.size)
    too_small = n < 10 * folds
    if task == "binary":
        counts = np.bincount(y.astype(int), minlength=2)
        too_small = too_small or counts.min() < folds
    if too_small:
        return LocalModelTest(n, folds, model, *([float("nan")] * 5), verdict="too small to try")
    if task == "binary":
        eps = 1e-6
        s = np.clip(score, eps, 1 - eps)
        extra = np.log(s / (1 - s))
        splitter = StratifiedKFold(n_splits=folds, shuffle=True, random_state=random_state)
        splits = splitter.split(X, y)
    else:
        extra = score
        splits = KFold(n_splits=folds, shuffle=True, random_state=random_state).split(X)
    Z = np.column_stack([X, extra])
    diffs, rel, loc = [], [], []
    for train, test in splits:
        m = _model(model, task, random_state).fit(Z[train], y[train])
        if task == "binary":
            p = m.predict_proba(Z[test])[:, 1]
            r_loss, l_loss = log_loss(y[test], score[test]), log_loss(y[test], p)
        else:
            f = m.predict(Z[test])
            r_loss = float(np.mean((y[test] - score[test]) ** 2))
            l_loss = float(np.mean((y[test] - f) ** 2))
        rel.append(r_loss)
        loc.append(l_loss)
        diffs.append(l_loss - r_loss)
    d = np.asarray(diffs)
    mean = float(d.mean())
    half = float(_st.t.ppf(0.5 + confidence / 2, folds - 1) * d.std(ddof=1) / np.sqrt(folds))
    low, high = mean - half, mean + half
    verdict = "local model better" if high < 0 else "no clear gain"
    return LocalModelTest(
        n, folds, model, float(np.mean(rel)), float(np.mean(loc)), mean, low, high, verdict
    )
