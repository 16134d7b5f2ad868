"""Two disjoint circles, side by side.

Two disjoint circles have two connected components and first Betti number 2: the graph
must show 2 components, cycle rank 2, and keep each circle's rows in its own component.
Source: common practice, no source.
"""

from __future__ import annotations

import numpy as np

from reference_checks import circle
from reference_checks._case import Data, ReferenceCase, describe, groups_apart
from topoaudit.mapper.topology import invariants


def make_data() -> Data:
    a = circle.make_data(seed=1).X
    b = circle.make_data(seed=2).X + np.array([3.0, 0.0])
    return Data(np.vstack([a, b]), np.repeat([0, 1], [a.shape[0], b.shape[0]]))


def check(graph, data, setting):
    inv = invariants(graph)
    apart, _ = groups_apart(graph, data.labels)
    ok = inv.n_components == 2 and inv.cycle_rank == 2 and apart
    return ok, describe(inv) + ("; circles apart" if apart else "; circles mixed")


_HEIGHT = {"filter": "coordinate", "filter_params": {"columns": 1}}

CASE = ReferenceCase(
    name="two_circles",
    title="Two disjoint circles, height filter",
    source="common practice, no source (two circles: 2 components, Betti-1 number 2)",
    expected="2 components, cycle rank 2, each circle in its own component",
    make_data=make_data,
    params={**_HEIGHT, "n_intervals": 6, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [4, 5, 6, 7, 8], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
