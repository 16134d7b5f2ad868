"""Filters checked against independent implementations (scipy, scikit-learn)."""

from __future__ import annotations

import re
import tracemalloc

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from sklearn.decomposition import PCA
from sklearn.neighbors import KernelDensity, NearestNeighbors
from sklearn.preprocessing import StandardScaler

from topoaudit.errors import FilterError, ParameterError, UnknownNameError
from topoaudit.mapper import _distances, filters
from topoaudit.mapper.filters import (
    CallableFilter,
    Coordinate,
    Eccentricity,
    GaussianDensity,
    KNNDistance,
    PrincipalComponents,
    TransformerFilter,
    Values,
    make_filter,
)


@pytest.fixture(scope="module")
def data() -> np.ndarray:
    """150 rows in 4 dimensions with unequal scales, away from the origin."""
    rng = np.random.default_rng(7)
    return rng.normal(size=(150, 4)) * [1.0, 2.0, 3.0, 0.5] + [5.0, -3.0, 0.0, 10.0]


def eccentricity_reference(X: np.ndarray, p: float) -> np.ndarray:
    """Mean distance to the *other* rows, from scipy.spatial.distance.cdist."""
    D = cdist(X, X)
    return ((D**p).sum(axis=1) / (X.shape[0] - 1)) ** (1.0 / p)


# --- Coordinate ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("columns", "expected_cols"),
    [(0, [0]), (2, [2]), ((1, 3), [1, 3]), ([3, 0], [3, 0])],
    ids=["first", "third", "pair-tuple", "pair-list-reversed"],
)
def test_coordinate_keeps_the_named_columns_in_order(data, columns, expected_cols):
    out = Coordinate(columns).fit_transform(data)
    # reference: numpy column indexing
    np.testing.assert_array_equal(out, data[:, expected_cols])


def test_coordinate_rejects_a_column_that_does_not_exist(data):
    with pytest.raises(FilterError, match=r"Coordinate column 4 does not exist; X has 4 columns\."):
        Coordinate((0, 4)).fit_transform(data)


# --- PrincipalComponents ----------------------------------------------------------------


@pytest.mark.parametrize("n_components", [1, 2], ids=["one-component", "two-components"])
def test_pca_matches_sklearn_pca(data, n_components):
    ours = PrincipalComponents(n_components).fit_transform(data)
    # reference: sklearn.decomposition.PCA with the exact LAPACK solver
    ref = PCA(n_components=n_components, svd_solver="full").fit_transform(data)
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-9)


def test_pca_standardize_matches_sklearn_pca_on_standard_scaled_data(data):
    ours = PrincipalComponents(2, standardize=True).fit_transform(data)
    # reference: sklearn StandardScaler (population standard deviation) followed by PCA
    ref = PCA(n_components=2, svd_solver="full").fit_transform(StandardScaler().fit_transform(data))
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-9)


def test_pca_with_fewer_rows_than_columns_matches_sklearn_pca():
    X = np.random.default_rng(3).normal(size=(4, 6))
    ours = PrincipalComponents(2).fit_transform(X)
    # reference: sklearn.decomposition.PCA
    ref = PCA(n_components=2, svd_solver="full").fit_transform(X)
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-9)


def test_pca_needs_as_many_columns_as_components():
    with pytest.raises(FilterError, match=r"PrincipalComponents needs at least 2 columns; X has 1"):
        PrincipalComponents(2).fit_transform(np.arange(10.0))


# --- GaussianDensity ---------------------------------------------------------------------


@pytest.mark.parametrize("bandwidth", [0.3, 1.0, 4.0], ids=["narrow", "unit", "wide"])
def test_density_matches_sklearn_kernel_density_up_to_its_constant(data, bandwidth):
    ours = GaussianDensity(bandwidth=bandwidth).fit_transform(data).ravel()
    # reference: sklearn.neighbors.KernelDensity (gaussian kernel, exact: atol=rtol=0);
    # it includes the normalising constant (2 pi h^2)^(-d/2), which ours omits.
    kde = KernelDensity(kernel="gaussian", bandwidth=bandwidth).fit(data)
    d = data.shape[1]
    ref = np.exp(kde.score_samples(data)) * (2 * np.pi * bandwidth**2) ** (d / 2)
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=0)


def test_density_default_bandwidth_is_scotts_rule_on_the_mean_standard_deviation(data):
    n, d = data.shape
    # reference: Scott's rule h = n^(-1/(d+4)) * scale (Scott, 1992), with the mean column
    # standard deviation as the scale, as documented in GaussianDensity
    h = float(np.mean(data.std(axis=0))) * n ** (-1.0 / (d + 4))
    ours = GaussianDensity().fit_transform(data).ravel()
    # reference: sklearn.neighbors.KernelDensity at that bandwidth, constant removed
    kde = KernelDensity(kernel="gaussian", bandwidth=h).fit(data)
    ref = np.exp(kde.score_samples(data)) * (2 * np.pi * h**2) ** (d / 2)
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=0)


def test_density_of_a_lone_far_row_is_one_over_n():
    X = np.r_[np.zeros((9, 2)), [[1e6, 1e6]]]
    out = GaussianDensity(bandwidth=1.0).fit_transform(X).ravel()
    # hand computation: the far row only sees its own kernel value 1, out of n = 10 rows;
    # the 9 coincident rows see 9 ones
    np.testing.assert_allclose(out, [0.9] * 9 + [0.1], rtol=1e-12)


# --- Eccentricity ------------------------------------------------------------------------


@pytest.mark.parametrize("p", [1.0, 2.0, 0.5], ids=["p=1", "p=2", "p=0.5"])
def test_eccentricity_is_the_mean_distance_to_the_other_rows(data, p):
    ours = Eccentricity(p=p).fit_transform(data).ravel()
    np.testing.assert_allclose(ours, eccentricity_reference(data, p), rtol=1e-9, atol=0)


def test_eccentricity_keeps_its_precision_far_from_the_origin():
    X = np.random.default_rng(11).normal(size=(120, 3)) + 1e4
    ours = Eccentricity().fit_transform(X).ravel()
    np.testing.assert_allclose(ours, eccentricity_reference(X, 1.0), rtol=1e-9, atol=0)


def test_eccentricity_of_two_rows_is_their_distance():
    X = np.array([[0.0, 0.0], [3.0, 4.0]])
    # hand computation: a 3-4-5 triangle
    np.testing.assert_allclose(Eccentricity().fit_transform(X).ravel(), [5.0, 5.0])


# --- KNNDistance -------------------------------------------------------------------------


@pytest.mark.parametrize("k", [1, 3, 10], ids=["k=1", "k=3", "k=10"])
def test_knn_distance_matches_sklearn_nearest_neighbors(data, k):
    ours = KNNDistance(k).fit_transform(data).ravel()
    # reference: sklearn.neighbors.NearestNeighbors queried on its own training rows, so
    # column 0 is the row itself and column k its k-th nearest other row
    dist, _ = NearestNeighbors(n_neighbors=k + 1).fit(data).kneighbors(data)
    np.testing.assert_allclose(ours, dist[:, k], rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("k", [1, 5], ids=["k=1", "k=5"])
def test_knn_distance_matches_sorted_cdist_rows(data, k):
    ours = KNNDistance(k).fit_transform(data).ravel()
    # reference: scipy.spatial.distance.cdist, each row sorted (position 0 is the self)
    ref = np.sort(cdist(data, data), axis=1)[:, k]
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=1e-12)


def test_knn_distance_keeps_its_precision_far_from_the_origin():
    X = np.random.default_rng(12).normal(size=(120, 3)) + 1e5
    ours = KNNDistance(2).fit_transform(X).ravel()
    # reference: scipy.spatial.distance.cdist, each row sorted (position 0 is the self)
    ref = np.sort(cdist(X, X), axis=1)[:, 2]
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=0)


def test_knn_distance_of_duplicated_rows_is_zero():
    X = np.array([[0.0], [0.0], [5.0], [7.0]])
    # hand computation: nearest other rows are at 0, 0, 2, 2
    np.testing.assert_allclose(KNNDistance(1).fit_transform(X).ravel(), [0.0, 0.0, 2.0, 2.0])


def test_knn_distance_needs_more_rows_than_k():
    with pytest.raises(FilterError, match=r"with k=10 needs more than 10 rows; X has 5\."):
        KNNDistance(10).fit_transform(np.zeros((5, 2)))


# --- sampled references --------------------------------------------------------------------


@pytest.fixture(scope="module")
def many_rows() -> np.ndarray:
    return np.random.default_rng(1).normal(size=(400, 3))


def test_sampled_eccentricity_is_deterministic_and_close_to_exact(many_rows):
    first = Eccentricity(max_reference=200, random_state=5).fit_transform(many_rows)
    again = Eccentricity(max_reference=200, random_state=5).fit_transform(many_rows)
    np.testing.assert_array_equal(first, again)
    exact = eccentricity_reference(many_rows, 1.0)
    # tolerance: common practice, no source; a mean over 200 of 400 rows drifts a few
    # percent (at most about 6% over 20 seeds tried), 10% leaves a margin
    assert np.max(np.abs(first.ravel() - exact) / exact) < 0.1
    other = Eccentricity(max_reference=200, random_state=6).fit_transform(many_rows)
    assert not np.array_equal(first, other)


def test_sampled_density_is_deterministic_and_close_to_exact(many_rows):
    first = GaussianDensity(0.5, max_reference=200, random_state=5).fit_transform(many_rows)
    again = GaussianDensity(0.5, max_reference=200, random_state=5).fit_transform(many_rows)
    np.testing.assert_array_equal(first, again)
    exact = GaussianDensity(0.5).fit_transform(many_rows).ravel()
    # tolerance: common practice, no source (correlation 0.92 or more over 20 seeds tried)
    assert np.corrcoef(first.ravel(), exact)[0, 1] > 0.9
    # the documented floor: at least one reference's worth of kernel mass per row
    assert first.min() >= 1.0 / 200


# --- bounded memory --------------------------------------------------------------------------


def test_iter_sq_distances_blocks_stay_under_max_bytes_and_match_cdist(data):
    max_bytes = 8 * data.shape[0] * 7  # room for seven rows of distances per block
    blocks = list(_distances.iter_sq_distances(data, data, max_bytes=max_bytes))
    assert all(d2.nbytes <= max_bytes for _, _, d2 in blocks)
    assert [start for start, _, _ in blocks] == list(range(0, data.shape[0], 7))
    full = np.concatenate([d2 for _, _, d2 in blocks])
    # reference: scipy.spatial.distance.cdist with metric="sqeuclidean"
    np.testing.assert_allclose(full, cdist(data, data, "sqeuclidean"), rtol=1e-9, atol=1e-9)
    np.testing.assert_array_equal(np.diag(full), 0.0)


def test_kth_distance_is_the_same_whatever_the_block_size(data):
    whole = _distances.kth_distance(data, data, 4, self_included=True)
    small = _distances.kth_distance(data, data, 4, self_included=True, max_bytes=64)
    # a matrix product summed in other blocks may round differently in the last bits
    np.testing.assert_allclose(whole, small, rtol=1e-12, atol=0)


def test_eccentricity_never_allocates_an_n_by_n_matrix(monkeypatch):
    n = 2000
    X = np.random.default_rng(2).normal(size=(n, 3))
    unblocked = eccentricity_reference(X, 1.0)
    max_bytes = 2**20
    seen: list[tuple[int, int]] = []

    def small_blocks(A, B, **kwargs):
        for start, stop, d2 in _distances.iter_sq_distances(A, B, max_bytes=max_bytes):
            seen.append(d2.shape)
            yield start, stop, d2

    monkeypatch.setattr(filters, "iter_sq_distances", small_blocks)
    tracemalloc.start()
    try:
        blocked = Eccentricity(max_reference=n).fit_transform(X).ravel()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert len(seen) > 1
    assert all(rows * cols * 8 <= max_bytes for rows, cols in seen)
    # an n x n float64 matrix would take 32 MB; a few 1 MiB blocks are all that is needed
    assert peak < n * n * 8 / 4
    np.testing.assert_allclose(blocked, unblocked, rtol=1e-9, atol=0)


# --- Values, TransformerFilter, CallableFilter ---------------------------------------------


@pytest.mark.parametrize(
    "values",
    [[0.5, 1.5, 2.5], np.array([[0.5], [1.5], [2.5]]), pd.Series([0.5, 1.5, 2.5])],
    ids=["list", "column-array", "series"],
)
def test_values_become_one_column(values):
    out = Values(values).fit_transform(np.zeros((3, 2)))
    assert out.shape == (3, 1)
    np.testing.assert_array_equal(out.ravel(), [0.5, 1.5, 2.5])


def test_values_with_two_columns_are_kept():
    values = np.arange(8.0).reshape(4, 2)
    np.testing.assert_array_equal(Values(values).fit_transform(np.zeros((4, 1))), values)


def test_transformer_filter_fits_a_clone_and_matches_the_transformer(data):
    transformer = PCA(n_components=2, svd_solver="full")
    ours = TransformerFilter(transformer).fit_transform(data)
    # reference: the same sklearn transformer, fitted directly
    np.testing.assert_allclose(
        ours, PCA(n_components=2, svd_solver="full").fit_transform(data), rtol=0, atol=1e-12
    )
    assert not hasattr(transformer, "components_")


def test_callable_filter_returns_what_the_function_computes(data):
    out = CallableFilter(lambda X: X[:, 0] ** 2 - X[:, 1]).fit_transform(data)
    np.testing.assert_array_equal(out.ravel(), data[:, 0] ** 2 - data[:, 1])


def test_callable_filter_receives_the_checked_float_matrix():
    received = []
    CallableFilter(lambda X: received.append(X) or X[:, 0]).fit_transform([[1, 2], [3, 4]])
    assert received[0].dtype == np.float64
    assert received[0].shape == (2, 2)


# --- make_filter --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("name", "params", "cls"),
    [
        ("coordinate", {"columns": 1}, Coordinate),
        ("pca", {"n_components": 2}, PrincipalComponents),
        ("density", {"bandwidth": 0.5}, GaussianDensity),
        ("eccentricity", {"p": 2.0}, Eccentricity),
        ("knn_distance", {"k": 3}, KNNDistance),
    ],
    ids=["coordinate", "pca", "density", "eccentricity", "knn_distance"],
)
def test_make_filter_builds_the_named_filter_with_its_parameters(name, params, cls):
    made = make_filter(name, **params)
    assert type(made) is cls
    assert {k: getattr(made, k) for k in params} == params


def test_make_filter_by_name_computes_the_same_values_as_the_class(data):
    np.testing.assert_array_equal(
        make_filter("knn_distance", k=3).fit_transform(data), KNNDistance(3).fit_transform(data)
    )


def test_make_filter_returns_a_filter_unchanged():
    f = Eccentricity(p=3.0)
    assert make_filter(f) is f


def test_make_filter_wraps_a_transformer(data):
    made = make_filter(PCA(n_components=1, svd_solver="full"))
    assert isinstance(made, TransformerFilter)
    np.testing.assert_allclose(
        made.fit_transform(data), PrincipalComponents(1).fit_transform(data), atol=1e-9
    )


@pytest.mark.parametrize(
    "spec",
    [np.array([3.0, 1.0, 2.0]), [3.0, 1.0, 2.0], (3.0, 1.0, 2.0), pd.Series([3.0, 1.0, 2.0])],
    ids=["ndarray", "list", "tuple", "series"],
)
def test_make_filter_reads_arrays_as_precomputed_values(spec):
    made = make_filter(spec)
    assert isinstance(made, Values)
    np.testing.assert_array_equal(made.fit_transform(np.zeros((3, 1))).ravel(), [3.0, 1.0, 2.0])


def test_make_filter_wraps_a_callable(data):
    made = make_filter(np.linalg.norm)
    assert isinstance(made, CallableFilter)
    made = make_filter(lambda X: np.linalg.norm(X, axis=1))
    np.testing.assert_allclose(made.fit_transform(data).ravel(), np.linalg.norm(data, axis=1))


def test_make_filter_rejects_an_unknown_name_with_a_suggestion():
    with pytest.raises(UnknownNameError, match=r"Unknown filter 'densty'.*Did you mean 'density'"):
        make_filter("densty")


def test_make_filter_rejects_parameters_the_filter_does_not_take():
    with pytest.raises(ParameterError, match=r"'pca' does not take these parameters: \['k'\]"):
        make_filter("pca", k=3)


def test_make_filter_rejects_something_that_is_no_filter():
    with pytest.raises(ParameterError, match=r"A filter must be a name .*; got float\."):
        make_filter(3.5)


@pytest.mark.parametrize(
    ("filt", "fragment"),
    [
        (Eccentricity(p=0.0), "The 'p' parameter of Eccentricity must be a number in the range"),
        (KNNDistance(k=0), "The 'k' parameter of KNNDistance must be an int in the range [1, inf)"),
        (PrincipalComponents(3), "The 'n_components' parameter of PrincipalComponents must be"),
        (GaussianDensity(bandwidth=-1.0), "The 'bandwidth' parameter of GaussianDensity must be"),
        (Coordinate(-1), "The 'columns' parameter of Coordinate must be a column index"),
    ],
    ids=["p-zero", "k-zero", "three-components", "negative-bandwidth", "negative-column"],
)
def test_filters_reject_parameters_outside_their_range(filt, fragment):
    with pytest.raises(ParameterError, match=re.escape(fragment)):
        filt.fit_transform(np.zeros((20, 2)))
