"""The error-aware lens's neighbour smoother, against scikit-learn's brute-force
``NearestNeighbors`` (a general-purpose reference library)."""

from __future__ import annotations

import numpy as np
from sklearn.neighbors import NearestNeighbors

from topoaudit.audit.search import smoothed_excess
from topoaudit.audit.weak import Losses


def _losses(observed: np.ndarray, expected: np.ndarray) -> Losses:
    return Losses("error", observed.astype(float), expected.astype(float), True)


def test_smoother_is_the_mean_excess_of_the_k_nearest_discovery_rows():
    rng = np.random.default_rng(0)
    Z = rng.normal(size=(600, 3))
    loss = _losses(rng.random(600) < 0.3, np.full(600, 0.25))
    discovery = rng.random(600) < 0.5
    k = 7
    got = smoothed_excess(Z, loss, discovery, k)
    d = np.flatnonzero(discovery)
    scale = loss.observed[d].sum() / loss.expected[d].sum()
    excess = loss.observed[d] - scale * loss.expected[d]
    nn = NearestNeighbors(n_neighbors=k + 1, algorithm="brute").fit(Z[d])
    idx = nn.kneighbors(Z, return_distance=False)
    own = discovery
    expected = np.where(own, excess[idx[:, 1:]].mean(axis=1), excess[idx[:, :k]].mean(axis=1))
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-12)
