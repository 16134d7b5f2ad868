"""The nerve, the MapperGraph container and the builder, against brute-force references."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
from sklearn.cluster import DBSCAN

from topoaudit.mapper.cover import UniformCover
from topoaudit.mapper.filters import PrincipalComponents
from topoaudit.mapper.graph import MapperBuilder, MapperGraph, nerve


def random_members(seed: int, n_nodes: int = 25, n_rows: int = 40) -> list[np.ndarray]:
    """Random node memberships, some empty, some large, drawn without replacement."""
    rng = np.random.default_rng(seed)
    return [
        np.sort(rng.choice(n_rows, size=int(rng.integers(0, 12)), replace=False))
        for _ in range(n_nodes)
    ]


def brute_force_nerve(members: list[np.ndarray]) -> dict[tuple[int, int], int]:
    """Every pair i < j tested with Python sets: {(i, j): shared rows} for shared > 0."""
    sets = [set(m.tolist()) for m in members]
    out = {}
    for i, j in itertools.combinations(range(len(sets)), 2):
        shared = len(sets[i] & sets[j])
        if shared:
            out[(i, j)] = shared
    return out


@pytest.fixture(scope="module")
def circle() -> np.ndarray:
    rng = np.random.default_rng(0)
    angle = rng.uniform(0, 2 * np.pi, size=300)
    return np.column_stack([np.cos(angle), np.sin(angle)]) + rng.normal(size=(300, 2)) * 0.05


# --- nerve ------------------------------------------------------------------------------


@pytest.mark.parametrize("seed", range(6), ids=[f"seed={s}" for s in range(6)])
def test_nerve_matches_the_all_pairs_reference(seed):
    members = random_members(seed)
    edges, shared = nerve(members, n_rows=40)
    ref = brute_force_nerve(members)
    assert [tuple(e) for e in edges.tolist()] == sorted(ref)
    assert shared.tolist() == [ref[k] for k in sorted(ref)]


def test_nerve_of_disjoint_or_no_members_has_no_edges():
    edges, shared = nerve([np.array([0, 1]), np.array([2]), np.array([], dtype=np.int64)], 3)
    assert edges.shape == (0, 2)
    assert shared.shape == (0,)
    edges, shared = nerve([], 0)
    assert edges.shape == (0, 2)


def test_nerve_of_nodes_sharing_every_row_is_complete():
    members = [np.arange(5)] * 4
    edges, shared = nerve(members, 5)
    assert [tuple(e) for e in edges.tolist()] == list(itertools.combinations(range(4), 2))
    assert shared.tolist() == [5] * 6


@pytest.mark.parametrize("seed", range(3), ids=[f"seed={s}" for s in range(3)])
def test_edge_jaccard_is_shared_over_union(seed):
    members = random_members(seed)
    graph = MapperGraph.from_members(members, n_rows=40)
    sets = [set(m.tolist()) for m in members]
    for (i, j), jac in zip(graph.edges.tolist(), graph.edge_jaccard, strict=True):
        # reference: the Jaccard index |A & B| / |A | B| of Python sets
        assert jac == pytest.approx(len(sets[i] & sets[j]) / len(sets[i] | sets[j]), rel=1e-15)


def test_from_members_sorts_members_and_counts_nodes():
    graph = MapperGraph.from_members([np.array([3, 1]), np.array([1, 0])], n_rows=4)
    assert [m.tolist() for m in graph.members] == [[1, 3], [0, 1]]
    assert graph.n_nodes == 2
    assert graph.n_edges == 1
    assert graph.node_sizes.tolist() == [2, 2]
    assert graph.covered_rows().tolist() == [True, True, False, True]


@pytest.mark.parametrize("seed", range(3), ids=[f"seed={s}" for s in range(3)])
def test_row_nodes_is_the_inverted_index_in_csr_form(seed):
    members = random_members(seed)
    graph = MapperGraph.from_members(members, n_rows=40)
    indptr, indices = graph.row_nodes()
    assert indptr.shape == (41,)
    for r in range(40):
        # reference: scan every node for the row
        expected = [i for i, m in enumerate(members) if r in m.tolist()]
        assert indices[indptr[r] : indptr[r + 1]].tolist() == expected


# --- builder: determinism and ids ---------------------------------------------------------


def graphs_identical(a: MapperGraph, b: MapperGraph) -> bool:
    return (
        a.n_rows == b.n_rows
        and len(a.members) == len(b.members)
        and all(np.array_equal(x, y) for x, y in zip(a.members, b.members, strict=True))
        and np.array_equal(a.node_element, b.node_element)
        and np.array_equal(a.node_filter, b.node_filter)
        and np.array_equal(a.edges, b.edges)
        and np.array_equal(a.edge_shared, b.edge_shared)
        and np.array_equal(a.edge_jaccard, b.edge_jaccard)
    )


@pytest.mark.parametrize(
    "params",
    [
        {},
        {"cover": "balanced", "n_intervals": 6, "overlap": 0.4},
        {"filter": "eccentricity", "clusterer": "dbscan"},
        {"filter": "pca", "filter_params": {"n_components": 2}, "n_intervals": (3, 3)},
    ],
    ids=["defaults", "balanced", "eccentricity-dbscan", "two-d"],
)
def test_the_same_data_and_settings_give_the_same_graph(circle, params):
    first = MapperBuilder(**params).fit(circle).graph_
    second = MapperBuilder(**params).fit(circle.copy()).graph_
    assert first.n_nodes > 1
    assert graphs_identical(first, second)


def test_parallel_build_gives_the_serial_graph(circle):
    params = {"n_intervals": 8, "overlap": 0.35, "clusterer": "single_linkage"}
    serial = MapperBuilder(**params).fit(circle).graph_
    parallel = MapperBuilder(**params, n_jobs=2).fit(circle).graph_
    assert graphs_identical(serial, parallel)


def test_node_ids_follow_cover_element_order_then_first_row(circle):
    graph = MapperBuilder(n_intervals=6, clusterer="single_linkage").fit(circle).graph_
    elements = [tuple(e) for e in graph.node_element.tolist()]
    assert elements == sorted(elements)
    for element in set(elements):
        nodes = [i for i, e in enumerate(elements) if e == element]
        firsts = [int(graph.members[i][0]) for i in nodes]
        assert firsts == sorted(firsts)


def test_node_filter_is_the_mean_filter_value_of_its_rows(circle):
    builder = MapperBuilder(n_intervals=5).fit(circle)
    graph = builder.graph_
    for i, rows in enumerate(graph.members):
        np.testing.assert_allclose(
            graph.node_filter[i], builder.filter_values_[rows].mean(axis=0), rtol=1e-12
        )


# --- builder: noise policy against a per-element reference ---------------------------------


def expected_members(X, n_intervals, overlap, eps, min_samples, noise):
    """The documented construction, done by hand: cover the first principal component,
    cluster each element with sklearn.cluster.DBSCAN, clusters in order of first row, then
    (for noise="singleton") one node per noise row, by row."""
    values = PrincipalComponents(1).fit_transform(X)
    members, n_noise = [], 0
    for element in UniformCover(n_intervals, overlap=overlap).fit_transform(values):
        rows = element.rows
        if rows.size < max(2, min_samples):  # too few rows to cluster: one node
            members.append(rows.tolist())
            continue
        labels = DBSCAN(eps=eps, min_samples=min_samples).fit_predict(X[rows])
        clusters: dict[int, list[int]] = {}
        for r, lab in zip(rows.tolist(), labels.tolist(), strict=True):
            if lab >= 0:
                clusters.setdefault(lab, []).append(r)
        members.extend(sorted(clusters.values(), key=lambda c: c[0]))
        noise_rows = rows[labels < 0].tolist()
        n_noise += len(noise_rows)
        if noise == "singleton":
            members.extend([r] for r in noise_rows)
    return members, n_noise


@pytest.mark.parametrize("noise", ["singleton", "drop"])
@pytest.mark.parametrize(
    ("eps", "min_samples"), [(0.08, 4), (1e-6, 3)], ids=["some-noise", "all-noise"]
)
def test_noise_rows_become_singletons_or_are_dropped(circle, noise, eps, min_samples):
    builder = MapperBuilder(
        n_intervals=5,
        overlap=0.3,
        clusterer="dbscan",
        clusterer_params={"eps": eps, "min_samples": min_samples},
        noise=noise,
    ).fit(circle)
    members, n_noise = expected_members(circle, 5, 0.3, eps, min_samples, noise)
    assert [m.tolist() for m in builder.graph_.members] == members
    assert builder.n_noise_ == n_noise > 0
    covered = builder.graph_.covered_rows()
    if noise == "singleton":
        assert covered.all()
    else:
        assert not covered.all()


def test_dropping_noise_removes_exactly_the_singleton_noise_nodes(circle):
    params = {"n_intervals": 5, "clusterer": "dbscan", "clusterer_params": {"eps": 0.08}}
    kept = MapperBuilder(**params, noise="singleton").fit(circle)
    dropped = MapperBuilder(**params, noise="drop").fit(circle)
    assert kept.n_noise_ == dropped.n_noise_
    assert kept.graph_.n_nodes - dropped.graph_.n_nodes == kept.n_noise_
    dropped_sets = [m.tolist() for m in dropped.graph_.members]
    assert all(m.tolist() in dropped_sets or m.size == 1 for m in kept.graph_.members)


# --- exports ---------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def built(circle) -> MapperGraph:
    return MapperBuilder(n_intervals=6, overlap=0.4).fit(circle).graph_


def test_to_networkx_carries_node_and_edge_attributes(built):
    g = built.to_networkx()
    assert sorted(g.nodes) == list(range(built.n_nodes))
    assert g.number_of_edges() == built.n_edges
    for i, m in enumerate(built.members):
        assert g.nodes[i]["size"] == m.size
        assert g.nodes[i]["element"] == tuple(built.node_element[i].tolist())
    for (a, b), s, j in zip(built.edges, built.edge_shared, built.edge_jaccard, strict=True):
        assert g.edges[int(a), int(b)] == {"shared": int(s), "jaccard": float(j)}


def test_node_link_leaves_out_members_unless_asked(built):
    plain = built.node_link()
    assert all("members" not in node for node in plain["nodes"])
    full = built.node_link(include_members=True)
    assert [node["members"] for node in full["nodes"]] == [m.tolist() for m in built.members]
    assert plain["n_rows"] == built.n_rows
    assert [[link["source"], link["target"]] for link in plain["links"]] == built.edges.tolist()


@pytest.mark.parametrize("include_members", [False, True], ids=["no-members", "members"])
def test_write_node_link_round_trips_as_sorted_json(built, tmp_path, include_members):
    path = built.write_node_link(tmp_path / "graph.json", include_members=include_members)
    text = path.read_text(encoding="utf-8")
    loaded = json.loads(text)
    assert loaded == json.loads(json.dumps(built.node_link(include_members=include_members)))
    # reference: json.dumps with sort_keys=True writes the same text
    assert text == json.dumps(loaded, sort_keys=True, indent=1) + "\n"
    for node in loaded["nodes"]:
        assert list(node) == sorted(node)
        assert ("members" in node) is include_members


def test_node_link_with_members_rebuilds_the_same_graph(built):
    data = json.loads(json.dumps(built.node_link(include_members=True)))
    rebuilt = MapperGraph.from_members(
        [np.array(n["members"]) for n in data["nodes"]], n_rows=data["n_rows"]
    )
    np.testing.assert_array_equal(rebuilt.edges, built.edges)
    np.testing.assert_array_equal(rebuilt.edge_shared, built.edge_shared)
    jaccard = [link["jaccard"] for link in data["links"]]
    np.testing.assert_allclose(jaccard, built.edge_jaccard, rtol=1e-9)
