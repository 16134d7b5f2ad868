"""A Y of three segments with five noise dimensions, sliced by height: three flares.

Three segments of length 1 leave the origin of the plane of the first two coordinates
at 120 degrees from each other (one straight down, two up and out), 500 rows each,
uniform along the segment; five more coordinates hold only noise, and every coordinate
gets Gaussian noise of 0.03. The height (the second coordinate) runs from the tip of the
stem (a minimum, -1) through the junction (0) to the tips of the two arms (maxima, 0.5).
A Y is a tree with one branch point and three leaves, so the graph must be one
component with no loop and three flares (branches from a leaf to the junction), with
three leaves; the noise dimensions add no shape. Source: common practice, no source.

At the settings chosen from the data the rule treats the 1% of rows farthest from the
others as isolated (``topoaudit.mapper.auto``): such a row forms a node of its own, a
spur or a one-node component. There the check counts the flares and components that hold
at least 1% of the rows; at given settings it counts every leaf.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, describe
from topoaudit.mapper.features import shape_features
from topoaudit.mapper.topology import invariants

_ANGLES = np.array([-np.pi / 2, np.pi / 6, 5 * np.pi / 6])


def make_data(n: int = 1500, noise: float = 0.03, extra: int = 5, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    arm = np.repeat(np.arange(3), n // 3)
    t = rng.uniform(0.0, 1.0, arm.size)
    plane = np.column_stack([t * np.cos(_ANGLES[arm]), t * np.sin(_ANGLES[arm])])
    X = np.column_stack([plane, np.zeros((arm.size, extra))])
    return Data(X + rng.normal(0.0, noise, X.shape), arm)


def check(graph, data, setting):
    inv = invariants(graph)
    features = shape_features(graph)
    if setting.get("n_intervals", "auto") != "auto":  # given settings: every leaf counts
        flares = sum(f.kind == "flare" for f in features)
        ok = inv.n_components == 1 and inv.cycle_rank == 0 and flares == 3 and inv.n_leaves == 3
        return ok, describe(inv) + f", {flares} flares, {inv.n_leaves} leaves"
    least = 0.01 * graph.n_rows  # chosen settings: isolated rows are not shape
    flares = sum(f.kind == "flare" and graph.rows_of(f.nodes).size >= least for f in features)
    groups = sum(f.kind == "component" and graph.rows_of(f.nodes).size >= least for f in features)
    ok = groups == 1 and inv.cycle_rank == 0 and flares == 3
    return ok, describe(inv) + f", {flares} flares and {groups} component(s) of 1% of rows or more"


CASE = ReferenceCase(
    name="y_three_flares",
    title="A Y (three segments) in 7-D, five noise dimensions; height filter",
    source="common practice, no source (a Y is a tree with one branch point, three leaves)",
    expected="1 component, cycle rank 0, 3 flares (3 leaves)",
    make_data=make_data,
    params={
        "filter": "coordinate",
        "filter_params": {"columns": 1},
        "n_intervals": 8,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [6, 7, 8, 9, 10], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
