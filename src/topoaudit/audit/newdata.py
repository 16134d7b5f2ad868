"""A release validated on a data file of its own, read on the graph of the release before.

When the release before was audited on other rows, its graph is rebuilt from its data file
at its settings (checked against its bundle: the same data fingerprint, every row in the
same nodes), and the new rows are placed on it (:mod:`topoaudit.mapper.place`): encoded
and scaled as the earlier rows were, then given the nodes and the nearest earlier row
their place implies. The new bundle records, per row, the earlier row it stands on
(``placed_on``), through which the review across releases follows the earlier weak
regions (:mod:`topoaudit.audit.lineage`), and the audit records the population shift per
region and per node of the earlier graph (:mod:`topoaudit.audit.drift`).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from sklearn.preprocessing import StandardScaler

from topoaudit.audit.drift import shifts
from topoaudit.bundle.files import read_analysis, read_graph, read_members
from topoaudit.bundle.records import ShiftRecord
from topoaudit.data import Dataset
from topoaudit.errors import BundleError, DataError
from topoaudit.mapper.place import Placement, place_rows

__all__ = ["Placed", "aligned_features", "place_on_previous"]


@dataclass(frozen=True, eq=False)
class Placed:
    """The new rows on the earlier graph."""

    previous: str
    placement: Placement
    placed_on: np.ndarray  # the earlier row id each new row stands on
    rows_before: int
    regions: list[ShiftRecord]
    nodes: list[ShiftRecord]


def aligned_features(new: Dataset, first: Dataset, where: str) -> np.ndarray:
    """``new``'s encoded features in ``first``'s columns: a one-hot column of a level the
    new rows lack is 0; a feature or level the first rows never had is refused."""
    names = list(first.feature_names)
    extra = [c for c in new.feature_names if c not in names]
    if extra:
        msg = (
            f"{where}: the new rows have feature columns the earlier release's rows did not "
            f"({', '.join(extra[:5])}); they cannot be placed on its graph. Keep the same "
            "features and levels, or audit the new file without a release before it."
        )
        raise DataError(msg)
    X = np.zeros((new.n_rows, len(names)))
    for j, c in enumerate(new.feature_names):
        X[:, names.index(c)] = new.X[:, j]
    return X


def _previous_members(folder: Path, first: Dataset):
    members = read_members(folder, ["id", "nodes", "region"])
    ids = members["id"].astype(str).to_numpy()
    if ids.size != first.n_rows or not np.array_equal(ids, first.ids.astype(str)):
        msg = (
            f"{folder}: its rows are not those of the earlier release's data file as read "
            "now (ids differ): the earlier graph cannot be rebuilt."
        )
        raise BundleError(msg)
    return members


def place_on_previous(config, ds: Dataset, previous: str | Path, prepare, shown_graph) -> Placed:
    """Place ``ds`` (the new release's rows) on the graph of the bundle ``previous``.

    ``prepare`` and ``shown_graph`` are :func:`topoaudit.audit.run.prepare` and
    :func:`~topoaudit.audit.run.shown_graph` (passed in to keep this module below them).
    """
    from topoaudit.data import load_dataset

    folder = Path(previous)
    earlier = read_analysis(folder)
    rel = config.release(earlier.release)
    first = load_dataset(config, release=rel.name)
    if first.fingerprint != earlier.provenance.fingerprint:
        msg = (
            f"{folder}: release {rel.name} was audited on rows with fingerprint "
            f"{earlier.provenance.fingerprint[:12]}..., its data file now reads as "
            f"{first.fingerprint[:12]}...: the earlier graph cannot be rebuilt."
        )
        raise BundleError(msg)
    members = _previous_members(folder, first)
    inp = prepare(
        dataclasses.replace(config, seed=earlier.provenance.seed), first, release=rel.name
    )
    builder = shown_graph(inp)
    graph = builder.graph_
    indptr, nodes = graph.row_nodes()
    rebuilt = [nodes[indptr[r] : indptr[r + 1]].tolist() for r in range(first.n_rows)]
    if rebuilt != [list(v) for v in members["nodes"]]:
        msg = f"{folder}: its graph could not be rebuilt as published (nodes differ)."
        raise BundleError(msg)
    X_new = aligned_features(ds, first, str(ds.source or "the new data file"))
    if config.graph.standardize:  # scaled as prepare() scaled the earlier rows
        X_new = StandardScaler().fit(first.X).transform(X_new)
    placement = place_rows(
        graph, inp.X, builder.filter_values_, X_new, filter_obj=builder._filter_obj
    )
    home = placement.home_nodes(graph)
    node_region = np.zeros(graph.n_nodes, dtype=np.int64)
    for node in read_graph(folder).nodes:
        node_region[node.id] = node.region
    region_parts = np.arange(1, int(node_region.max()) + 1) if node_region.size else None
    return Placed(
        previous=earlier.release,
        placement=placement,
        placed_on=first.ids.astype(str)[placement.nearest],
        rows_before=first.n_rows,
        regions=shifts(members["region"].to_numpy(), node_region[home], region_parts),
        nodes=shifts(graph.home_nodes(), home, np.arange(graph.n_nodes)),
    )
