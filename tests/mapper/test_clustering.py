"""Clusterers checked against scipy/scikit-learn and hand-computed cases."""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy.spatial.distance import cdist
from sklearn.cluster import DBSCAN, KMeans
from sklearn.neighbors import NearestNeighbors

from topoaudit.errors import ParameterError, UnknownNameError
from topoaudit.mapper import clustering
from topoaudit.mapper.clustering import (
    AutoDBSCAN,
    EstimatorClusterer,
    HDBSCANClusterer,
    SilhouetteKMedoids,
    SingleLinkage,
    make_clusterer,
    relabel,
)


def same_partition(a, b) -> bool:
    """True when the labellings group the rows identically (label names aside)."""
    pairs = set(zip(np.asarray(a).tolist(), np.asarray(b).tolist(), strict=True))
    return len(pairs) == len(set(np.asarray(a).tolist())) == len(set(np.asarray(b).tolist()))


def kth_neighbour_distances(X: np.ndarray, k: int) -> np.ndarray:
    """Distance to the k-th nearest other row, by sklearn.neighbors.NearestNeighbors
    queried on its own training rows (column 0 is the row itself)."""
    dist, _ = NearestNeighbors(n_neighbors=k + 1).fit(X).kneighbors(X)
    return dist[:, k]


@pytest.fixture(scope="module")
def three_blobs() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(0)
    centres = [(0.0, 0.0), (6.0, 0.0), (0.0, 6.0)]
    X = np.concatenate([rng.normal(size=(30, 2)) * 0.4 + c for c in centres])
    return X, np.repeat([0, 1, 2], 30)


@pytest.fixture(scope="module")
def mixed_shapes() -> np.ndarray:
    """Two blobs, a segment and a few scattered rows: clusters with uneven spacing."""
    rng = np.random.default_rng(1)
    return np.concatenate(
        [
            rng.normal(size=(40, 2)) * 0.3,
            rng.normal(size=(30, 2)) * 0.5 + (4.0, 1.0),
            np.column_stack([np.linspace(-3, 3, 25), np.full(25, 5.0)]),
            rng.uniform(-6, 8, size=(8, 2)),
        ]
    )


# --- SingleLinkage, cut="scale" ---------------------------------------------------------


@pytest.mark.parametrize(
    ("k", "quantile", "factor"),
    # (factor 1 with k=1 would put a pair of rows exactly on the cut, where the two
    # libraries' rounding decides; 1.1 keeps the check off that knife-edge)
    [(5, 0.9, 2.0), (1, 0.5, 1.1), (3, 1.0, 1.5), (10, 0.75, 3.0)],
    ids=["defaults", "nearest-median", "k3-max", "k10-wide"],
)
def test_scale_cut_equals_dbscan_with_one_sample_at_the_radius(mixed_shapes, k, quantile, factor):
    X = mixed_shapes
    labels = SingleLinkage(k=k, quantile=quantile, factor=factor).fit_predict(X)
    # reference: the radius from sklearn NearestNeighbors k-distances, then
    # sklearn.cluster.DBSCAN(min_samples=1), whose components are single linkage cut there
    eps = factor * np.quantile(kth_neighbour_distances(X, k), quantile)
    ref = DBSCAN(eps=eps, min_samples=1).fit_predict(X)
    assert same_partition(labels, ref)
    assert labels.min() >= 0  # the scale rule never labels noise


def test_scale_cut_separates_two_distant_segments():
    X = np.r_[np.linspace(0, 1, 20), np.linspace(5, 6, 20)].reshape(-1, 1)
    labels = SingleLinkage().fit_predict(X)
    assert same_partition(labels, np.repeat([0, 1], 20))


# --- SingleLinkage, cut="gap" -----------------------------------------------------------

# 1-D points whose single-linkage merge heights are the consecutive gaps
# 1, 1, 1.5, 1, 4, 1, 10 (single linkage in one dimension merges neighbours along the line)
GAP_POINTS = np.cumsum([0.0, 1.0, 1.0, 1.5, 1.0, 4.0, 1.0, 10.0]).reshape(-1, 1)


def test_gap_cut_uses_the_first_empty_bin_of_the_merge_height_histogram():
    heights = np.sort(np.diff(GAP_POINTS.ravel()))
    # hand-computed histogram: 10 bins of width 0.9 over [1, 10]; bin [1, 1.9) holds
    # 1, 1, 1, 1, 1.5; bin [3.7, 4.6) holds 4; the last bin holds 10; the rest are empty,
    # so the first empty bin is [1.9, 2.8) and the cut is at 1.9
    hand_counts = [5, 0, 0, 1, 0, 0, 0, 0, 0, 1]
    counts, edges = np.histogram(heights, bins=10, range=(1.0, 10.0))  # reference: numpy
    assert counts.tolist() == hand_counts
    assert edges[1] == pytest.approx(1.9)
    labels = SingleLinkage(cut="gap").fit_predict(GAP_POINTS)
    # cutting at 1.9 keeps the gaps of 1 and 1.5 and breaks those of 4 and 10
    assert same_partition(labels, [0, 0, 0, 0, 0, 1, 1, 2])


def test_gap_cut_with_no_empty_bin_gives_one_cluster():
    # merge heights 1, 2, ..., 10: each of 10 bins of width 0.9 over [1, 10] holds one
    X = np.cumsum(np.r_[0.0, np.arange(1.0, 11.0)]).reshape(-1, 1)
    assert SingleLinkage(cut="gap").fit_predict(X).tolist() == [0] * 11


def test_gap_cut_with_fewer_bins_can_find_no_gap():
    # with 2 bins over [1, 10] the counts are 6 and 1: no empty bin, one cluster
    assert SingleLinkage(cut="gap", n_bins=2).fit_predict(GAP_POINTS).tolist() == [0] * 8


def test_gap_cut_with_equal_merge_heights_gives_one_cluster():
    X = np.linspace(0, 9, 10).reshape(-1, 1)
    assert SingleLinkage(cut="gap").fit_predict(X).tolist() == [0] * 10


def test_clusters_below_min_cluster_size_become_noise():
    labels = SingleLinkage(cut="gap", min_cluster_size=3).fit_predict(GAP_POINTS)
    # the gap cut gives clusters of 5, 2 and 1 rows; the last two are under 3 rows
    assert (labels[5:] == -1).all()
    assert len(set(labels[:5].tolist())) == 1
    assert labels[0] >= 0


@pytest.mark.parametrize("n", [0, 1], ids=["no-rows", "one-row"])
def test_single_linkage_of_fewer_than_two_rows_is_one_cluster(n):
    assert SingleLinkage().fit_predict(np.zeros((n, 2))).tolist() == [0] * n


def test_single_linkage_samples_large_elements_deterministically():
    rng = np.random.default_rng(4)
    X = np.concatenate([rng.normal(size=(200, 2)), rng.normal(size=(200, 2)) + 10])
    clusterer = SingleLinkage(max_sample=60, random_state=3)
    labels = clusterer.fit_predict(X)
    again = SingleLinkage(max_sample=60, random_state=3).fit_predict(X)
    np.testing.assert_array_equal(labels, again)
    assert same_partition(labels, np.repeat([0, 1], 200))
    # documented behaviour: the sample is clustered exactly and every other row takes the
    # label of its nearest sampled row (nearest by scipy.spatial.distance.cdist)
    sample = clustering._sample(400, 60, 3)
    assert sample.size == 60
    np.testing.assert_array_equal(labels[sample], SingleLinkage().fit_predict(X[sample]))
    nearest = sample[np.argmin(cdist(X, X[sample]), axis=1)]
    np.testing.assert_array_equal(labels, labels[nearest])


# --- AutoDBSCAN -------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("min_samples", "eps_quantile"),
    [(5, 0.9), (3, 0.5), (8, 1.0), (1, 0.7)],
    ids=["defaults", "k3-median", "k8-max", "k1"],
)
def test_auto_dbscan_radius_is_the_k_distance_quantile(mixed_shapes, min_samples, eps_quantile):
    clusterer = AutoDBSCAN(min_samples=min_samples, eps_quantile=eps_quantile)
    # reference: k-distances from sklearn.neighbors.NearestNeighbors (Ester et al., 1996,
    # read the radius off the sorted k-distance plot), and numpy's quantile of them
    ref_eps = np.quantile(kth_neighbour_distances(mixed_shapes, min_samples), eps_quantile)
    assert clusterer.radius(mixed_shapes) == pytest.approx(ref_eps, rel=1e-9)
    # reference: sklearn.cluster.DBSCAN at that radius
    ref = DBSCAN(eps=ref_eps, min_samples=min_samples).fit_predict(mixed_shapes)
    np.testing.assert_array_equal(clusterer.fit_predict(mixed_shapes), ref)


def test_auto_dbscan_with_a_given_eps_is_plain_dbscan(mixed_shapes):
    labels = AutoDBSCAN(eps=0.4, min_samples=4).fit_predict(mixed_shapes)
    # reference: sklearn.cluster.DBSCAN with the same parameters
    np.testing.assert_array_equal(labels, DBSCAN(eps=0.4, min_samples=4).fit_predict(mixed_shapes))
    assert (labels == -1).any()


def test_auto_dbscan_samples_its_k_distances_deterministically(mixed_shapes):
    clusterer = AutoDBSCAN(max_sample=40, random_state=2)
    radius = clusterer.radius(mixed_shapes)
    assert radius == AutoDBSCAN(max_sample=40, random_state=2).radius(mixed_shapes)
    # documented behaviour: the quantile of the sampled rows' k-distances against all rows
    sample = clustering._sample(mixed_shapes.shape[0], 40, 2)
    ref = np.quantile(kth_neighbour_distances(mixed_shapes, 5)[sample], 0.9)
    assert radius == pytest.approx(ref, rel=1e-9)


def test_auto_dbscan_min_rows_is_min_samples():
    assert AutoDBSCAN(min_samples=7).min_rows == 7
    assert AutoDBSCAN(min_samples=1).min_rows == 2


def test_auto_dbscan_radius_stays_positive_on_duplicated_rows():
    X = np.zeros((10, 2))
    assert AutoDBSCAN().radius(X) > 0
    assert AutoDBSCAN().fit_predict(X).tolist() == [0] * 10


# --- SilhouetteKMedoids -------------------------------------------------------------------


def test_kmedoids_finds_three_well_separated_blobs(three_blobs):
    X, truth = three_blobs
    labels = SilhouetteKMedoids().fit_predict(X)
    assert same_partition(labels, truth)


def test_kmedoids_keeps_a_single_blob_whole():
    X = np.random.default_rng(5).normal(size=(60, 2))
    assert SilhouetteKMedoids().fit_predict(X).tolist() == [0] * 60


@pytest.mark.parametrize("k", [2, 3, 4], ids=["k=2", "k=3", "k=4"])
def test_kmedoids_with_fixed_n_clusters_matches_sklearn_extra(three_blobs, k):
    from sklearn_extra.cluster import KMedoids

    X, _ = three_blobs
    labels = SilhouetteKMedoids(n_clusters=k).fit_predict(X)
    assert len(set(labels.tolist())) == k
    # reference: sklearn_extra.cluster.KMedoids on the Euclidean metric, same settings
    ref = KMedoids(
        n_clusters=k, metric="euclidean", method="alternate", init="build", random_state=0
    ).fit_predict(X)
    assert same_partition(labels, ref)


def test_kmedoids_samples_large_elements_deterministically(three_blobs):
    X, truth = three_blobs
    labels = SilhouetteKMedoids(max_sample=20, random_state=4).fit_predict(X)
    again = SilhouetteKMedoids(max_sample=20, random_state=4).fit_predict(X)
    np.testing.assert_array_equal(labels, again)
    assert same_partition(labels, truth)


def test_kmedoids_min_rows_is_three_or_n_clusters():
    assert SilhouetteKMedoids().min_rows == 3
    assert SilhouetteKMedoids(n_clusters=5).min_rows == 5


# --- HDBSCANClusterer ---------------------------------------------------------------------


def test_hdbscan_labels_equal_sklearn_hdbscan(three_blobs):
    from sklearn.cluster import HDBSCAN

    X, truth = three_blobs
    labels = HDBSCANClusterer(min_cluster_size=5).fit_predict(X)
    # reference: sklearn.cluster.HDBSCAN with the same settings
    ref = HDBSCAN(min_cluster_size=5, copy=True).fit_predict(X)
    np.testing.assert_array_equal(labels, ref)
    assert same_partition(labels[labels >= 0], truth[labels >= 0])


def test_hdbscan_min_rows_is_min_cluster_size():
    assert HDBSCANClusterer(min_cluster_size=8).min_rows == 8
    assert HDBSCANClusterer().min_rows == 5


def test_hdbscan_rejects_a_min_cluster_size_below_two():
    with pytest.raises(
        ParameterError,
        match=re.escape("The 'min_cluster_size' parameter of HDBSCANClusterer must be an int"),
    ):
        HDBSCANClusterer(min_cluster_size=1).check()


# --- EstimatorClusterer -------------------------------------------------------------------


def test_estimator_clusterer_gives_the_labels_of_sklearn_kmeans(three_blobs):
    X, _ = three_blobs
    kmeans = KMeans(n_clusters=4, n_init=3, random_state=0)
    labels = EstimatorClusterer(kmeans).fit_predict(X)
    # reference: the same sklearn.cluster.KMeans, fitted directly
    ref = KMeans(n_clusters=4, n_init=3, random_state=0).fit_predict(X)
    np.testing.assert_array_equal(labels, ref)
    assert not hasattr(kmeans, "cluster_centers_"), "the estimator is cloned, not fitted"


@pytest.mark.parametrize(
    ("estimator", "min_rows"),
    [
        (KMeans(n_clusters=6, n_init=1), 6),
        (KMeans(n_clusters=1, n_init=1), 2),
        (DBSCAN(), 2),
    ],
    ids=["kmeans-6", "kmeans-1", "dbscan"],
)
def test_estimator_clusterer_min_rows_is_n_clusters(estimator, min_rows):
    assert EstimatorClusterer(estimator).min_rows == min_rows


def test_estimator_clusterer_uses_an_object_that_cannot_be_cloned():
    class Halves:
        def fit_predict(self, X):
            return (np.arange(len(X)) >= len(X) // 2).astype(int)

    labels = EstimatorClusterer(Halves()).fit_predict(np.zeros((6, 1)))
    assert labels.tolist() == [0, 0, 0, 1, 1, 1]


def test_fit_predict_records_the_fit_time():
    clusterer = SingleLinkage()
    clusterer.fit_predict(np.random.default_rng(0).normal(size=(30, 2)))
    assert clusterer.fit_seconds_ >= 0.0


# --- relabel --------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("labels", "expected"),
    [
        ([7, 7, -1, 3, 7, 3], [0, 0, -1, 1, 0, 1]),
        ([2, 1, 0], [0, 1, 2]),
        ([0, 1, 2], [0, 1, 2]),
        ([-1, -1], [-1, -1]),
        ([-1, 5, -1, 5], [-1, 0, -1, 0]),
        ([], []),
    ],
    ids=["docstring", "reversed", "already-ordered", "all-noise", "noise-first", "empty"],
)
def test_relabel_numbers_clusters_by_first_appearance(labels, expected):
    assert relabel(np.array(labels, dtype=np.int64)).tolist() == expected


def test_relabel_matches_a_first_appearance_loop_on_random_labels():
    labels = np.random.default_rng(6).integers(-1, 12, size=500) * 13
    labels[labels < 0] = -1
    seen: dict[int, int] = {}
    ref = []
    for v in labels.tolist():  # reference: the definition, one label at a time
        if v < 0:
            ref.append(-1)
        else:
            ref.append(seen.setdefault(v, len(seen)))
    assert relabel(labels).tolist() == ref


# --- make_clusterer and parameter checks ----------------------------------------------------


@pytest.mark.parametrize(
    ("name", "cls"),
    [
        ("single_linkage", SingleLinkage),
        ("dbscan", AutoDBSCAN),
        ("kmedoids", SilhouetteKMedoids),
        ("hdbscan", HDBSCANClusterer),
    ],
    ids=["single_linkage", "dbscan", "kmedoids", "hdbscan"],
)
def test_make_clusterer_builds_the_named_clusterer(name, cls):
    assert type(make_clusterer(name)) is cls


def test_make_clusterer_passes_parameters_and_wraps_estimators():
    assert make_clusterer("dbscan", min_samples=3).min_samples == 3
    made = make_clusterer(KMeans(n_clusters=2, n_init=1))
    assert isinstance(made, EstimatorClusterer)
    same = SingleLinkage(cut="gap")
    assert make_clusterer(same) is same


def test_make_clusterer_rejects_an_unknown_name_with_a_suggestion():
    with pytest.raises(
        UnknownNameError, match=r"Unknown clusterer 'kmedoid'.*Did you mean 'kmedoids'\?"
    ):
        make_clusterer("kmedoid")


def test_make_clusterer_rejects_parameters_the_clusterer_does_not_take():
    with pytest.raises(
        ParameterError, match=re.escape("Clusterer 'dbscan' does not take these parameters: ['k']")
    ):
        make_clusterer("dbscan", k=3)


def test_make_clusterer_rejects_an_object_without_fit_predict():
    with pytest.raises(ParameterError, match=r"an object with fit_predict; got int\."):
        make_clusterer(3)


@pytest.mark.parametrize(
    ("clusterer", "fragment"),
    [
        (SingleLinkage(cut="middle"), "The 'cut' parameter of SingleLinkage must be one of"),
        (SingleLinkage(k=0), "The 'k' parameter of SingleLinkage must be an int in the range"),
        (SingleLinkage(quantile=0.0), "The 'quantile' parameter of SingleLinkage must be a"),
        (SingleLinkage(n_bins=1), "The 'n_bins' parameter of SingleLinkage must be an int"),
        (AutoDBSCAN(eps=0.0), "The 'eps' parameter of AutoDBSCAN must be a number in the range"),
        (AutoDBSCAN(random_state=-1), "The 'random_state' parameter of AutoDBSCAN must be"),
        (SilhouetteKMedoids(max_clusters=1), "The 'max_clusters' parameter of SilhouetteKMedoids"),
    ],
    ids=["cut", "k", "quantile", "n_bins", "eps", "random_state", "max_clusters"],
)
def test_clusterers_reject_parameters_outside_their_range(clusterer, fragment):
    with pytest.raises(ParameterError, match=re.escape(fragment)):
        clusterer.fit_predict(np.zeros((10, 2)))


def test_mesh_of_a_large_element_is_scikit_learns_bisecting_kmeans():
    # Reference: scikit-learn's BisectingKMeans (Steinbach, Karypis and Kumar, 2000) at
    # the same k, strategy and seed; an element at the threshold keeps Lloyd's KMeans.
    from sklearn.cluster import BisectingKMeans

    from topoaudit.mapper.clustering import KMeansMesh

    X = np.random.default_rng(3).normal(size=(3000, 4))
    mesh = KMeansMesh(node_rows=100, bisect_above=2999, random_state=5)
    expected = BisectingKMeans(
        n_clusters=30, bisecting_strategy="largest_cluster", random_state=5
    ).fit_predict(X)
    got = mesh.fit_predict(X)
    assert np.array_equal(got, expected)
    sizes = np.bincount(got)
    assert sizes.size == 30 and 50 <= np.median(sizes) <= 150
    lloyd = KMeansMesh(node_rows=100, bisect_above=3000, random_state=5).fit_predict(X)
    assert np.array_equal(lloyd, KMeans(n_clusters=30, n_init=2, random_state=5).fit_predict(X))
