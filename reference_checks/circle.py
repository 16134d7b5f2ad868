"""A noisy circle, sliced by height: the nerve is a cycle.

With the height as filter and ``k`` intervals, the top and bottom intervals each meet the
circle in one arc and the ``k - 2`` middle ones in two arcs, so the graph is a cycle of
``2k - 2`` nodes: a hexagon (6 nodes, 6 edges) at ``k = 4``. Its cycle rank is 1, the first
Betti number of the circle. At the settings chosen from the data, ``k`` is the interval
count the rule chose. Source: common practice, no source.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, chosen_intervals, describe
from topoaudit.mapper.topology import degrees, invariants


def make_data(n: int = 1000, noise: float = 0.03, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    angle = rng.uniform(0.0, 2 * np.pi, n)
    X = np.column_stack([np.cos(angle), np.sin(angle)]) + rng.normal(0.0, noise, (n, 2))
    return Data(X)


def check(graph, data, setting):
    inv = invariants(graph)
    k = chosen_intervals(graph, setting)
    cycle = inv.n_components == 1 and bool(np.all(degrees(graph) == 2))
    ok = cycle and inv.n_nodes == 2 * k - 2 and inv.n_edges == 2 * k - 2 and inv.cycle_rank == 1
    return ok, describe(inv) + ("; a cycle" if cycle else "; not a cycle")


CASE = ReferenceCase(
    name="circle",
    title="Noisy circle, height filter",
    source="common practice, no source (the circle's first Betti number is 1)",
    expected="a cycle of 2k-2 nodes: at k=4 a hexagon, 6 nodes, 6 edges, cycle rank 1",
    make_data=make_data,
    params={
        "filter": "coordinate",
        "filter_params": {"columns": 1},
        "n_intervals": 4,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [3, 4, 5, 6], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
