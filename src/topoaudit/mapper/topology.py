"""Invariants of a Mapper graph: components, cycle rank, leaves and branch points.

For a graph with V nodes, E edges and C connected components, the cycle rank (first
Betti number of the graph as a 1-complex) is ``E - V + C``: the number of independent
loops. Leaves are nodes of degree 1 (the tips of flares), branch points nodes of degree
3 or more. All are computed from a sparse adjacency in O(V + E).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

if TYPE_CHECKING:
    from topoaudit.mapper.graph import MapperGraph

__all__ = [
    "Invariants",
    "component_labels",
    "degrees",
    "invariants",
    "row_components",
]


@dataclass(frozen=True)
class Invariants:
    """The shape of a graph in numbers."""

    n_nodes: int
    n_edges: int
    n_components: int
    cycle_rank: int
    n_leaves: int
    n_branch_points: int
    n_isolated: int

    def as_dict(self) -> dict[str, int]:
        return asdict(self)


def degrees(graph: MapperGraph) -> np.ndarray:
    """Number of edges at each node."""
    return np.bincount(graph.edges.ravel(), minlength=graph.n_nodes)


def component_labels(graph: MapperGraph) -> tuple[int, np.ndarray]:
    """``(n_components, label per node)``; components are numbered by their first node."""
    n = graph.n_nodes
    if n == 0:
        return 0, np.zeros(0, dtype=np.int64)
    e = graph.edges
    adj = coo_matrix((np.ones(e.shape[0]), (e[:, 0], e[:, 1])), shape=(n, n)).tocsr()
    count, labels = connected_components(adj, directed=False)
    return int(count), labels.astype(np.int64)


def row_components(graph: MapperGraph) -> np.ndarray:
    """The component of each row (rows in no node get ``-1``).

    All nodes that hold one row share that row, hence are adjacent, hence lie in one
    component; so the component of a row is well defined.
    """
    _, labels = component_labels(graph)
    out = np.full(graph.n_rows, -1, dtype=np.int64)
    for node, rows in enumerate(graph.members):
        out[rows] = labels[node]
    return out


def invariants(graph: MapperGraph) -> Invariants:
    """Nodes, edges, components, cycle rank, leaves, branch points, isolated nodes.

    Examples
    --------
    >>> import numpy as np
    >>> from topoaudit.mapper.graph import MapperGraph
    >>> ring = MapperGraph.from_members([np.array([0, 1]), np.array([1, 2]),
    ...                                  np.array([2, 3]), np.array([3, 0])], n_rows=4)
    >>> invariants(ring)
    Invariants(n_nodes=4, n_edges=4, n_components=1, cycle_rank=1, n_leaves=0, \
n_branch_points=0, n_isolated=0)
    """
    count, _ = component_labels(graph)
    deg = degrees(graph)
    return Invariants(
        n_nodes=graph.n_nodes,
        n_edges=graph.n_edges,
        n_components=count,
        cycle_rank=graph.n_edges - graph.n_nodes + count,
        n_leaves=int(np.sum(deg == 1)),
        n_branch_points=int(np.sum(deg >= 3)),
        n_isolated=int(np.sum(deg == 0)),
    )
