"""Every mistake a user can make reaches them as a TopoauditError that says what was wrong
and what is accepted."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from sklearn.cluster import KMeans

from topoaudit.errors import (
    DataError,
    FilterError,
    ParameterError,
    TopoauditError,
    UnknownNameError,
    closest_names,
)
from topoaudit.mapper.cover import BalancedCover, UniformCover
from topoaudit.mapper.graph import ClusteringError, MapperBuilder


def message(*fragments: str) -> str:
    """A pattern matching the fragments, in order, anywhere in one message."""
    return ".*".join(re.escape(f) for f in fragments)


def data(n: int = 40, d: int = 3) -> np.ndarray:
    return np.random.default_rng(0).normal(size=(n, d))


def with_bad_values() -> np.ndarray:
    X = data()
    X[3, 1] = np.nan
    X[7, 1] = np.inf
    return X


class ShortLabels:
    """A clusterer that forgets the last row."""

    def fit_predict(self, X):
        return np.zeros(len(X) - 1, dtype=int)


class Failing:
    def fit_predict(self, X):
        raise RuntimeError("out of cheese")


def nan_at_rows_4_and_24(X):
    return np.where(np.isin(np.arange(len(X)), [4, 24]), np.nan, X[:, 0])


CASES = {
    "empty-array": (
        lambda: MapperBuilder().fit(np.empty((0, 3))),
        DataError,
        ("X has no rows", "at least 1 row needed"),
    ),
    "empty-dataframe": (
        lambda: MapperBuilder().fit(pd.DataFrame({"a": [], "b": []}, dtype=float)),
        DataError,
        ("X has no rows", "at least 1 row needed"),
    ),
    "no-columns": (
        lambda: MapperBuilder().fit(np.empty((5, 0))),
        DataError,
        ("X has no columns", "at least one numeric feature is needed"),
    ),
    "nan-and-inf-named-by-row": (
        lambda: MapperBuilder().fit(with_bad_values()),
        DataError,
        ("NaN or infinite values in rows 3, 7 (column 1)", "only finite values are accepted"),
    ),
    "nan-named-by-column-name": (
        lambda: MapperBuilder().fit(pd.DataFrame(with_bad_values(), columns=["a", "b", "c"])),
        DataError,
        ("NaN or infinite values in rows 3, 7 (column 'b')", "only finite values"),
    ),
    "many-bad-rows-are-summarised": (
        lambda: MapperBuilder().fit(np.where(np.arange(40)[:, None] % 5 == 0, np.nan, data())),
        DataError,
        ("rows 0, 5, 10, 15, 20 and 3 more (columns 0, 1, 2)",),
    ),
    "non-numeric-column": (
        lambda: MapperBuilder().fit(
            pd.DataFrame({"age": np.arange(40.0), "city": ["Oslo", "Lima"] * 20})
        ),
        DataError,
        ("Column 'city' of X has non-numeric type", "numeric columns (encode categories first)"),
    ),
    "categorical-column": (
        lambda: MapperBuilder().fit(
            pd.DataFrame({"age": np.arange(40.0), "zone": pd.Categorical(["n", "s"] * 20)})
        ),
        DataError,
        ("Column 'zone' of X has non-numeric type category", "numeric columns"),
    ),
    "boolean-column": (
        lambda: MapperBuilder().fit(pd.DataFrame({"age": np.arange(4.0), "flag": [True] * 4})),
        DataError,
        ("Column 'flag' of X has non-numeric type bool", "numeric columns"),
    ),
    "duplicated-columns": (
        lambda: MapperBuilder().fit(pd.DataFrame(data(), columns=["a", "b", "a"])),
        DataError,
        ("X has duplicated column names ['a']", "each column needs a unique name"),
    ),
    "too-few-rows-for-kmedoids": (
        lambda: MapperBuilder(clusterer="kmedoids").fit(data(2)),
        DataError,
        ("X has 2 rows", "the clusterer SilhouetteKMedoids needs at least 3"),
    ),
    "too-few-rows-for-kmeans": (
        lambda: MapperBuilder(clusterer=KMeans(n_clusters=5, n_init=1)).fit(data(4)),
        DataError,
        ("X has 4 rows", "needs at least 5"),
    ),
    "zero-intervals": (
        lambda: MapperBuilder(n_intervals=0).fit(data()),
        ParameterError,
        ("The 'n_intervals' parameter of UniformCover", "an int in [1, 1000]", "got 0."),
    ),
    "negative-intervals": (
        lambda: MapperBuilder(cover="balanced", n_intervals=-3).fit(data()),
        ParameterError,
        ("The 'n_intervals' parameter of BalancedCover", "an int in [1, 1000]", "got -3."),
    ),
    "intervals-above-maximum": (
        lambda: MapperBuilder(n_intervals=1001).fit(data()),
        ParameterError,
        ("The 'n_intervals' parameter of UniformCover", "an int in [1, 1000]", "got 1001."),
    ),
    "one-of-two-counts-above-maximum": (
        lambda: MapperBuilder("pca", filter_params={"n_components": 2}, n_intervals=(3, 1001)).fit(
            data()
        ),
        ParameterError,
        ("or a pair of such ints (one per dimension)", "got (3, 1001)."),
    ),
    "fractional-intervals": (
        lambda: MapperBuilder(n_intervals=2.5).fit(data()),
        ParameterError,
        ("The 'n_intervals' parameter", "got 2.5."),
    ),
    "negative-overlap": (
        lambda: MapperBuilder(overlap=-0.1).fit(data()),
        ParameterError,
        ("The 'overlap' parameter of UniformCover", "a number in [0, 1)", "got -0.1."),
    ),
    "overlap-of-one": (
        lambda: MapperBuilder(overlap=1.0).fit(data()),
        ParameterError,
        ("The 'overlap' parameter of UniformCover", "a number in [0, 1)", "got 1.0."),
    ),
    "overlap-above-one": (
        lambda: MapperBuilder(cover="balanced", overlap=1.5).fit(data()),
        ParameterError,
        ("The 'overlap' parameter of BalancedCover", "a number in [0, 1)", "got 1.5."),
    ),
    "unknown-filter": (
        lambda: MapperBuilder(filter="pcaa").fit(data()),
        UnknownNameError,
        ("Unknown filter 'pcaa'", "'knn_distance', 'pca'.", "Did you mean 'pca'?"),
    ),
    "unknown-clusterer": (
        lambda: MapperBuilder(clusterer="dbscn").fit(data()),
        UnknownNameError,
        ("Unknown clusterer 'dbscn'", "'single_linkage'.", "Did you mean 'dbscan' or 'hdbscan'?"),
    ),
    "unknown-cover": (
        lambda: MapperBuilder(cover="balnced").fit(data()),
        UnknownNameError,
        ("Unknown cover 'balnced'", "the known covers are 'balanced', 'uniform'.", "'balanced'?"),
    ),
    "filter-with-three-columns": (
        lambda: MapperBuilder(filter=lambda X: np.zeros((len(X), 3))).fit(data()),
        FilterError,
        ("returned an array of shape (40, 3)", "expected (40,), (40, 1) or (40, 2)"),
    ),
    "filter-with-too-few-rows": (
        lambda: MapperBuilder(filter=lambda X: np.zeros(len(X) - 1)).fit(data()),
        FilterError,
        ("returned an array of shape (39, 1)", "one value or two per row"),
    ),
    "precomputed-values-of-the-wrong-length": (
        lambda: MapperBuilder(filter=np.arange(10.0)).fit(data()),
        FilterError,
        ("Filter Values returned an array of shape (10, 1)", "expected (40,)"),
    ),
    "filter-with-nan": (
        lambda: MapperBuilder(filter=nan_at_rows_4_and_24).fit(data()),
        FilterError,
        ("NaN or infinite values for 2 rows (first: row 4)", "needs a finite filter value"),
    ),
    "filter-with-text": (
        lambda: MapperBuilder(filter=lambda X: ["high"] * len(X)).fit(data()),
        FilterError,
        ("Filter CallableFilter returned values that are not numbers",),
    ),
    "clusterer-with-too-few-labels": (
        lambda: MapperBuilder("coordinate", n_intervals=1, clusterer=ShortLabels()).fit(data(20)),
        ClusteringError,
        ("returned 19 labels for a cover element of 20 rows", "one label per row is needed"),
    ),
    "clusterer-that-fails": (
        lambda: MapperBuilder(clusterer=Failing()).fit(data()),
        ClusteringError,
        ("failed on a cover element: out of cheese",),
    ),
    "unknown-noise-policy": (
        lambda: MapperBuilder(noise="keep").fit(data()),
        ParameterError,
        ("The 'noise' parameter of MapperBuilder must be one of 'singleton', 'drop'; got 'keep'",),
    ),
    "bad-n-jobs": (
        lambda: MapperBuilder(n_jobs=0).fit(data()),
        ParameterError,
        ("n_jobs must be 1 or None (serial), an int > 1 (local processes)", "got 0."),
    ),
    "negative-random-state": (
        lambda: MapperBuilder(random_state=-1).fit(data()),
        ParameterError,
        ("The 'random_state' parameter of MapperBuilder", "[0, inf) or None; got -1."),
    ),
    "no-clusterer": (
        lambda: MapperBuilder(clusterer=3).fit(data()),
        ParameterError,
        ("a clusterer name or an object with fit_predict; got 3.",),
    ),
    "filter-parameter-it-does-not-take": (
        lambda: MapperBuilder("pca", filter_params={"k": 3}).fit(data()),
        ParameterError,
        ("Filter 'pca' does not take these parameters: ['k']",),
    ),
    "cover-parameter-per-dimension-mismatch": (
        lambda: UniformCover(n_intervals=(4, 4)).fit(np.arange(6.0)),
        ParameterError,
        ("got 2 values (4, 4) for a filter with 1 dimension", "give one value or 1"),
    ),
    "cover-of-empty-values": (
        lambda: BalancedCover().fit(np.zeros((0, 1))),
        ParameterError,
        ("A cover needs filter values of shape (n_rows, 1 or 2); got (0, 1).",),
    ),
}


@pytest.mark.parametrize("case", list(CASES))
def test_a_mistake_raises_a_topoaudit_error_that_says_what_is_wrong(case):
    call, error_cls, fragments = CASES[case]
    with pytest.raises(error_cls, match=message(*fragments)) as info:
        call()
    assert isinstance(info.value, TopoauditError)


@pytest.mark.parametrize(
    "error_cls",
    [DataError, FilterError, ParameterError, UnknownNameError],
    ids=["data", "filter", "parameter", "unknown-name"],
)
def test_value_errors_can_be_caught_as_value_error(error_cls):
    assert issubclass(error_cls, ValueError)
    assert issubclass(error_cls, TopoauditError)


def test_clustering_errors_can_be_caught_as_runtime_error():
    assert issubclass(ClusteringError, RuntimeError)


def test_an_unknown_name_far_from_every_name_gets_no_suggestion():
    with pytest.raises(UnknownNameError, match=r"Unknown filter 'zzz'; the known filters") as info:
        MapperBuilder(filter="zzz").fit(data())
    assert "Did you mean" not in str(info.value)


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("dbscna", ["dbscan", "hdbscan"]),
        ("single", ["single_linkage"]),
        ("KMEDOIDS", ["kmedoids"]),
        ("zzz", []),
    ],
    ids=["typo", "prefix", "upper-case", "nothing-close"],
)
def test_closest_names_suggests_look_alikes(name, expected):
    assert closest_names(name, ["dbscan", "hdbscan", "kmedoids", "single_linkage"]) == expected
