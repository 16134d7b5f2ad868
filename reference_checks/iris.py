"""UCI Iris (Fisher, 1936), the copy bundled in scikit-learn.

150 rows, 50 per species (setosa, versicolor, virginica). Setosa is linearly separable
from the other two species (Fisher, 1936), so in the graph of the four measurements the
setosa rows must form their own component(s), none shared with the other species.
"""

from __future__ import annotations

import numpy as np
from sklearn.datasets import load_iris

from reference_checks._case import Data, ReferenceCase, counts_check, describe
from topoaudit.mapper.topology import invariants, row_components


def make_data() -> Data:
    d = load_iris()
    return Data(d.data, d.target)


def check(graph, data, setting):
    inv = invariants(graph)
    comp = row_components(graph)
    setosa = data.labels == 0
    covered = bool(np.all(comp >= 0))
    apart = not (set(comp[setosa].tolist()) & set(comp[~setosa].tolist()))
    got = describe(inv) + ("; setosa apart" if apart else "; setosa joined to others")
    return apart and covered, got


CASE = ReferenceCase(
    name="uci_iris",
    title="UCI Iris (scikit-learn copy), PCA filter",
    source="Fisher (1936); UCI Machine Learning Repository, Iris",
    expected="150 rows, 50 per species; setosa rows in component(s) of their own",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 10, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=check,
    data_checks=lambda d: counts_check(d.labels, {0: 50, 1: 50, 2: 50}),
)
