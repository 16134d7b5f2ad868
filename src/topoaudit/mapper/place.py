"""New rows placed on a Mapper graph built from other rows.

A graph is built from the rows of one data set; a later data set (a newer validation
window) can be read on the same graph by placing each of its rows where a row of the first
would lie:

1. **filter value**: the graph's filter applied to the new row as it was fitted on the
   first rows (the principal components of the first rows for ``pca``; for any other
   filter, the filter values of the new row's five nearest first rows, weighted by inverse
   distance, which is exact for a row equal to one of them);
2. **cover elements**: every element whose first rows' filter values span the new value
   (in each filter dimension). A row of the first data set lies in exactly the elements it
   was built in: the rows of an element lie inside its interval, so a value outside the
   interval lies outside their span;
3. **nearest cluster there**: in each of those elements, the node holding the first row
   nearest to the new row (Euclidean, in the graph's feature space).

A new row whose value falls in no element's span (between the spans of sparse data, or
beyond the first rows' range) takes the nodes of its nearest first row. Each new row also
records that nearest first row (``nearest``): the row it stands on, through which any set
of first rows (a weak region, a node) is read on the new rows.

Placing the graph's own rows gives back each row's nodes exactly (tested).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from sklearn.neighbors import NearestNeighbors

from topoaudit.errors import DataError
from topoaudit.mapper.graph import MapperGraph

__all__ = ["Placement", "filter_values_for", "place_rows"]

NEIGHBOURS = 5


@dataclass(frozen=True, eq=False)
class Placement:
    """Where each new row lies on the graph.

    ``indptr``/``nodes``: the nodes of new row ``r`` are ``nodes[indptr[r]:indptr[r+1]]``
    (CSR, as :meth:`MapperGraph.row_nodes`); ``nearest``: the first row each new row stands
    on; ``outside``: rows placed by their nearest first row alone (no element spans them).
    """

    indptr: np.ndarray
    nodes: np.ndarray
    nearest: np.ndarray
    outside: np.ndarray

    @property
    def n_rows(self) -> int:
        return int(self.nearest.size)

    def nodes_of(self, r: int) -> np.ndarray:
        return self.nodes[self.indptr[r] : self.indptr[r + 1]]

    def home_nodes(self, graph: MapperGraph) -> np.ndarray:
        """Each new row's home node: the largest of its nodes, the lowest id on ties (the
        rule of :func:`topoaudit.audit.regions.partition_graph`); -1 for a row in none."""
        sizes = graph.node_sizes
        out = np.full(self.n_rows, -1, dtype=np.int64)
        for r in range(self.n_rows):
            nodes = self.nodes_of(r)
            if nodes.size:
                out[r] = nodes[np.lexsort((nodes, -sizes[nodes]))[0]]
        return out


def filter_values_for(
    X_first: np.ndarray, values_first: np.ndarray, X_new: np.ndarray, filter_obj=None
) -> np.ndarray:
    """The filter values of ``X_new`` as the filter was fitted on ``X_first`` (step 1)."""
    from topoaudit.mapper.filters import PrincipalComponents

    if isinstance(filter_obj, PrincipalComponents) and not filter_obj.standardize:
        from sklearn.decomposition import PCA

        solver = "covariance_eigh" if X_first.shape[0] >= X_first.shape[1] else "full"
        pca = PCA(n_components=filter_obj.n_components, svd_solver=solver).fit(X_first)
        if np.allclose(pca.transform(X_first), values_first, rtol=1e-7, atol=1e-9):
            return pca.transform(X_new)
    k = min(NEIGHBOURS, X_first.shape[0])
    dist, idx = NearestNeighbors(n_neighbors=k).fit(X_first).kneighbors(X_new)
    exact = dist[:, 0] == 0.0
    w = 1.0 / np.maximum(dist, 1e-300)
    w[exact] = 0.0
    w[exact, 0] = 1.0
    w /= w.sum(axis=1, keepdims=True)
    return np.einsum("rk,rkd->rd", w, values_first[idx])


def _check(graph: MapperGraph, X_first, values_first, X_new) -> None:
    if X_first.shape[0] != graph.n_rows or values_first.shape[0] != graph.n_rows:
        msg = (
            f"The graph holds {graph.n_rows} rows; the first rows given have "
            f"{X_first.shape[0]} feature rows and {values_first.shape[0]} filter values."
        )
        raise DataError(msg)
    if X_new.ndim != 2 or X_new.shape[1] != X_first.shape[1]:
        msg = (
            f"New rows need the {X_first.shape[1]} feature columns of the graph's rows; "
            f"got shape {X_new.shape}."
        )
        raise DataError(msg)


def place_rows(
    graph: MapperGraph,
    X_first: np.ndarray,
    values_first: np.ndarray,
    X_new: np.ndarray,
    *,
    values_new: np.ndarray | None = None,
    filter_obj=None,
) -> Placement:
    """Place the rows of ``X_new`` on ``graph`` (built from ``X_first`` with filter values
    ``values_first``); see the module docstring."""
    X_first = np.asarray(X_first, float)
    X_new = np.asarray(X_new, float)
    values_first = np.asarray(values_first, float).reshape(X_first.shape[0], -1)
    _check(graph, X_first, values_first, X_new)
    if values_new is None:
        values_new = filter_values_for(X_first, values_first, X_new, filter_obj)
    values_new = np.asarray(values_new, float).reshape(X_new.shape[0], -1)
    n_new = X_new.shape[0]
    best = np.full(n_new, np.inf)
    nearest = np.full(n_new, -1, dtype=np.int64)
    pairs: list[tuple[np.ndarray, np.ndarray]] = []  # (new rows, node) per element hit
    for nodes in _elements(graph).values():
        rows = np.unique(np.concatenate([graph.members[v] for v in nodes]))
        lo, hi = values_first[rows].min(axis=0), values_first[rows].max(axis=0)
        inside = np.flatnonzero(np.all((values_new >= lo) & (values_new <= hi), axis=1))
        if not inside.size:
            continue
        dist, idx = NearestNeighbors(n_neighbors=1).fit(X_first[rows]).kneighbors(X_new[inside])
        near = rows[idx[:, 0]]
        node_of = _node_of_rows(graph, nodes, rows)
        pairs.append((inside, node_of[idx[:, 0]]))
        closer = dist[:, 0] < best[inside]
        best[inside[closer]] = dist[closer, 0]
        nearest[inside[closer]] = near[closer]
    outside = np.flatnonzero(nearest < 0)
    if outside.size:
        nn = NearestNeighbors(n_neighbors=1).fit(X_first)
        nearest[outside] = nn.kneighbors(X_new[outside])[1][:, 0]
        indptr, row_nodes = graph.row_nodes()
        for r in outside:
            f = nearest[r]
            for v in row_nodes[indptr[f] : indptr[f + 1]]:
                pairs.append((np.array([r]), np.array([v])))
    return _as_csr(pairs, n_new, nearest, outside)


def _elements(graph: MapperGraph) -> dict[tuple[int, ...], list[int]]:
    out: dict[tuple[int, ...], list[int]] = {}
    for v in range(graph.n_nodes):
        out.setdefault(tuple(int(i) for i in graph.node_element[v]), []).append(v)
    return out


def _node_of_rows(graph: MapperGraph, nodes: list[int], rows: np.ndarray) -> np.ndarray:
    """For each of ``rows`` (sorted), the one node of ``nodes`` holding it (nodes of one
    element do not share rows)."""
    out = np.empty(rows.size, dtype=np.int64)
    for v in nodes:
        out[np.searchsorted(rows, graph.members[v])] = v
    return out


def _as_csr(pairs, n_new: int, nearest: np.ndarray, outside: np.ndarray) -> Placement:
    if pairs:
        rows = np.concatenate([p[0] for p in pairs])
        nodes = np.concatenate([p[1] for p in pairs])
    else:
        rows = nodes = np.zeros(0, dtype=np.int64)
    order = np.lexsort((nodes, rows))
    rows, nodes = rows[order], nodes[order]
    indptr = np.zeros(n_new + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=n_new), out=indptr[1:])
    return Placement(indptr=indptr, nodes=nodes.astype(np.int64), nearest=nearest, outside=outside)
