"""A sphere sliced by height: the Reeb graph is a path.

Rows are drawn uniformly on the unit sphere in three dimensions (normalised Gaussian
vectors) with Gaussian noise of 0.05 in each coordinate. The height (the third
coordinate) has two critical points, a minimum and a maximum, and every level set in
between is one circle, so the Reeb graph is an arc: one component, no loop (at most
``g = 0`` loops for a surface of genus 0; Cole-McLaughlin, Edelsbrunner, Harer, Natarajan
and Pascucci, "Loops in Reeb graphs of 2-manifolds", Discrete Comput. Geom. 32, 2004), no
branch point and two leaves. The Mapper graph of the height filter must be a path. The
two critical points of the height function on the sphere: common practice, no source.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, describe
from topoaudit.mapper.topology import invariants


def make_data(n: int = 2000, noise: float = 0.05, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    X /= np.linalg.norm(X, axis=1, keepdims=True)
    return Data(X + rng.normal(0.0, noise, X.shape))


def check(graph, data, setting):
    inv = invariants(graph)
    path = (
        inv.n_components == 1
        and inv.cycle_rank == 0
        and inv.n_branch_points == 0
        and inv.n_leaves == 2
    )
    return path, describe(inv) + ("; a path" if path else "; not a path")


CASE = ReferenceCase(
    name="sphere_height",
    title="Unit sphere, height filter",
    source=(
        "Reeb graph of the height function on a sphere (an arc): Cole-McLaughlin et al. "
        "(2004); common practice"
    ),
    expected="a path: 1 component, cycle rank 0, no branch point, 2 leaves",
    make_data=make_data,
    params={
        "filter": "coordinate",
        "filter_params": {"columns": 2},
        "n_intervals": 8,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [6, 7, 8, 9, 10], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
