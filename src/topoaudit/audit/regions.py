"""The partition of a graph into regions, so every row has one home region.

Nodes are grouped by Louvain community detection (Blondel et al., 2008; networkx's
``louvain_communities``) on the graph weighted by edge Jaccard, with a fixed seed.
Regions are numbered 1, 2, ... by size (rows), largest first, ties by their first node.
A row that lies in several nodes takes the region of the largest of them (ties: the
lowest node id), so the region table covers every row exactly once and adds up to the
data set. Rows in no node (possible only with the ``drop`` noise policy) get region 0.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx
import numpy as np

from topoaudit.mapper.graph import MapperGraph

__all__ = ["Partition", "partition_graph"]


@dataclass(frozen=True, eq=False)
class Partition:
    """Region of each node and home region of each row."""

    node_region: np.ndarray
    row_region: np.ndarray

    @property
    def n_regions(self) -> int:
        return int(self.node_region.max()) if self.node_region.size else 0

    def rows_of(self, region: int) -> np.ndarray:
        return np.flatnonzero(self.row_region == region)


def partition_graph(
    graph: MapperGraph, *, resolution: float = 1.0, random_state: int = 0
) -> Partition:
    """Partition ``graph`` into regions (see module docstring).

    Examples
    --------
    >>> g = MapperGraph.from_members([np.array([0, 1]), np.array([1, 2]), np.array([5, 6])],
    ...                              n_rows=7)
    >>> p = partition_graph(g)
    >>> p.node_region.tolist(), p.row_region.tolist()
    ([1, 1, 2], [1, 1, 1, 0, 0, 2, 2])
    """
    communities = nx.community.louvain_communities(
        graph.to_networkx(), weight="jaccard", resolution=resolution, seed=random_state
    )
    keyed = []
    for com in communities:
        nodes = sorted(com)
        rows = graph.rows_of(nodes)
        keyed.append((-rows.size, nodes[0], nodes))
    keyed.sort()
    node_region = np.zeros(graph.n_nodes, dtype=np.int64)
    for rid, (_, _, nodes) in enumerate(keyed, start=1):
        node_region[nodes] = rid
    home = graph.home_nodes()  # the largest node holding each row (lowest id on ties)
    row_region = np.where(home >= 0, node_region[home], 0)
    return Partition(node_region=node_region, row_region=row_region)
