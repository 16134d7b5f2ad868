"""Property-based tests of the graph builder: whatever the rows and the settings, a build
ends in a graph or in a :class:`TopoauditError`, never in another exception or a warning;
an accepted graph's nodes are rows of their cover element, and together with the rows the
clusterer called noise they are every row of it."""

from __future__ import annotations

import math
from datetime import timedelta
from typing import Any

import numpy as np
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from sklearn.cluster import DBSCAN, AgglomerativeClustering

from topoaudit.errors import TopoauditError
from topoaudit.limits import MAX_GRAPH_NODES
from topoaudit.mapper import MapperBuilder
from topoaudit.mapper.cover import BalancedCover, UniformCover

FUZZ = settings(
    max_examples=250,
    deadline=timedelta(seconds=10),
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)

SPECIAL = [math.nan, math.inf, -math.inf, 1e300, -1e308, 1e151, 1e-308, 5e-324, 0.0, -0.0]
SCALES = [1.0, 1.0, 1.0, 1e-300, 1e-150, 1e-5, 1e5, 1e100, 1e150, 1e300]


@st.composite
def matrices(draw: st.DrawFn) -> np.ndarray:
    """Rows of many shapes: empty, one row, one column, constant, repeated, special values."""
    n = draw(st.sampled_from([0, 1, 2, 3, *[None] * 12])) or draw(st.integers(4, 60))
    d = draw(st.sampled_from([0, *[None] * 15])) or draw(st.integers(1, 4))
    rng = np.random.default_rng(draw(st.integers(0, 2**16)))
    kind = draw(st.sampled_from(["normal", "blobs", "constant", "repeated", "grid", "special"]))
    if kind == "normal":
        X = rng.normal(size=(n, d))
    elif kind == "blobs":
        X = rng.normal(size=(n, d)) * 0.1 + rng.integers(0, 3, size=(n, 1)) * 5.0
    elif kind == "constant":
        X = np.full((n, d), draw(st.sampled_from([0.0, 1.0, -7.5, 1e150])))
        if d > 1 and n:
            X[:, 0] = rng.normal(size=n)  # one varying column among constant ones
    elif kind == "repeated":
        X = np.repeat(rng.normal(size=(max(1, n // 4), d)), 4, axis=0)[:n]
    elif kind == "grid":
        X = rng.integers(0, 3, size=(n, d)).astype(float)
    else:
        X = rng.normal(size=(n, d))
        if X.size:
            for _ in range(draw(st.integers(1, 3))):
                X.flat[draw(st.integers(0, X.size - 1))] = draw(st.sampled_from(SPECIAL))
    if kind != "special":
        with np.errstate(over="ignore"):  # 1e150 x 1e300 is inf: the builder must refuse it
            X = X * draw(st.sampled_from(SCALES))
    dtype = draw(st.sampled_from(["float64", "float64", "float64", "float32", "int64", "bool"]))
    if dtype != "float64":
        with np.errstate(all="ignore"):
            X = np.nan_to_num(X, posinf=1e30, neginf=-1e30).astype(dtype)
    return X


WRONG = st.sampled_from([-1, 0, math.nan, math.inf, 1e300, "2", None, True, [1, 2], "pcaa"])

# the values each parameter accepts, near its bounds too; WRONG and the "spoilt" entries
# are for the one parameter of an example that is given a value it does not accept
FILTERS = {
    "pca": {"n_components": [1, 2], "standardize": [True, False]},
    "eccentricity": {"p": [1.0, 2.0, 0.5, 1e-300, 1e300], "max_reference": [1, 5, 100]},
    "density": {"bandwidth": [None, 1e-300, 0.1, 1.0, 1e300], "max_reference": [2, 50]},
    "knn_distance": {"k": [1, 3, 10]},
    "coordinate": {"columns": [0, 1, (0, 1), (1,)]},
}
CLUSTERERS = {
    "single_linkage": {
        "cut": ["scale", "gap"],
        "k": [1, 5, 100],
        "quantile": [0.5, 0.9, 1.0, 1e-300],
        "factor": [0.5, 2.0, 1e308],
        "n_bins": [2, 10, 10_000],
        "min_cluster_size": [1, 2, 5],
        "max_sample": [2, 10, 1000],
    },
    "dbscan": {
        "eps": [None, 1e-300, 0.5, 1e300],
        "min_samples": [1, 3, 5, 100],
        "eps_quantile": [0.1, 0.9, 1.0],
        "max_sample": [1, 5, 1000],
    },
    "kmedoids": {
        "n_clusters": [None, 1, 2, 4, 100],
        "max_clusters": [2, 3, 5],
        "min_silhouette": [-1.0, 0.0, 0.5, 1.0],
        "max_sample": [3, 10, 1000],
    },
    "hdbscan": {"min_cluster_size": [2, 3, 5, 100], "min_samples": [None, 1, 3, 25]},
    "kmeans_mesh": {"node_rows": [2, 5, 150], "n_init": [1, 2]},
}
COUNTS = st.one_of(
    st.integers(1, 12),
    st.sampled_from([1, 2, 100, 1000]),
    st.tuples(st.integers(1, 8), st.sampled_from([1, 5, 1000])),
)
OVERLAPS = st.one_of(
    st.floats(0, 0.9),
    st.sampled_from([0.0, 0.5, 0.99, 0.999999]),
    st.tuples(st.floats(0, 0.9), st.sampled_from([0.2, 0.99])),
)
SPOILT = {
    "filter": st.sampled_from(["pcaa", "", 3]),
    "cover": st.sampled_from(["unifrom", 3, None]),
    "n_intervals": st.sampled_from([0, -1, 1001, 10**6, 2.5, True, "3", math.nan, (3, 1001)]),
    "overlap": st.sampled_from([1.0, -0.1, 1.5, math.nan, math.inf, "0.3", (0.2, 1.0)]),
    "noise": st.sampled_from(["keep", None, 1]),
    "random_state": st.sampled_from([-1, 1.5, "0", 10**30]),
    "clusterer": st.sampled_from(["dbscn", 5, None]),
}
SPOTS = [*SPOILT, "filter_params", "clusterer_params"]


@st.composite
def parameters(draw: st.DrawFn, n_rows: int) -> dict[str, Any]:
    """Valid settings in most examples; in the others one setting has a wrong value."""
    spoil = draw(st.sampled_from(["nothing"] * len(SPOTS) * 2 + SPOTS))
    name = draw(st.sampled_from(sorted(FILTERS)))
    which = draw(st.sampled_from([*sorted(CLUSTERERS), "estimator"]))
    params: dict[str, Any] = {
        "filter": name,
        "filter_params": draw(named_params(FILTERS[name], spoil == "filter_params")),
        "cover": draw(st.sampled_from(["uniform", "balanced"])),
        "n_intervals": draw(COUNTS),
        "overlap": draw(OVERLAPS),
        "noise": draw(st.sampled_from(["singleton", "drop"])),
        "random_state": draw(st.sampled_from([0, 1, None, 2**32 - 1, 2**32])),
        "clusterer": which,
        "clusterer_params": draw(
            named_params(CLUSTERERS.get(which, {}), spoil == "clusterer_params")
        ),
    }
    if which == "estimator":
        params["clusterer"] = draw(
            st.sampled_from(
                [AgglomerativeClustering(2, linkage="single"), DBSCAN(eps=0.5, min_samples=2)]
            )
        )
        params["clusterer_params"] = None
    if draw(st.integers(0, 9)) == 0:  # precomputed values, of the right length or not
        params["filter"] = draw(
            st.sampled_from([n_rows, n_rows, n_rows + 1]).map(lambda m: np.linspace(0.0, 1.0, m))
        )
        params["filter_params"] = None
    if spoil in SPOILT:
        params[spoil] = draw(SPOILT[spoil])
    return params


def named_params(
    table: dict[str, list[Any]], spoil: bool
) -> st.SearchStrategy[dict[str, Any] | None]:
    """Some of the parameters of ``table``; spoilt: one wrong value, or an unknown name."""
    valid = st.fixed_dictionaries({}, optional={k: st.sampled_from(v) for k, v in table.items()})
    if not spoil:
        return st.one_of(st.none(), valid)
    names = st.sampled_from([*table, "no_such_parameter"])
    return st.tuples(valid, names, WRONG).map(lambda t: {**t[0], t[1]: t[2]})


@settings(FUZZ, max_examples=1200)
@given(X=matrices(), choice=st.data())
def test_a_build_ends_in_a_graph_or_a_topoaudit_error(X: np.ndarray, choice: st.DataObject) -> None:
    params = choice.draw(parameters(X.shape[0]))
    builder = MapperBuilder(**params)
    try:
        builder.fit(X)
    except TopoauditError as exc:
        event(f"refused: {type(exc).__name__}: {str(exc)[:40]}")
        assert str(exc)
        # a warning turned into an error (as the test settings do) is not a refusal
        assert not isinstance(exc.__cause__, Warning), exc
        return
    event("built a graph")
    check_graph(builder, X)
    if params["random_state"] is not None:  # the same seed, the same graph
        again = MapperBuilder(**params).fit(X).graph_
        assert len(again.members) == len(builder.graph_.members)
        pairs = zip(again.members, builder.graph_.members, strict=True)
        assert all(np.array_equal(a, b) for a, b in pairs)


def check_graph(builder: MapperBuilder, X: np.ndarray) -> None:
    """Nodes are subsets of their element's rows; kept rows and noise make up each element."""
    g = builder.graph_
    n = X.shape[0]
    assert g.n_rows == n and g.n_nodes <= MAX_GRAPH_NODES  # 0 when every row is dropped noise
    for m in g.members:
        assert m.size >= 1 and m.min() >= 0 and m.max() < n
        assert np.all(np.diff(m) > 0)  # sorted, each row once
    elements = {e.index: e.rows for e in builder.cover_.transform(builder.filter_values_)}
    assert len(elements) == builder.n_elements_
    in_nodes: dict[tuple[int, ...], set[int]] = {index: set() for index in elements}
    for m, index in zip(g.members, g.node_element, strict=True):
        rows = set(m.tolist())
        assert rows <= set(elements[tuple(index)].tolist())
        in_nodes[tuple(index)] |= rows
    left_out = sum(len(elements[i]) - len(in_nodes[i]) for i in elements)
    if builder.noise == "singleton":
        assert left_out == 0 and g.covered_rows().all()  # every row lies in some node
    else:
        assert left_out == builder.n_noise_
    assert np.isfinite(g.node_filter).all() and g.node_filter.shape[0] == g.n_nodes
    # the nerve: an edge exactly where two nodes share rows, with the count shared
    sets = [set(m.tolist()) for m in g.members]
    expected = {
        (i, j): len(sets[i] & sets[j])
        for i in range(len(sets))
        for j in range(i + 1, len(sets))
        if sets[i] & sets[j]
    }
    got = {(int(a), int(b)): int(s) for (a, b), s in zip(g.edges, g.edge_shared, strict=True)}
    assert got == expected
    assert ((g.edge_jaccard > 0) & (g.edge_jaccard <= 1)).all()


@settings(FUZZ, max_examples=500)
@given(
    values=st.lists(st.floats(allow_nan=True, allow_infinity=True), min_size=0, max_size=40),
    cover=st.sampled_from([UniformCover, BalancedCover]),
    n_intervals=st.one_of(COUNTS, SPOILT["n_intervals"]),
    overlap=st.one_of(OVERLAPS, SPOILT["overlap"]),
)
def test_a_cover_of_any_values_is_elements_or_a_topoaudit_error(
    values: list[float], cover: type, n_intervals: Any, overlap: Any
) -> None:
    try:
        elements = cover(n_intervals, overlap=overlap).fit_transform(np.array(values))
    except TopoauditError as exc:
        assert str(exc)
        return
    # every row lies in at least one element, the elements in index order
    rows = np.concatenate([e.rows for e in elements])
    assert set(rows.tolist()) == set(range(len(values)))
    assert [e.index for e in elements] == sorted(e.index for e in elements)
