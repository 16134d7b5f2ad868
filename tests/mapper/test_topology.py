"""Graph invariants against networkx on random and hand-drawn graphs."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from topoaudit.mapper.graph import MapperGraph
from topoaudit.mapper.topology import component_labels, degrees, invariants, row_components


def random_graph(seed: int, n_nodes: int, n_rows: int, max_size: int) -> MapperGraph:
    rng = np.random.default_rng(seed)
    members = [
        rng.choice(n_rows, size=int(rng.integers(1, max_size + 1)), replace=False)
        for _ in range(n_nodes)
    ]
    return MapperGraph.from_members(members, n_rows=n_rows)


def reference_graph(graph: MapperGraph) -> nx.Graph:
    """A networkx graph built from the memberships alone (an edge when two member sets
    intersect), so that it does not rely on the nerve being right."""
    g = nx.Graph()
    g.add_nodes_from(range(graph.n_nodes))
    sets = [set(m.tolist()) for m in graph.members]
    for i, j in itertools.combinations(range(len(sets)), 2):
        if sets[i] & sets[j]:
            g.add_edge(i, j)
    return g


RANDOM = [
    (0, 30, 60, 3),
    (1, 30, 60, 3),
    (2, 40, 50, 2),
    (3, 25, 80, 6),
    (4, 50, 100, 4),
    (5, 15, 20, 5),
    (6, 60, 200, 3),
]


@pytest.mark.parametrize(
    ("seed", "n_nodes", "n_rows", "max_size"),
    RANDOM,
    ids=[f"seed={s}-nodes={n}-rows={r}" for s, n, r, _ in RANDOM],
)
def test_invariants_agree_with_networkx_on_random_graphs(seed, n_nodes, n_rows, max_size):
    graph = random_graph(seed, n_nodes, n_rows, max_size)
    g = reference_graph(graph)
    inv = invariants(graph)
    deg = np.array([g.degree(i) for i in range(graph.n_nodes)])
    assert inv.n_nodes == g.number_of_nodes()
    assert inv.n_edges == g.number_of_edges()
    # references: networkx.number_connected_components and networkx.cycle_basis (whose
    # length is the cycle rank E - V + C of an undirected graph)
    assert inv.n_components == nx.number_connected_components(g)
    assert inv.cycle_rank == len(nx.cycle_basis(g))
    # reference: networkx degrees
    np.testing.assert_array_equal(degrees(graph), deg)
    assert inv.n_leaves == int((deg == 1).sum())
    assert inv.n_branch_points == int((deg >= 3).sum())
    assert inv.n_isolated == int((deg == 0).sum())


@pytest.mark.parametrize("seed", range(4), ids=[f"seed={s}" for s in range(4)])
def test_component_labels_match_networkx_components_numbered_by_first_node(seed):
    graph = random_graph(seed, 40, 90, 3)
    count, labels = component_labels(graph)
    # reference: networkx.connected_components, each sorted, ordered by smallest node
    components = sorted(sorted(c) for c in nx.connected_components(reference_graph(graph)))
    assert count == len(components) > 1
    for number, nodes in enumerate(components):
        assert set(labels[nodes].tolist()) == {number}


@pytest.mark.parametrize("seed", range(4), ids=[f"seed={s}" for s in range(4)])
def test_row_components_follow_the_nodes_that_hold_each_row(seed):
    graph = random_graph(seed, 30, 120, 3)
    g = reference_graph(graph)
    component_of = {}
    for number, nodes in enumerate(sorted(sorted(c) for c in nx.connected_components(g))):
        for node in nodes:
            component_of[node] = number
    rows = row_components(graph)
    for r in range(graph.n_rows):
        holders = [i for i, m in enumerate(graph.members) if r in m.tolist()]
        if holders:
            assert {component_of[i] for i in holders} == {rows[r]}
        else:
            assert rows[r] == -1
    assert (rows == -1).any()


def members_of_edges(edges: list[tuple[int, int]], n_nodes: int) -> list[np.ndarray]:
    """Memberships whose nerve is exactly ``edges``: each edge is a row of its own that
    both end nodes hold, and each node also holds a private row."""
    members: list[list[int]] = [[n_nodes + len(edges) + i] for i in range(n_nodes)]
    for row, (a, b) in enumerate(edges):
        members[a].append(row)
        members[b].append(row)
    return [np.array(m) for m in members]


HAND_DRAWN = {
    # name: (edges, nodes, (components, cycle rank, leaves, branch points, isolated));
    # the expected numbers are counted by hand from the drawing
    "ring-of-4": ([(0, 1), (1, 2), (2, 3), (0, 3)], 4, (1, 1, 0, 0, 0)),
    "figure-eight": ([(0, 1), (1, 2), (0, 2), (0, 3), (3, 4), (0, 4)], 5, (1, 2, 0, 1, 0)),
    "star-of-3": ([(0, 1), (0, 2), (0, 3)], 4, (1, 0, 3, 1, 0)),
    "path-and-island": ([(0, 1), (1, 2)], 4, (2, 0, 2, 0, 1)),
    "two-triangles": ([(0, 1), (1, 2), (0, 2), (3, 4), (4, 5), (3, 5)], 6, (2, 2, 0, 0, 0)),
}


@pytest.mark.parametrize("name", list(HAND_DRAWN))
def test_invariants_of_hand_drawn_graphs(name):
    edges, n_nodes, expected = HAND_DRAWN[name]
    graph = MapperGraph.from_members(members_of_edges(edges, n_nodes), n_rows=100)
    assert graph.n_edges == len(edges)
    inv = invariants(graph)
    got = (inv.n_components, inv.cycle_rank, inv.n_leaves, inv.n_branch_points, inv.n_isolated)
    assert got == expected


def test_invariants_of_an_empty_graph_are_zero():
    inv = invariants(MapperGraph.from_members([], n_rows=5))
    assert inv.as_dict() == dict.fromkeys(inv.as_dict(), 0)
    assert row_components(MapperGraph.from_members([], n_rows=3)).tolist() == [-1, -1, -1]
