"""The features of a graph's shape and their confidence, against the GUDHI library.

References: the extended persistence diagrams are compared with GUDHI's
``SimplexTree.extend_filtration`` / ``extended_persistence`` (the GUDHI library, a
general computational-topology library), the bottleneck distances with the Hera
implementation that GUDHI ships (``gudhi.hera.bottleneck_distance(..., delta=0)``, exact),
components and loops with networkx. GUDHI's other exact bottleneck routine,
``gudhi.bottleneck_distance(..., e=0)``, is not used: on the hand-worked example below
GUDHI 3.13 returned 0.551 where the distance is 0.421 (measured; GUDHI's pull request
#1367, "Fix bottleneck distance asymmetry", reports wrong matchings in that routine).
The acceptance runs of issue 10 (a Gaussian blob has no shape; a noisy circle has one
loop) are at the end.
"""

from __future__ import annotations

import time

import gudhi
import gudhi.hera
import networkx as nx
import numpy as np
import pytest

from topoaudit.errors import ParameterError
from topoaudit.mapper.executor import ProcessExecutor, usable_cores
from topoaudit.mapper.features import (
    bottleneck_distance,
    feature_confidence,
    part_distances,
    persistence_diagram,
    shape_features,
)
from topoaudit.mapper.graph import MapperBuilder, MapperGraph
from topoaudit.mapper.topology import invariants

PARTS = ("ext0", "ext1", "ord0", "rel1")


def graph_of(values, edges) -> MapperGraph:
    """A graph with one row per node and the given edges, the node function ``values``."""
    values = np.asarray(values, dtype=np.float64)
    n = values.size
    edges = np.asarray(sorted({(min(a, b), max(a, b)) for a, b in edges if a != b}), np.int64)
    edges = edges.reshape(-1, 2)
    return MapperGraph(
        n_rows=n,
        members=tuple(np.array([i]) for i in range(n)),
        node_element=np.zeros((n, 1), np.int64),
        node_filter=values.reshape(-1, 1),
        edges=edges,
        edge_shared=np.ones(edges.shape[0], np.int64),
        edge_jaccard=np.ones(edges.shape[0]),
    )


def random_graph(rng: np.random.Generator, family: str) -> MapperGraph:
    n = int(rng.integers(1, 16))
    if family == "tree":
        edges = [(int(rng.integers(0, i)), i) for i in range(1, n)]
    else:
        m = int(rng.integers(0, (3 if family == "dense" else 2) * n + 1))
        edges = [tuple(int(v) for v in rng.integers(0, n, 2)) for _ in range(m)]
    if family in ("integer-ties", "tree", "dense"):
        values = rng.integers(0, 5, n).astype(float)  # many equal values
    elif family == "all-equal":
        values = np.full(n, 1.5)
    else:
        values = rng.normal(size=n)
    return graph_of(values, edges)


def gudhi_diagram(graph: MapperGraph) -> dict[str, np.ndarray]:
    """GUDHI's extended persistence of the lower-star filtration of the node values, in
    our four parts; points of zero extent left out, as ours leaves them out."""
    f = graph.node_filter[:, 0]
    st = gudhi.SimplexTree()
    for v in range(graph.n_nodes):
        st.insert([v], filtration=float(f[v]))
    for a, b in graph.edges:
        st.insert([int(a), int(b)], filtration=float(max(f[a], f[b])))
    st.extend_filtration()
    ordinary, relative, extended_plus, extended_minus = st.extended_persistence()
    out: dict[str, list] = {p: [] for p in PARTS}
    leftover = []
    for dim, point in ordinary:
        (out["ord0"] if dim == 0 else leftover).append(point)
    for dim, point in relative:
        (out["rel1"] if dim == 1 else leftover).append(point)
    for dim, point in [*extended_plus, *extended_minus]:
        out["ext0" if dim == 0 else "ext1"].append(point)
    assert all(abs(d - b) < 1e-12 for b, d in leftover), leftover
    return {p: nonzero(np.asarray(v, np.float64).reshape(-1, 2)) for p, v in out.items()}


def nonzero(points: np.ndarray) -> np.ndarray:
    return points[np.abs(points[:, 1] - points[:, 0]) > 1e-12]


def rows_sorted(points: np.ndarray) -> np.ndarray:
    points = np.asarray(points, np.float64).reshape(-1, 2)
    return points[np.lexsort((points[:, 1], points[:, 0]))]


FAMILIES = ["integer-ties", "normal", "all-equal", "tree", "dense"]


@pytest.mark.parametrize("family", FAMILIES, ids=FAMILIES)
def test_extended_persistence_equals_gudhi_on_random_graphs(family):
    rng = np.random.default_rng(FAMILIES.index(family))
    for _ in range(60):
        graph = random_graph(rng, family)
        ours = persistence_diagram(graph)
        theirs = gudhi_diagram(graph)
        for part in PARTS:
            np.testing.assert_allclose(
                rows_sorted(ours[part]),
                rows_sorted(theirs[part]),
                atol=1e-9,
                err_msg=f"{part} of {graph.node_filter[:, 0].tolist()}, {graph.edges.tolist()}",
            )


@pytest.mark.parametrize("family", FAMILIES, ids=FAMILIES)
def test_components_and_loops_are_networkx_components_and_cycle_rank(family):
    rng = np.random.default_rng(100 + FAMILIES.index(family))
    for _ in range(40):
        graph = random_graph(rng, family)
        g = graph.to_networkx()
        features = shape_features(graph)
        kinds = [f.kind for f in features]
        assert kinds.count("component") == nx.number_connected_components(g)
        assert kinds.count("loop") == len(nx.cycle_basis(g))
        for f in features:
            if f.kind == "component":
                assert set(f.nodes) in [set(c) for c in nx.connected_components(g)]
            if f.kind == "loop":
                # a cycle through the edge that closes it: a cycle of the graph
                assert nx.is_connected(g.subgraph(f.nodes))
                assert g.subgraph(f.nodes).number_of_edges() >= len(f.nodes)


#        4   5        the Y: two arms up to 4 and 5, a stem down to 0
#         \ /
#          3
#          |
#          0
Y_VALUES = [0.0, 1.0, 2.0, 2.5, 4.0, 5.0]
Y_EDGES = [(0, 1), (1, 2), (2, 3), (3, 4), (3, 5)]


@pytest.mark.parametrize(
    ("values", "edges", "expected"),
    [
        (Y_VALUES, Y_EDGES, [(0, 3, (0, 1, 2)), (4, 3, (4,)), (5, 3, (5,))]),
        ([0.0, 1.0, 2.0, 3.0], [(0, 1), (1, 2), (2, 3)], []),
        ([0.0, 1.0, 2.0, 2.0, 3.0], [(0, 1), (1, 2), (1, 3), (2, 4), (3, 4)], [(0, 1, (0,))]),
        ([0.0, 1.0, 2.0, 3.0], [(0, 1), (1, 2), (2, 0), (0, 3)], [(3, 0, (3,))]),
    ],
    ids=["y-three-flares", "path-none", "loop-with-a-tail", "tail-at-the-loop-bottom"],
)
def test_flares_run_from_each_leaf_to_the_first_node_of_degree_three(values, edges, expected):
    # the definition of a flare (features.py): common practice, no source
    graph = graph_of(values, edges)
    flares = [f for f in shape_features(graph) if f.kind == "flare"]
    assert len(flares) == len(expected)
    for f, (tip, junction, nodes) in zip(flares, expected, strict=True):
        assert f.tip == tip
        assert f.nodes == nodes
        assert (f.birth, f.death) == (values[tip], values[junction])


def test_a_ring_has_one_component_and_one_loop_from_its_highest_to_its_lowest_value():
    graph = graph_of([0.0, 1.0, 2.0, 1.0], [(0, 1), (1, 2), (2, 3), (3, 0)])
    summary = [(f.kind, f.birth, f.death, f.nodes) for f in shape_features(graph)]
    assert summary == [("component", 0.0, 2.0, (0, 1, 2, 3)), ("loop", 2.0, 0.0, (0, 1, 2, 3))]
    assert persistence_diagram(graph)["ext1"].tolist() == [[2.0, 0.0]]


def random_diagram(rng: np.random.Generator, kind: str) -> np.ndarray:
    n = int(rng.integers(0, 9))
    if kind == "integer-ties":
        births = rng.integers(0, 4, n).astype(float)
        points = np.column_stack([births, births + rng.integers(0, 4, n)])
    elif kind == "on-the-diagonal":
        births = rng.normal(size=n)
        points = np.column_stack(
            [births, births + (rng.uniform(size=n) < 0.5) * rng.uniform(0, 1, n)]
        )
    else:
        births = rng.normal(size=n)
        points = np.column_stack([births, births + rng.exponential(1.0, n)])
    return points.reshape(-1, 2)


DIAGRAMS = ["normal", "integer-ties", "on-the-diagonal"]


def hera(a: np.ndarray, b: np.ndarray) -> float:
    return gudhi.hera.bottleneck_distance(a, b, delta=0)


@pytest.mark.parametrize("kind", DIAGRAMS, ids=DIAGRAMS)
def test_bottleneck_distance_equals_hera_exact_on_random_diagrams(kind):
    rng = np.random.default_rng(DIAGRAMS.index(kind))
    for _ in range(80):
        a, b = random_diagram(rng, kind), random_diagram(rng, kind)
        theirs = hera(a, b)
        assert bottleneck_distance({"ord0": a}, {"ord0": b}) == pytest.approx(theirs, abs=1e-12)
        # points below the diagonal (loops: birth above death) are the reflection, and
        # the distance does not change under it
        flipped = bottleneck_distance({"ext1": a[:, ::-1]}, {"ext1": b[:, ::-1]})
        assert flipped == pytest.approx(theirs, abs=1e-12)


def test_extended_bottleneck_distance_is_the_largest_over_the_parts():
    rng = np.random.default_rng(7)
    for _ in range(30):
        first = {p: random_diagram(rng, "normal") for p in PARTS}
        second = {p: random_diagram(rng, "integer-ties") for p in PARTS}
        theirs = {p: hera(first[p], second[p]) for p in PARTS}
        ours = part_distances(first, second)
        assert ours == pytest.approx(theirs, abs=1e-12)
        assert bottleneck_distance(first, second) == pytest.approx(max(theirs.values()))


def test_bottleneck_of_empty_diagrams_is_zero_and_a_lone_point_goes_to_the_diagonal():
    assert bottleneck_distance({}, {}) == 0.0
    assert bottleneck_distance({"ext0": np.array([[1.0, 4.0]])}, {}) == 1.5


def test_bottleneck_distance_on_a_hand_worked_example():
    # Worked by hand: sending every point to the diagonal costs the largest half-extent,
    # 0.421 (the point (1.013, 1.855)); matching that point to a point of the other
    # diagram costs at least 0.551 (its nearest, (1.564, 1.676)); so the distance is 0.421.
    a = np.array([[0.85, 1.384], [1.013, 1.855], [0.376, 0.958]])
    b = np.array([[-0.509, -0.459], [-0.89, -0.798], [1.564, 1.676]])
    assert bottleneck_distance({"ord0": a}, {"ord0": b}) == pytest.approx(0.421)
    assert hera(a, b) == pytest.approx(0.421)


def noisy_circle(seed: int, n: int = 1000, noise: float = 0.03) -> np.ndarray:
    rng = np.random.default_rng(seed)
    angle = rng.uniform(0.0, 2 * np.pi, n)
    return np.column_stack([np.cos(angle), np.sin(angle)]) + rng.normal(0.0, noise, (n, 2))


def test_confidence_is_the_same_serially_and_in_two_processes():
    X = noisy_circle(0, n=400)
    builder = MapperBuilder().fit(X)
    said: list[str] = []
    serial = feature_confidence(builder, X, n_resamples=8, random_state=3, progress=said.append)
    parallel = feature_confidence(
        builder, X, n_resamples=8, random_state=3, executor=ProcessExecutor(2)
    )
    # reported in batches of a tenth (rounded up), which do not change the results
    assert said == [f"resample {i} of 8" for i in range(1, 9)]
    assert [f.confidence for f in serial.features] == [f.confidence for f in parallel.features]
    assert serial.distances == parallel.distances
    assert serial.resample_rows == parallel.resample_rows == 200


def test_confidence_is_seeded_and_zero_resamples_scores_nothing():
    X = noisy_circle(1, n=400)
    builder = MapperBuilder().fit(X)
    first = feature_confidence(builder, X, n_resamples=5, random_state=0)
    again = feature_confidence(builder, X, n_resamples=5, random_state=0)
    assert (first.features, first.distances) == (again.features, again.distances)
    assert first.n_resamples == len(first.distances) == 5
    bare = feature_confidence(builder, X, n_resamples=0)
    assert [f.confidence for f in bare.features] == [None] * len(bare.features)
    assert [f.kind for f in bare.features] == [f.kind for f in first.features]


# Acceptance of issue 10 ---------------------------------------------------------------

N_SEEDS = 20
N_RESAMPLES = 40  # a feature reaches 0.95 only if 38 of the 40 resamples keep it
SURE = 0.95


def _executor():
    cores = usable_cores()
    return ProcessExecutor(min(4, cores)) if cores > 1 else None


def _rows(graph: MapperGraph, nodes) -> int:
    return int(np.unique(np.concatenate([graph.members[i] for i in nodes])).size)


@pytest.mark.slow
def test_null_shape_a_gaussian_blob_shows_no_sure_loop_or_extra_component():
    # Source: a Gaussian blob has no shape (one connected support, no hole).
    start = time.perf_counter()
    clean = []
    seen = []
    for seed in range(N_SEEDS):
        X = np.random.default_rng(seed).normal(size=(2000, 8))
        builder = MapperBuilder().fit(X)
        summary = feature_confidence(
            builder, X, n_resamples=N_RESAMPLES, random_state=seed, executor=_executor()
        )
        components = summary.of_kind("component")
        largest = max(components, key=lambda c: _rows(builder.graph_, c.nodes))
        sure = [
            f
            for f in summary.features
            if (f.kind == "loop" or (f.kind == "component" and f is not largest))
            and f.confidence >= SURE
        ]
        clean.append(not sure)
        seen.append(invariants(builder.graph_))
    print(f"blob: {sum(clean)} of {N_SEEDS} seeds clean, {time.perf_counter() - start:.0f} s")
    assert sum(clean) >= 19, seen


@pytest.mark.slow
def test_noisy_circle_shows_its_loop_with_confidence_at_least_095():
    # Source: common practice, no source (a circle has one loop).
    start = time.perf_counter()
    found = []
    for seed in range(N_SEEDS):
        X = noisy_circle(seed)
        builder = MapperBuilder().fit(X)
        summary = feature_confidence(
            builder, X, n_resamples=N_RESAMPLES, random_state=seed, executor=_executor()
        )
        found.append(max((f.confidence for f in summary.of_kind("loop")), default=0.0))
    sure = sum(c >= SURE for c in found)
    print(f"circle: {sure} of {N_SEEDS} seeds, {time.perf_counter() - start:.0f} s")
    assert sure >= 19, found


def test_confidence_refuses_a_two_dimensional_filter_whose_grid_draws_loops():
    # a 2-D product cover has loops of its own grid (common practice, no source)
    X = np.random.default_rng(0).normal(size=(300, 4))
    builder = MapperBuilder("pca", filter_params={"n_components": 2}, n_intervals=4).fit(X)
    with pytest.raises(
        ParameterError,
        match=r"^feature_confidence needs a graph of a one-dimensional filter; this one has 2 ",
    ):
        feature_confidence(builder, X, n_resamples=2)
