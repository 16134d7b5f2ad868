"""New rows placed on a graph built from other rows (topoaudit.mapper.place).

References: scikit-learn's PCA (the filter values of new rows for the ``pca`` filter) and
the UCI Iris copy shipped with scikit-learn; the known-topology generators of the
reference checks (four Gaussians, two spirals) for the fresh-sample agreement, whose
measure is stated in that test.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.datasets import load_iris
from sklearn.decomposition import PCA
from sklearn.preprocessing import StandardScaler

from reference_checks import four_gaussians, two_spirals
from topoaudit.audit.regions import partition_graph
from topoaudit.errors import DataError
from topoaudit.mapper.graph import MapperBuilder
from topoaudit.mapper.place import filter_values_for, place_rows


def _iris() -> np.ndarray:
    return StandardScaler().fit_transform(load_iris().data)


@pytest.mark.parametrize("lens", ["pca", "eccentricity", "density"])
@pytest.mark.parametrize(
    "make", [_iris, lambda: two_spirals.make_data().X, lambda: four_gaussians.make_data().X]
)
def test_placing_the_graphs_own_rows_gives_back_their_nodes_exactly(make, lens):
    X = make()
    b = MapperBuilder(lens, random_state=0).fit(X)
    p = place_rows(b.graph_, X, b.filter_values_, X, filter_obj=b._filter_obj)
    indptr, nodes = b.graph_.row_nodes()
    np.testing.assert_array_equal(p.indptr, indptr)
    np.testing.assert_array_equal(p.nodes, nodes)
    # each row stands on itself, or on a row equal to it (Iris holds duplicate rows)
    np.testing.assert_array_equal(X[p.nearest], X)
    assert p.outside.size == 0


def test_new_filter_values_of_pca_are_scikit_learns_projection():
    X = _iris()
    rng = np.random.default_rng(0)
    new = X[:20] + rng.normal(scale=0.1, size=(20, 4))
    b = MapperBuilder("pca", random_state=0).fit(X)
    got = filter_values_for(X, b.filter_values_, new, b._filter_obj)
    ref = PCA(n_components=1, svd_solver="covariance_eigh").fit(X).transform(new)
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-12)


def _matched_agreement(a: np.ndarray, b: np.ndarray) -> float:
    """Share of rows whose labels agree after matching the labels one to one so the
    agreement is largest (Hungarian method, scipy's linear_sum_assignment)."""
    la, ia = np.unique(a, return_inverse=True)
    lb, ib = np.unique(b, return_inverse=True)
    table = np.zeros((la.size, lb.size))
    np.add.at(table, (ia, ib), 1)
    r, c = linear_sum_assignment(-table)
    return table[r, c].sum() / a.size


@pytest.mark.parametrize("module", [four_gaussians, two_spirals])
def test_a_fresh_sample_placed_agrees_with_a_graph_built_on_it(module):
    # The measure: each fresh row's home region (Louvain regions of topoaudit.audit.regions)
    # on the earlier graph, through its placed home node, against its home region on a
    # graph built on the fresh sample at the earlier graph's settings, after matching the
    # regions one to one; at least 90% of rows agree. (Generators whose regions have no
    # natural cut, a loop or a symmetric Y, are left out: two builds cut them differently
    # whatever the placement does.)
    first, fresh = module.make_data(seed=0).X, module.make_data(seed=1).X
    a = MapperBuilder("pca", random_state=0).fit(first)
    b = MapperBuilder(
        "pca",
        n_intervals=a.n_intervals_[0],
        overlap=a.overlap_[0],
        clusterer=a.clusterer_,
        random_state=0,
    ).fit(fresh)
    p = place_rows(a.graph_, first, a.filter_values_, fresh, filter_obj=a._filter_obj)
    placed = partition_graph(a.graph_).node_region[p.home_nodes(a.graph_)]
    built = partition_graph(b.graph_).row_region
    assert _matched_agreement(placed, built) >= 0.9


def test_rows_with_other_columns_are_refused_with_both_shapes():
    X = _iris()
    b = MapperBuilder("pca", random_state=0).fit(X)
    with pytest.raises(DataError, match="4 feature columns"):
        place_rows(b.graph_, X, b.filter_values_, X[:, :3])
