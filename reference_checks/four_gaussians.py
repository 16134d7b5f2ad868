"""Four Gaussian clusters in 5-D, two of them apart only along a low-variance direction.

Clusters sit at the origin, at 10 on the first axis, at 10 on the second axis, and at 4 on
the fifth axis (standard deviation 0.3, 400 rows each). The first two principal components
carry the two large separations, so in the 2-D PCA projection the clusters at the origin
and on the fifth axis overlap and the projection shows 3 groups. Mapper clusters in all
five dimensions inside each cover element of the PCA filter, so it keeps the two apart:
4 components, one per cluster. Source: common practice, no source.
"""

from __future__ import annotations

import numpy as np
from sklearn.cluster import DBSCAN
from sklearn.decomposition import PCA

from reference_checks._case import Data, ReferenceCase, describe, groups_apart
from topoaudit.mapper.topology import invariants

CENTRES = np.array(
    [[0, 0, 0, 0, 0], [10, 0, 0, 0, 0], [0, 10, 0, 0, 0], [0, 0, 0, 0, 4.0]], dtype=float
)


def make_data(n: int = 400, sd: float = 0.3, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    labels = np.repeat(np.arange(4), n)
    return Data(CENTRES[labels] + rng.normal(0.0, sd, (4 * n, 5)), labels)


def projection_groups(data: Data) -> int:
    """Groups that DBSCAN (eps 1, scikit-learn) finds in the 2-D PCA projection."""
    P = PCA(n_components=2).fit_transform(data.X)
    labels = DBSCAN(eps=1.0, min_samples=5).fit_predict(P)
    return int(np.unique(labels[labels >= 0]).size)


def check(graph, data, setting):
    inv = invariants(graph)
    apart, _ = groups_apart(graph, data.labels)
    ok = inv.n_components == 4 and apart
    return ok, describe(inv) + ("; clusters apart" if apart else "; clusters mixed")


CASE = ReferenceCase(
    name="four_gaussians",
    title="Four 5-D Gaussians, two apart only along a low-variance axis; PCA filter",
    source="common practice, no source",
    expected="the 2-D PCA projection shows 3 groups; Mapper finds 4 components, one per cluster",
    make_data=make_data,
    params={
        "filter": "pca",
        "cover": "balanced",
        "n_intervals": 8,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [6, 7, 8, 9, 10], "overlap": [0.2, 0.3, 0.4]},
    check=check,
    data_checks=lambda d: [("2-D PCA projection shows 3 groups", projection_groups(d) == 3)],
)
