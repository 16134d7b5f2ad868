"""A three-armed star: three flares from a common centre.

With the eccentricity filter (low at the centre, high at the tips), the intervals past the
centre each meet the three arms in three pieces, so the graph is a tree with one branch
point and three leaves. Source: common practice, no source.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, describe
from topoaudit.mapper.topology import invariants


def make_data(n: int = 1500, noise: float = 0.03, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    arm = rng.integers(0, 3, n)
    r = rng.uniform(0.0, 1.0, n)
    angle = arm * 2 * np.pi / 3
    X = np.column_stack([r * np.cos(angle), r * np.sin(angle)]) + rng.normal(0.0, noise, (n, 2))
    return Data(X, arm)


def check(graph, data, setting):
    inv = invariants(graph)
    ok = inv.n_components == 1 and inv.cycle_rank == 0 and inv.n_leaves == 3
    return ok, describe(inv) + f", {inv.n_leaves} leaves, {inv.n_branch_points} branch points"


CASE = ReferenceCase(
    name="three_armed_star",
    title="Three-armed star, eccentricity filter",
    source="common practice, no source",
    expected="a tree (1 component, cycle rank 0) with 3 leaves",
    make_data=make_data,
    params={
        "filter": "eccentricity",
        "n_intervals": 6,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [4, 5, 6, 7, 8], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
