"""What a region is, in the user's feature terms.

Three descriptions, each labelled as what it is:

* the numeric features that most distinguish the region from the other rows, by the
  standardised mean difference ``(mean_in - mean_out) / sqrt((var_in + var_out) / 2)``
  (the balance measure of Austin, 2009);
* categories over-represented in the region (share inside against share outside);
* a shallow surrogate rule: a decision tree of depth at most 3 fitted to "in the region"
  against "not", whose positive leaves are read as a rule, with the precision and recall
  of that rule for the region. It is an approximation of the region, not its definition.

A region found along the slab graph's direction also gets that direction, as weights on
the standardised features (the features that carry 90% of it, largest first), and the band
its rows fill along it: an oblique band has no short axis-aligned rule.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.tree import DecisionTreeClassifier

from topoaudit.audit.oblique import carrying_features
from topoaudit.bundle.records import (
    CategoryContrast,
    Description,
    FeatureContrast,
    SlabBand,
    SlabTerm,
    SurrogateRule,
)

__all__ = ["Description", "describe_region"]


def _smd(a: np.ndarray, b: np.ndarray) -> float:
    pooled = np.sqrt((a.var(ddof=1) + b.var(ddof=1)) / 2) if a.size > 1 and b.size > 1 else 0.0
    return float((a.mean() - b.mean()) / pooled) if pooled > 0 else 0.0


def _rule_text(tree: DecisionTreeClassifier, names: list[str]) -> list[str]:
    t = tree.tree_
    paths: list[str] = []

    def inside(node: int) -> bool:  # every leaf below predicts "in the region"
        left, right = t.children_left[node], t.children_right[node]
        if left == right:
            return bool(np.argmax(t.value[node][0]) == 1)
        return inside(left) and inside(right)

    def walk(node: int, conds: list[str]) -> None:
        if inside(node):  # one condition list, not one per leaf of a split that changes nothing
            paths.append(" and ".join(conds) if conds else "all rows")
            return
        if t.children_left[node] == t.children_right[node]:
            return
        name, thr = names[t.feature[node]], t.threshold[node]
        walk(t.children_left[node], [*conds, f"{name} <= {thr:.4g}"])
        walk(t.children_right[node], [*conds, f"{name} > {thr:.4g}"])

    walk(0, [])
    return paths


def describe_region(
    mask: np.ndarray,
    frame: pd.DataFrame,
    X: np.ndarray,
    feature_names: tuple[str, ...] | list[str],
    *,
    top: int = 5,
    max_depth: int = 3,
    random_state: int = 0,
    direction: np.ndarray | None = None,
    search_scale: np.ndarray | None = None,
) -> Description:
    """Describe the rows of ``mask`` against the others.

    ``frame`` holds the features as read (numeric and categorical); ``X`` and
    ``feature_names`` the encoded matrix the surrogate tree is fitted on. ``direction``:
    for a region found along the slab graph's direction, that direction over the columns
    of ``X`` as the search scaled them, by ``search_scale`` (see :func:`slab_band`).
    """
    mask = np.asarray(mask, dtype=bool)
    contrasts = []
    categories = []
    for col in frame.columns:
        s = frame[col]
        if pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            v = s.to_numpy(dtype=float)
            contrasts.append(
                FeatureContrast(
                    col, float(v[mask].mean()), float(v[~mask].mean()), _smd(v[mask], v[~mask])
                )
            )
        else:
            text = s.astype(str)
            inside = text[mask].value_counts(normalize=True)
            outside = text[~mask].value_counts(normalize=True)
            for cat, share in inside.items():
                rest = float(outside.get(cat, 0.0))
                if share > rest:
                    categories.append(CategoryContrast(col, str(cat), float(share), rest))
    contrasts.sort(key=lambda c: (-abs(c.smd), c.feature))
    categories.sort(key=lambda c: (-(c.region_share - c.rest_share), c.feature, c.category))
    tree = DecisionTreeClassifier(
        max_depth=max_depth,
        min_samples_leaf=max(5, int(0.01 * mask.size)),
        class_weight="balanced",
        random_state=random_state,
    ).fit(X, mask.astype(int))
    pred = tree.predict(X).astype(bool)
    tp = int(np.sum(pred & mask))
    rule = SurrogateRule(
        text=" OR ".join(f"({p})" for p in _rule_text(tree, list(feature_names))) or "no rule",
        precision=tp / int(pred.sum()) if pred.any() else float("nan"),
        recall=tp / int(mask.sum()) if mask.any() else float("nan"),
        depth=int(tree.get_depth()),
    )
    band = None
    if direction is not None:
        band = slab_band(mask, X, feature_names, direction, search_scale=search_scale)
    return Description(tuple(contrasts[:top]), tuple(categories[:top]), rule, band)


def slab_band(
    mask: np.ndarray,
    X: np.ndarray,
    feature_names: tuple[str, ...] | list[str],
    direction: np.ndarray,
    *,
    search_scale: np.ndarray | None = None,
) -> SlabBand:
    """The direction as weights on the standardised columns of ``X`` and the band (5th to
    95th percentile) of the region's rows along it.

    ``direction`` is a unit vector over the columns as the search scaled them: divided by
    ``search_scale`` (their standard deviations when the search standardised them, the
    default; ones when it did not). On standardised columns the same direction has
    weights ``direction * sd / search_scale``, rescaled to unit length.
    """
    X = np.asarray(X, dtype=float)
    sd = X.std(axis=0)
    sd = np.where(sd > 0, sd, 1.0)
    scale = sd if search_scale is None else np.asarray(search_scale, dtype=float)
    weights = np.asarray(direction, dtype=float) * sd / scale
    weights /= np.linalg.norm(weights)
    t = ((X - X.mean(axis=0)) / sd) @ weights
    low, high = np.quantile(t[np.asarray(mask, dtype=bool)], [0.05, 0.95])
    terms = tuple(
        SlabTerm(str(feature_names[j]), round(float(weights[j]), 3))
        for j in carrying_features(weights)
    )
    return SlabBand(terms, round(float(low), 3), round(float(high), 3))
